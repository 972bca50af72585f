"""Numerical-health rules for explicit momentum-conserving PIC (Birdsall & Langdon 1991, ch. 8;
Hockney & Eastwood 1988), and the step that ``time.dt = "auto"`` picks from them.

Each rule is one small function returning the number it checks; :func:`check_deck` turns them
into findings: a *warning* says the number and the fix; a *refusal* marks a run that would be
meaningless (the CLI stops with exit status 2 unless ``--force``).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

#: accuracy bound on omega_p dt for leapfrog (common practice: 0.1-0.2; stability needs < 2)
OMEGA_DT_ACCURATE = 0.1
OMEGA_DT_WARN = 0.2
#: leapfrog stability limit of a plasma oscillation, omega_p dt < 2 (Birdsall & Langdon 1991, sec. 4-6)
OMEGA_DT_LIMIT = 2.0
#: fraction of a cell a particle may cross per step (common practice)
CELL_CROSSING_AUTO = 0.5
#: Debye-length resolution against the finite-grid instability: dx <= pi lambda_D
#: (common practice for CIC; Birdsall & Langdon 1991, sec. 8-9 show the heating grows with dx/lambda_D)
DX_OVER_DEBYE_WARN = math.pi
DX_OVER_DEBYE_REFUSE = 4.0 * math.pi
#: cold drifting beam: aliased beam resonances couple when the grid wavenumber 2 pi/dx times
#: v_d comes near omega_p; keep omega_p dx / |v_d| <= 1 (from memory, Birdsall & Langdon 1991,
#: sec. 8-10 on the cold-beam grid instability; common practice)
COLD_BEAM_WARN = 1.0
#: cells per wavelength of the fastest-growing mode (common practice)
CELLS_PER_WAVELENGTH_WARN = 8
CELLS_PER_WAVELENGTH_REFUSE = 4


#: the stable id of every rule (what code and tests match on) and its printed name
RULES = {
    "leapfrog_stability": "leapfrog stability",
    "time_step_accuracy": "time-step accuracy",
    "cell_crossing": "cell crossing",
    "finite_grid_instability": "finite-grid instability",
    "cold_beam_grid_instability": "cold-beam grid instability",
    "fastest_mode_resolution": "fastest mode resolution",
    "fastest_mode_containment": "fastest mode containment",
    "no_unstable_box_mode": "no unstable box mode",
    "noise_floor": "noise floor",
    "table_support": "table support",
}


def _rule_id(name: str) -> str:
    return name.replace("-", "_").replace(" ", "_")


@dataclass(frozen=True)
class Finding:
    """One health finding. ``message`` is the number and the fix, without the species it
    concerns: those are ``species`` (a tuple of names, empty for a deck-wide finding), so that
    findings alike for several species merge on the fields (:func:`merge_findings`)."""
    level: str        # "warning" | "refusal"
    rule: str         # printed name of the rule (RULES)
    key: str          # the deck key to change
    message: str      # the number and the fix
    value: object = None  # the key's current value
    species: tuple[str, ...] = ()
    id: str = ""      # stable rule id (RULES); derived from ``rule`` when not given

    def __post_init__(self):
        if not self.id:
            object.__setattr__(self, "id", _rule_id(self.rule))
        object.__setattr__(self, "species", tuple(self.species))

    @property
    def text(self) -> str:
        """The message as printed and written to summary.json (the species named first)."""
        if self.species:
            return f"species {', '.join(self.species)}: {self.message}"
        return self.message

    def __str__(self) -> str:
        return f"{self.rule}: {self.text}"

    def entry(self) -> dict:
        """The summary.json ``health`` entry."""
        return {"level": self.level, "rule": self.rule, "key": self.key, "message": self.text,
                "species": list(self.species)}


def _finding(level, rule_id, key, message, value=None, species=()) -> Finding:
    return Finding(level, RULES[rule_id], key, message, value, tuple(species), rule_id)


def merge_findings(findings) -> list[str]:
    """One line per health finding; findings alike but for their species (same rule, level and
    message) are one line naming them all ("species electrons, positrons: ...")."""
    groups: dict[tuple, list[str]] = {}
    first: dict[tuple, Finding] = {}
    for f in findings:
        key = (f.id, f.level, f.message, bool(f.species)) + (() if f.species else (id(f),))
        if key not in groups:
            groups[key], first[key] = [], f
        groups[key].extend(f.species)
    lines = []
    for key, names in groups.items():
        f = first[key]
        suffix = "" if f.level == "warning" else " (run forced)"
        text = f"species {', '.join(names)}: {f.message}" if names else f.message
        lines.append(f"{f.rule}: {text}{suffix}")
    return lines


#: fewest momentum cells across the interquartile range of a table species (Vlasov), common
#: practice: a hump needs a few cells per width to be advected without smearing
TABLE_CORE_CELLS = 8


def omega_p_total(species) -> float:
    """Total (non-relativistic, upper-bound) plasma frequency sqrt(sum omega_ps^2), in omega_p."""
    return math.sqrt(sum(s.omega_p2 for s in species))


def debye_length(s) -> float:
    """lambda_D,s = v_th,s / omega_ps with v_th^2 = theta c^2 (non-relativistic; in c/omega_p)."""
    if s.distribution == "waterbag":
        vth = s.spread_u / math.sqrt(3.0)     # rms of a flat distribution of half-width D
    elif s.distribution == "table":
        vth = table_core_width(s)
    else:
        vth = math.sqrt(s.theta)
    return vth / math.sqrt(s.omega_p2) if vth > 0 else 0.0


def table_core_width(s) -> float:
    """The thermal-speed equivalent of a tabulated species' core: the interquartile range of its
    velocity, / 1.349 (= 2 x 0.6745, the quartiles of a Gaussian; a robust width, not moved by a
    broad tail as the rms would be), in c."""
    q = s.table.inverse_cdf([0.25, 0.75])
    v = q / (1.0 + q * q) ** 0.5
    return float(v[1] - v[0]) / 1.349


def velocity_max(s) -> float:
    """A bound on |v| for a species' loaded particles, in c.

    Cold: |beta_d|. Waterbag: the faster boosted edge of +-spread_u. Juttner: the drift-frame
    momentum six standard deviations out (a fraction ~1e-9 lies beyond), boosted.
    """
    if s.distribution == "table":
        lo, hi = s.table.support
        return max(abs(lo), abs(hi)) / math.sqrt(1.0 + max(lo * lo, hi * hi))
    if s.distribution == "waterbag":
        edge = s.spread_u
    elif s.distribution == "juttner" and s.theta > 0:
        from .loading import juttner_u_range
        lo, hi = juttner_u_range(0.0, s.theta, sigmas=6.0)
        edge = hi
    else:
        edge = 0.0
    g_d, b_d = s.drift_gamma, s.drift_beta
    best = 0.0
    for up in (edge, -edge):
        gp = math.sqrt(1.0 + up * up)
        u = g_d * (up + b_d * gp)  # Lorentz boost of (gamma', u') by beta_d
        best = max(best, abs(u) / math.sqrt(1.0 + u * u))
    return best


def auto_dt(box, species, end: float | None = None) -> float:
    """The step for ``dt = "auto"``: omega_p dt <= 0.1 and v_max dt <= 0.5 dx, rounded down to
    two significant digits and, given the run's ``end``, shortened so that it divides it (a run
    shorter than that step takes one step of ``end``)."""
    dt = OMEGA_DT_ACCURATE / max(omega_p_total(species), 1e-300)
    vmax = max(velocity_max(s) for s in species)
    if vmax > 0:
        dt = min(dt, CELL_CROSSING_AUTO * box.dx / vmax)
    exp = math.floor(math.log10(dt))
    dt = float(f"{math.floor(dt / 10**exp * 10) / 10:.1f}e{exp}")
    if end is not None:
        dt = end / max(1, math.ceil(end / dt * (1 - 1e-12)))
    return dt


def check_deck(deck, dispersion=None) -> list[Finding]:
    """All health findings for a deck. ``dispersion``: the deck's linear theory
    (:class:`streamsim.theory.Dispersion`), if known."""
    from .numbers import finite_or_none
    out: list[Finding] = []
    dt, dx = deck.time.dt, deck.box.dx
    wp = omega_p_total(deck.species)

    # -- time step against the plasma frequency ------------------------------------------
    wdt = wp * dt
    if wdt >= OMEGA_DT_LIMIT:
        out.append(_finding("refusal", "leapfrog_stability", "time.dt", value=dt, message=
                           f"omega_p dt = {wdt:.3g} >= 2, the leapfrog limit: the run would blow up; "
                           f"use dt <= {OMEGA_DT_ACCURATE / wp:.3g} (or dt = \"auto\")"))
    elif wdt > OMEGA_DT_WARN:
        out.append(_finding("warning", "time_step_accuracy", "time.dt", value=dt, message=
                           f"omega_p dt = {wdt:.3g} > {OMEGA_DT_WARN}: frequencies and growth rates "
                           f"carry errors of order (omega_p dt)^2/24 = {wdt**2 / 24:.1e}; use dt <= "
                           f"{OMEGA_DT_ACCURATE / wp:.3g} (or dt = \"auto\")"))

    # -- cell crossing -----------------------------------------------------------------
    for s in deck.species:
        v = velocity_max(s)
        if v * dt >= dx:
            out.append(_finding("warning", "cell_crossing", "time.dt", value=dt, species=(s.name,), message=
                               f"v_max dt = {v * dt:.3g} >= dx = {dx:.3g}: particles "
                               f"skip cells; use dt <= {CELL_CROSSING_AUTO * dx / v:.3g} (or dt = \"auto\")"))

    # -- Debye length / finite-grid instability, cold-beam grid instability -------------
    for s in deck.species:
        lam = debye_length(s)
        if lam > 0:
            ratio = dx / lam
            if ratio > DX_OVER_DEBYE_REFUSE:
                level = "refusal"
            elif ratio > DX_OVER_DEBYE_WARN:
                level = "warning"
            else:
                continue
            need = math.ceil(deck.box.length / (DX_OVER_DEBYE_WARN * lam))
            out.append(_finding(level, "finite_grid_instability", "box.cells", value=deck.box.cells,
                                species=(s.name,), message=
                               f"dx/lambda_D = {ratio:.3g} > pi: aliasing heats the "
                               f"plasma (Birdsall & Langdon 1991, ch. 8); use box.cells >= {need}"))
        elif s.drift_u != 0:
            ratio = math.sqrt(s.omega_p2) * dx / abs(s.drift_beta)
            if ratio > COLD_BEAM_WARN:
                need = math.ceil(deck.box.length * math.sqrt(s.omega_p2) / abs(s.drift_beta) / COLD_BEAM_WARN)
                out.append(_finding("warning", "cold_beam_grid_instability", "box.cells", value=deck.box.cells,
                                    species=(s.name,), message=
                                   f"omega_p dx/|v_d| = {ratio:.3g} > 1: a cold beam "
                                   f"on a coarse grid heats numerically; use box.cells >= {need} or "
                                   f"give the beam a small theta"))

    # -- the fastest mode: resolved and contained ----------------------------------------
    fastest = getattr(dispersion, "fastest", None)
    if fastest is not None and fastest.k:
        kf = fastest.k
        lam_f = 2 * math.pi / kf
        cells = lam_f / dx
        if cells < CELLS_PER_WAVELENGTH_REFUSE:
            level = "refusal"
        elif cells < CELLS_PER_WAVELENGTH_WARN:
            level = "warning"
        else:
            level = None
        if level:
            need = math.ceil(CELLS_PER_WAVELENGTH_WARN * deck.box.length / lam_f)
            out.append(_finding(level, "fastest_mode_resolution", "box.cells", value=deck.box.cells, message=
                                f"the fastest-growing wavelength {lam_f:.3g} c/omega_p spans only "
                                f"{cells:.2g} cells; use box.cells >= {need}"))
        if deck.box.length < lam_f:
            out.append(_finding("warning", "fastest_mode_containment", "box.length", value=deck.box.length, message=
                               f"the box ({deck.box.length:.3g} c/omega_p) is shorter than the "
                               f"fastest-growing wavelength {lam_f:.3g}; use box.fastest_wavelengths "
                               f">= 1 or box.length >= {lam_f:.3g}"))
        modes = dispersion.box_modes or []
        if modes and not any((finite_or_none(m.growth) or 0) > 0 for m in modes) \
                and (finite_or_none(fastest.growth) or 0) > 0:
            out.append(_finding("refusal", "no_unstable_box_mode", "box.length", value=deck.box.length, message=
                               "none of the box modes lies in the unstable band, so nothing can grow; "
                               "use box.fastest_wavelengths = 8"))

    # -- noise against the contrast to be measured --------------------------------------
    thr = deck.analysis.clump_threshold
    for s in deck.species:
        if s.loading == "random":
            noise = 1.0 / math.sqrt(s.particles_per_cell)   # per-cell shot noise of delta n/n
            if noise > thr / 3.0:
                need = math.ceil((3.0 / thr) ** 2)
                out.append(_finding("warning", "noise_floor", f"species.{s.name}.particles_per_cell",
                                    value=s.particles_per_cell, species=(s.name,), message=
                                   f"random-loading noise delta n/n ~ 1/sqrt(ppc) = "
                                   f"{noise:.2g} is within 3x of analysis.clump_threshold = {thr:g}: "
                                   f"noise alone would count as clumps; use particles_per_cell >= {need} "
                                   f"or loading = \"quiet\""))

    # -- a table whose support is far wider than its core (Vlasov: the momentum grid) -------
    if getattr(deck, "method", "pic") == "vlasov":
        from .vlasov.grid import momentum_grid     # lazy: the grid the Vlasov start will use
        for s in deck.species:
            if s.distribution != "table":
                continue
            g = momentum_grid(deck, s)
            du = (g.u_max - g.u_min) / g.cells
            q = s.table.inverse_cdf([0.25, 0.75])
            cells = (q[1] - q[0]) / du
            if cells < TABLE_CORE_CELLS:
                need = math.ceil(g.cells * TABLE_CORE_CELLS / max(cells, 1e-300))
                out.append(_finding("warning", "table_support", "vlasov.momentum_cells",
                                    value=g.cells, species=(s.name,), message=
                                   f"the table spans u in [{s.table.u[0]:.4g}, "
                                   f"{s.table.u[-1]:.4g}] but half its particles lie within "
                                   f"du = {q[1] - q[0]:.3g}, only {cells:.2g} momentum cells; use "
                                   f"vlasov.momentum_cells >= {need}, or cut the table's support "
                                   "(vlasov.u_min/u_max) to what the run needs"))
    return out
