"""The deck-level result of the linear theory: :class:`Dispersion` (growth curve, fastest mode,
unstable bands, box modes) and :func:`theory_for_deck`, with its JSON form (theory.json).

Normalised units inside; physical units appear only in :meth:`Dispersion.to_dict`, through
:mod:`streamsim.units`.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .. import units
from ..numbers import finite_or_none
from .roots import GROWTH_TOL, _auto_kmax, _bands_from, _curve_and_fastest, _Solver, fastest_mode
from .tabulated import StabilityVerdict, is_table, penrose_verdict
from .susceptibilities import (MODELS, THETA_COLD, _is_warm_juttner, _species_list,
                               model_for_species)

__all__ = ["FastestMode", "BoxMode", "Dispersion", "theory_for_deck"]


@dataclass(frozen=True)
class FastestMode:
    k: float          # omega_p/c
    growth: float     # omega_p
    omega_r: float    # omega_p


@dataclass(frozen=True)
class BoxMode:
    mode: int
    k: float
    growth: float     # omega_p; 0.0 when stable (negative: damping rate, maxwellian model only)
    omega_r: float | None
    maxwellian_growth: float | None = None   # juttner model only: the maxwellian model's rate,
                                             # which gives the Landau damping of stable modes


@dataclass
class Dispersion:
    """Linear theory of one deck: the growth curve, the fastest mode, the band and the box modes.

    Normalised units: k in omega_p/c, growth and omega_r in omega_p.  ``growth`` is 0.0 where the
    model finds no growing root; only the maxwellian model gives negative values (Landau damping
    rate of the least damped root).  ``omega_r`` is the real frequency of the root reported (for
    stable modes of the cold/waterbag models: the highest real frequency).
    """
    model: str
    k: np.ndarray
    growth: np.ndarray
    omega_r: np.ndarray
    fastest: FastestMode | None
    unstable_band: tuple[float, float] | None
    unstable_bands: list[tuple[float, float]]
    box_modes: list[BoxMode]
    box_length: float | None = None
    density_cm3: float | None = None
    time_end: float | None = None
    species: tuple[str, ...] = ()
    notes: list[str] = field(default_factory=list)
    stability: StabilityVerdict | None = None     # Penrose verdict on the effective G(v)

    def to_dict(self, density_cm3: float | None = None) -> dict:
        """The JSON object of ``streamsim theory --json`` (plain floats and lists, no NaN)."""
        n = density_cm3 if density_cm3 is not None else self.density_cm3
        fast = None
        if self.fastest is not None:
            f = self.fastest
            fast = {"k": f.k, "growth": f.growth, "omega_r": f.omega_r,
                    "wavelength": 2 * math.pi / f.k,
                    "growth_time": 1.0 / f.growth,
                    "growth_time_ns": None, "energy_growth_time_ns": None, "wavelength_cm": None, "k_per_cm": None,
                    "efoldings_in_run": finite_or_none(f.growth * self.time_end) if self.time_end else None}
            if n:
                t = units.growth_time_ns(f.growth, n)
                fast.update(growth_time_ns=t, energy_growth_time_ns=t / 2,
                            wavelength_cm=units.length_cm(2 * math.pi / f.k, n),
                            k_per_cm=units.wavenumber_per_cm(f.k, n))
        out = {
            "model": self.model,
            "units": "k in omega_p/c, growth and omega_r in omega_p, wavelength in c/omega_p, "
                     "growth_time in 1/omega_p (field amplitude e-folding), unless the key says "
                     "otherwise (_ns, _cm, _per_cm)",
            "density_cm3": finite_or_none(n),
            "species": list(self.species),
            "fastest": fast,
            "unstable_band": list(self.unstable_band) if self.unstable_band else None,
            "unstable_bands": [list(b) for b in self.unstable_bands],
            "box_length": finite_or_none(self.box_length),
            "box_modes": [dict({"mode": m.mode, "k": m.k, "growth": finite_or_none(m.growth),
                                "omega_r": finite_or_none(m.omega_r)},
                               **({} if m.maxwellian_growth is None else
                                  {"maxwellian_growth": finite_or_none(m.maxwellian_growth)}))
                          for m in self.box_modes],
            "curve": {"k": [finite_or_none(x) for x in self.k], "growth": [finite_or_none(x) for x in self.growth],
                      "omega_r": [finite_or_none(x) for x in self.omega_r]},
            "notes": list(self.notes),
        }
        if self.stability is not None:
            out["stability"] = self.stability.to_dict()
        if n:
            out["omega_p_rad_s"] = units.omega_p_rad_s(n)
            out["skin_depth_cm"] = units.skin_depth_cm(n)
            for d, m in zip(out["box_modes"], self.box_modes):
                d["growth_time_ns"] = finite_or_none(units.growth_time_ns(m.growth, n)) if m.growth > 0 else None
                d["wavelength_cm"] = units.length_cm(2 * math.pi / m.k, n)
        return out

    # -- typed look-ups for other rooms (instead of digging into the JSON) -------------------
    def box_mode(self, m: int) -> BoxMode | None:
        """The box mode of number ``m`` (k_m = 2 pi m / L), or None when the theory holds none."""
        for b in self.box_modes:
            if b.mode == m:
                return b
        return None

    def growth_at_mode(self, m: int) -> float | None:
        """Growth rate (omega_p) of box mode ``m``; 0.0 when stable, None when unknown."""
        b = self.box_mode(m)
        return None if b is None else finite_or_none(b.growth)

    @property
    def fastest_growth(self) -> float | None:
        """Growth rate (omega_p) of the fastest-growing mode of the continuum; None when stable."""
        return None if self.fastest is None else finite_or_none(self.fastest.growth)

    # -- theory.json back to the typed object ------------------------------------------------
    @classmethod
    def from_dict(cls, d: dict) -> "Dispersion":
        """Rebuild a Dispersion from its :meth:`to_dict` JSON (theory.json, or summary.json's
        "theory" block), so that ``Dispersion.from_dict(x).to_dict() == x``.

        JSON null becomes NaN in the curve arrays and None elsewhere.  The run length
        ``time_end`` is not stored as such: it is recovered from ``fastest.efoldings_in_run`` (to
        the last bit), and is None when the deck is stable.  Raises ValueError for an object that
        is not a theory result (e.g. the {"error": ...} block of a run whose theory failed).
        """
        if not isinstance(d, dict):
            raise ValueError(f"theory JSON must be an object, not {type(d).__name__}")
        if "error" in d and "model" not in d:
            raise ValueError(f"the theory JSON holds no result, only an error: {d['error']}")
        missing = [key for key in ("model", "fastest", "unstable_bands", "box_modes", "curve")
                   if key not in d]
        if missing:
            raise ValueError(f"not a theory JSON object: missing {', '.join(missing)}")
        curve = d["curve"] or {}

        def arr(key):
            return np.array([np.nan if x is None else float(x) for x in curve.get(key) or []],
                            dtype=float)

        f = d["fastest"]
        fastest = None
        time_end = None
        if f is not None:
            fastest = FastestMode(float(f["k"]), float(f["growth"]), float(f["omega_r"]))
            time_end = _time_from_efoldings(f.get("efoldings_in_run"), fastest.growth)
        modes = []
        for m in d["box_modes"]:
            mg = None                            # no key: not the juttner model
            if "maxwellian_growth" in m:         # null: present but not finite (NaN keeps the key)
                mg = math.nan if m["maxwellian_growth"] is None else float(m["maxwellian_growth"])
            modes.append(BoxMode(int(m["mode"]), float(m["k"]),
                                 math.nan if m.get("growth") is None else float(m["growth"]),
                                 None if m.get("omega_r") is None else float(m["omega_r"]), mg))
        band = d.get("unstable_band")
        return cls(model=str(d["model"]), k=arr("k"), growth=arr("growth"), omega_r=arr("omega_r"),
                   fastest=fastest,
                   unstable_band=None if not band else (float(band[0]), float(band[1])),
                   unstable_bands=[(float(a), float(b)) for a, b in d["unstable_bands"]],
                   box_modes=modes,
                   box_length=None if d.get("box_length") is None else float(d["box_length"]),
                   density_cm3=None if d.get("density_cm3") is None else float(d["density_cm3"]),
                   time_end=time_end, species=tuple(d.get("species") or ()),
                   notes=list(d.get("notes") or []),
                   stability=(StabilityVerdict.from_dict(d["stability"]) if d.get("stability")
                              else None))


def _time_from_efoldings(efoldings, growth: float) -> float | None:
    """The run length T with growth * T == efoldings in floating point (T = efoldings / growth,
    moved by a few ulps where the division does not give back the product exactly)."""
    if efoldings is None or not growth or not math.isfinite(growth):
        return None
    t = efoldings / growth
    for _ in range(8):
        p = growth * t
        if p == efoldings:
            return t
        t = math.nextafter(t, math.inf if p < efoldings else -math.inf)
    return efoldings / growth



def _maxwellian_alternative(model, species, km, notes) -> list:
    """The growth of the box modes ``km`` in the maxwellian model (negative = Landau damping)
    beside a juttner deck, whose model gives growing roots only; None per mode otherwise."""
    if model != "juttner":
        return [None] * len(km)
    mx = _Solver(species, "maxwellian")
    notes.append("box_modes[].maxwellian_growth: the same modes in the maxwellian model "
                 "(negative = Landau damping rate), since the juttner model gives growing "
                 "roots only")
    return list(mx.growth(mx.best(km)))

def theory_for_deck(deck, model: str | None = None, kmax: float | None = None,
                    nk: int = 400) -> Dispersion:
    """Linear theory for a deck: growth curve on nk points in (0, kmax], fastest mode, unstable
    band and the box modes k_m = 2 pi m / L, m = 1..deck.output.recorded_modes.

    ``model`` defaults to :func:`model_for_species`; ``kmax`` (omega_p/c) to 1.5 x the top of the
    cold unstable band.
    """
    species = _species_list(deck.species)
    implied = model_for_species(species)
    model = model or implied
    if model not in MODELS:
        raise ValueError(f"unknown model {model!r}; choose one of {', '.join(MODELS)}")
    notes = []
    if model != implied:
        notes.append(f"model {model!r} requested; the deck implies {implied!r}")
    if model == "cold" and implied != "cold":
        notes.append("cold model: temperatures and spreads are ignored")
    if model == "waterbag" and any(_is_warm_juttner(s) for s in species):
        notes.append("waterbag model: each warm Juttner species is the waterbag of equal "
                     "rest-frame <u'^2>")
    if model == "maxwellian":
        notes.append("maxwellian model: warm species as drifting Maxwellians with "
                     "v_th = sqrt(theta)/Gamma^2 and omega_p^2/Gamma^3; negative growth = Landau "
                     "damping rate of the least damped root")
    if model == "juttner":
        notes.append("juttner model: growing roots only; growth 0.0 where no growing root "
                     "(damped Juttner roots not supported)")
        for s in species:
            if s.distribution == "juttner" and 0 < s.theta <= THETA_COLD:
                notes.append(f"species {s.name}: theta <= {THETA_COLD:g}, treated as cold")
    if model == "table":
        notes.append("table model: f linear in v between the rows, zero outside; growing roots "
                     "only (exact for the interpolant), growth 0.0 where none; damped roots of a "
                     "table are not in the curve (a piecewise-linear f has no unique analytic "
                     "continuation): streamsim.theory.table_damped_root gives them from a "
                     "rational (AAA) fit of G, treating the table as samples of a smooth f")
    verdict = penrose_verdict(species)
    notes.extend(f"stability: {n}" for n in verdict.notes)
    solver = _Solver(species, model)
    kmax_used = float(kmax) if kmax else _auto_kmax(species)
    helper = _Solver(species, "maxwellian") if model == "juttner" else None
    if verdict.stable and model in ("juttner", "table"):
        # Penrose: no growing root exists, so none is searched for
        notes.append("stable by the Penrose criterion: no growing root searched for")
        k = np.linspace(kmax_used / nk, kmax_used, int(nk))
        w = np.full(k.shape, np.nan, complex)
        g = np.zeros(k.shape)
        fast = None
    else:
        k, w, g, fast = _curve_and_fastest(solver, kmax_used, int(nk), extend=kmax is None,
                                           helper=helper)
        if fast is None and not verdict.stable and model in ("juttner", "table"):
            notes.append("the Penrose criterion says unstable but no growing root was found in "
                         f"k <= {k[-1]:.4g}: the growth may be below {GROWTH_TOL:g} omega_p or "
                         "at larger k (set kmax)")
    if model == "juttner" and fast is None:
        other = fastest_mode(species, "maxwellian")
        if other is not None and other[1] > 10 * GROWTH_TOL:
            notes.append("no growing Juttner root was found (also from the maxwellian roots as "
                         f"seeds) although the maxwellian model grows at {other[1]:.4g} omega_p "
                         f"(k = {other[0]:.4g}); the Juttner result may be stable by relativistic "
                         "effects or the root was missed: compare with --model maxwellian")
    fastest = FastestMode(*map(float, (fast[0], fast[1].imag, fast[1].real))) if fast else None
    bands = _bands_from(solver, k, w, g)
    band = None
    if fastest is not None:
        for b in bands:
            if b[0] - 1e-12 <= fastest.k <= b[1] + 1e-12:
                band = b
        if band is None and bands:
            band = min(bands, key=lambda b: min(abs(b[0] - fastest.k), abs(b[1] - fastest.k)))

    length = float(deck.box.length)
    nmodes = int(deck.output.recorded_modes or min(deck.box.cells // 2, 64))
    m = np.arange(1, nmodes + 1)
    km = 2 * math.pi * m / length
    if verdict.stable and model in ("juttner", "table"):
        alt = _maxwellian_alternative(model, species, km, notes)
        modes = [BoxMode(int(mi), float(ki), 0.0, None,
                         None if ai is None or not np.isfinite(ai) else float(ai))
                 for mi, ki, ai in zip(m, km, alt)]
        return Dispersion(model=model, k=k, growth=g, omega_r=np.full(k.shape, np.nan),
                          fastest=None, unstable_band=None, unstable_bands=[], box_modes=modes,
                          box_length=length, density_cm3=float(deck.units.density_cm3),
                          time_end=float(deck.time.end), species=tuple(s.name for s in species),
                          notes=notes, stability=verdict)
    # seeds: the curve's root at the nearest curve point, scaled with k
    j = np.clip(np.searchsorted(k, km), 0, k.size - 1)
    extra = np.where(np.isfinite(w[j]), w[j] * km / k[j], np.nan) if not solver.rational else None
    wm = solver.best(km, extra=extra)
    gm = solver.growth(wm)
    alt = _maxwellian_alternative(model, species, km, notes)
    modes = [BoxMode(int(mi), float(ki), float(gi) if np.isfinite(gi) else 0.0,
                     float(wi.real) if np.isfinite(wi) else None,
                     None if ai is None or not np.isfinite(ai) else float(ai))
             for mi, ki, gi, wi, ai in zip(m, km, gm, wm, alt)]
    if length and fastest is not None:
        notes.append(f"box holds {length * fastest.k / (2 * math.pi):.4g} fastest wavelengths")
    return Dispersion(model=model, k=k, growth=g, omega_r=np.where(np.isfinite(w), w.real, np.nan),
                      fastest=fastest, unstable_band=band, unstable_bands=bands, box_modes=modes,
                      box_length=length, density_cm3=float(deck.units.density_cm3),
                      time_end=float(deck.time.end), species=tuple(s.name for s in species),
                      notes=notes, stability=verdict)
