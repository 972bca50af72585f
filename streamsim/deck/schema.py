"""The frozen deck and its key table: each deck key declared once, as a field of its section.

Fields made by :func:`~streamsim.deck.keys.deck_key` are deck keys (type, default, range,
help); the other fields are derived or record how a value was given. Fields marked "derived"
are None after ``validate`` and filled by ``resolve``; fields with ``compare=False`` record how
a value was given and do not change the run.
"""
from __future__ import annotations

import dataclasses
import math
import re
from dataclasses import dataclass, field
from typing import Any, ClassVar

from .._version import __version__
from .errors import DeckError, did_you_mean, show_value
from .keys import (REQUIRED, Key, between, deck_key, finite_nonneg, finite_pos, ge, schema_of,
                   section_dict)

#: the simulation methods of the top-level key ``method``
METHODS = ("pic", "vlasov")
#: keys that mean nothing to a continuum run (``method = "vlasov"`` ignores them, saying so once)
VLASOV_IGNORED_KEYS = ("particles_per_cell", "loading", "shape")


def _nonempty(v):
    return None if v.strip() else "must not be empty"


def _finite(v):
    return None if math.isfinite(v) else "must be finite"


@dataclass(frozen=True)
class Units:
    density_cm3: float = deck_key("float", 1.0e10, check=finite_pos,
                                  help="reference density n_ref, cm^-3")


@dataclass(frozen=True)
class Box:
    length: float | None = deck_key(
        "float", None, check=finite_pos,
        help="box length, c/omega_p (derived when fastest_wavelengths or length_cm was given)")
    cells: int = deck_key("int", 256, check=between(2, 1 << 24), help="grid cells")
    shape: str = deck_key("str", "cic", choices=("ngp", "cic", "tsc"),
                          help="particle shape")
    solver: str = deck_key("str", "spectral", choices=("spectral", "finite_difference"),
                           help="Poisson solver")
    smoothing_passes: int = deck_key("int", 0, check=between(0, 16),
                                     help="binomial (1,2,1) passes on rho, with compensation")
    fastest_wavelengths: float | None = deck_key(
        "float", None, check=finite_pos, write=False, field_default=None, compare=False,
        help="box length in fastest-growing wavelengths of the linear theory")
    length_cm: float | None = deck_key("float", None, check=finite_pos, write=False,
                                       field_default=None, compare=False,
                                       help="box length, cm")

    @property
    def dx(self) -> float:
        return self.length / self.cells


@dataclass(frozen=True)
class Time:
    dt: float | None = deck_key("float_or_auto", 0.02,
                                help='time step, 1/omega_p, or "auto" (derived when "auto")')
    end: float = deck_key("float", 100.0, check=finite_pos, help="end time, 1/omega_p")
    dt_auto: bool = field(default=False, compare=False)

    @property
    def steps(self) -> int:
        return int(round(self.end / self.dt))


def _species_name(v):
    return None if re.fullmatch(r"[A-Za-z][A-Za-z0-9_\-]*", v) else \
        "must start with a letter and hold only letters, digits, '_' and '-'"


@dataclass(frozen=True)
class Species:
    name: str = deck_key("str", REQUIRED, check=_species_name, help="species name")
    charge: float = deck_key("float", REQUIRED, check=lambda v: None if (
        math.isfinite(v) and v != 0) else "must be a finite non-zero number (units of e)",
        help="charge, e")
    mass: float = deck_key("float", 1.0, check=finite_pos, help="mass, m_e")
    density: float = deck_key("float", REQUIRED, check=finite_pos,
                              help="lab-frame density / n_ref")
    drift_u: float = deck_key("float", None, check=_finite,
                              write=lambda s: s.distribution != "table",
                              help="signed gamma*beta of the drift (a table: derived, its mean u)")
    theta: float | None = deck_key(
        "float", 0.0, check=finite_nonneg, write=lambda s: s.distribution != "table",
        help="kT/(m c^2) in the drift frame (derived when temperature_kev was given)")
    distribution: str = deck_key("str", None, choices=("cold", "juttner", "waterbag", "table"),
                                 help="momentum distribution (default: from theta/spread_u)")
    particles_per_cell: int = deck_key("int", 64, check=between(1, 1 << 20),
                                       help="particles per cell")
    loading: str = deck_key("str", "quiet", choices=("quiet", "random"), help="start")
    spread_u: float = deck_key("float", 0.0, check=finite_nonneg,
                               write=lambda s: s.distribution == "waterbag",
                               help="waterbag half-width in u (drift frame)")
    temperature_kev: float | None = deck_key("float", None, check=finite_nonneg, write=False,
                                             field_default=None, compare=False,
                                             help="kT in keV (drift frame)")
    # distribution = "table": a CSV file "u,f" (relative to the deck file) or, in a resolved
    # deck, the inline rows {source, sha256, u, f} (streamsim.distribution_table)
    table: Any = deck_key("table", None, write="if_set", field_default=None,
                          to_toml=lambda t: t.to_dict(),
                          help='distribution = "table": CSV file with header u,f')

    #: keys read but kept in another form
    INPUT_KEYS: ClassVar[dict[str, Key]] = {
        "drift_beta": Key("float", None, lambda v: None if abs(v) < 1 else
                          "|drift_beta| must be < 1", help="signed beta of the drift (kept "
                          "as drift_u)"),
    }

    @property
    def drift_gamma(self) -> float:
        return math.sqrt(1.0 + self.drift_u**2)

    @property
    def drift_beta(self) -> float:
        return self.drift_u / self.drift_gamma

    @property
    def omega_p2(self) -> float:
        """omega_ps^2 / omega_p^2 = density * charge^2 / mass (lab-frame density)."""
        return self.density * self.charge**2 / self.mass

    @property
    def is_cold(self) -> bool:
        return self.distribution == "cold" or (
            self.distribution == "juttner" and self.theta == 0.0) or (
            self.distribution == "waterbag" and self.spread_u == 0.0)


@dataclass(frozen=True)
class Perturbation:
    # a list of box mode numbers, or "band": every box mode in the linear theory's unstable band
    modes: tuple[int, ...] = deck_key(
        "int_list_or_band", [], field_default=(),
        check=lambda v: None if v == "band" or all(m >= 1 for m in v)
        else "mode numbers must be >= 1",
        help='seeded box modes m (k_m = 2 pi m / L), or "band" (derived when "band")')
    amplitude: float = deck_key("float", 0.0, field_default=0.0, check=lambda v: None if (
        math.isfinite(v) and 0 <= v < 1) else "must be in [0, 1)",
        help="delta n / n of each seeded mode, by placing the positions")
    species: tuple[str, ...] = deck_key("str_list", [], field_default=(),
                                        help="displaced species; empty = every negative one")
    phases: str | None = deck_key("str", None, choices=("random", "zero"), field_default=None,
                                  help='"zero" | "random" (derived: "random" for a band)')
    band: bool = field(default=False, compare=False)   # modes = "band" was given


@dataclass(frozen=True)
class Output:
    folder: str = deck_key("str", None, check=_nonempty, help="run folder")
    diagnostics_interval: float | None = deck_key(
        "float", None, check=finite_pos, help="1/omega_p: energies, modes, contrast")
    fields_interval: float | None = deck_key(
        "float", None, check=finite_pos, help="1/omega_p: meshes and density profiles")
    phase_space_interval: float | None = deck_key(
        "float", None, check=finite_pos, help="1/omega_p: (x, u) subsample")
    phase_space_particles: int = deck_key("int", 4096, check=ge(0), help="per species")
    recorded_modes: int = deck_key("int", None, check=ge(1),
                                   help="|E_k| recorded for m = 1..recorded_modes")
    checkpoint_interval: float | None = deck_key(
        "float", None, check=finite_nonneg, write="if_set",
        help="1/omega_p; unset: every 5 min of wall-clock time (plus the end and a signal); "
             "0 = only at the end and on a signal")
    threads: int = deck_key("int", 0, check=ge(0), help="numba threads; 0 = all cores")



@dataclass(frozen=True)
class Analysis:
    clump_threshold: float = deck_key(
        "float", 0.5, check=finite_pos,
        help="a clump is a connected region with delta n/n above this")
    coherence_drop: float = deck_key(
        "float", 0.5, check=lambda v: None if 0 < v < 1 else "must be in (0, 1)",
        help="k_c: where the log-binned envelope of |F|^2 falls to this fraction of its peak")
    coherence_kmax_factor: float = deck_key(
        "float", 4.0, check=between(1, 64),
        help="form factor computed up to this multiple of the grid Nyquist k")
    bulk_gamma: float | str = deck_key(
        "float_or_measured", 1.0, check=lambda v: None if (math.isfinite(v) and v >= 1)
        else "must be >= 1",
        help='Lorentz factor of the simulation frame towards the observer, or "measured"')
    energy_tolerance: float = deck_key("float", 1.0e-2, check=finite_pos,
                                       help="relative energy error above which a run warns")
    initial_level: float | None = deck_key(
        "float", None, field_default=None, write="if_set",
        check=lambda v: None if (math.isfinite(v) and 0 < v < 1)
        else "must be in (0, 1) (a delta n/n)",
        help="delta n/n to extrapolate the formation time from")
    coherence_bins_per_decade: int = deck_key(
        "int", 8, field_default=8, check=between(2, 64),
        help="log bins per decade of k for the |F|^2 envelope")
    clump_grid_cells: float = deck_key(
        "float", 3.0, field_default=3.0, check=lambda v: None if (
            math.isfinite(v) and 0 < v <= 64) else "must be in (0, 64]",
        help="median FWHM below this many cells: grid-limited")


def _bound_toml(pairs):
    if pairs is None:
        return "auto"
    d = dict(pairs)
    return d["*"] if set(d) == {"*"} else d


@dataclass(frozen=True)
class Vlasov:
    """The ``[vlasov]`` section: the momentum grid and the scheme of ``method = "vlasov"``.

    ``u_min``/``u_max``: None = automatic (from the loaded distribution, ``thermal_widths`` and
    ``widen``), else a tuple of (species name, value) pairs; a single number in the deck applies
    to every species (stored under the name ``"*"``)."""
    momentum_cells: int = deck_key("int", 256, field_default=256, check=between(16, 65536),
                                   help="momentum cells per species")
    u_min: tuple | None = deck_key("float_map_or_auto", "auto", field_default=None,
                                   to_toml=_bound_toml,
                                   help='"auto", a number, or {species name = number}')
    u_max: tuple | None = deck_key("float_map_or_auto", "auto", field_default=None,
                                   to_toml=_bound_toml,
                                   help='"auto", a number, or {species name = number}')
    thermal_widths: float = deck_key(
        "float", 7.0, field_default=7.0, check=between(3, 40),
        help="automatic range: the loaded distribution out to this many widths")
    widen: float = deck_key("float", 1.0, field_default=1.0, check=between(0, 10),
                            help="... widened by this times the largest drift difference")
    x_advection: str = deck_key("str", "pfc", field_default="pfc", choices=("pfc", "spectral"),
                                help='"pfc" (positive, flux-conservative) | "spectral"')
    ignored: tuple[str, ...] = field(default=(), compare=False)   # PIC-only keys the deck gave

    def bound(self, which: str, name: str) -> float | None:
        """The explicit u_min/u_max of species ``name``, or None (automatic)."""
        pairs = getattr(self, which)
        if pairs is None:
            return None
        values = dict(pairs)
        return values.get(name, values.get("*"))

    def to_dict(self) -> dict:
        return section_dict(self)


@dataclass(frozen=True)
class Drive:
    """The optional ``[drive]`` block: a uniform current J_ext(t) imposed through Ampere's law
    for the mean field (see :mod:`streamsim.drive`)."""
    current: float | None = deck_key(
        "float", None, help="J_ext amplitude, e n_ref c (derived when a physical form was given)")
    profile: str = deck_key("str", "constant", choices=("constant", "ramp", "sine"),
                            help="time profile")
    ramp_time: float | None = deck_key("float", None, check=finite_pos,
                                       applies=("profile", "ramp"), required_when_applies=True,
                                       help="1/omega_p")
    angular_frequency: float | None = deck_key(
        "float", None, check=finite_pos, applies=("profile", "sine"),
        required_when_applies=True, help="omega_p (an angular frequency)")
    phase: float = deck_key("float", 0.0, applies=("profile", "sine"), help="rad")
    theory_time: float | None = deck_key(
        "float", None, check=finite_nonneg, write="if_set",
        help="1/omega_p: when the theory at the driven state is taken (None: chosen by the "
             "analysis)")
    current_statA_cm2: float | None = deck_key("float", None, write=False, field_default=None,
                                               compare=False, help="the current in CGS")
    current_A_m2: float | None = deck_key("float", None, write=False, field_default=None,
                                          compare=False, help="the current in SI")



@dataclass(frozen=True)
class Deck:
    """A whole deck. Top-level keys are ``deck_key`` fields; each section is a field whose
    metadata names its class (``optional``: absent unless the deck has it)."""
    title: str = deck_key("str", "streamsim run", check=_nonempty, help="run title")
    random_seed: int = deck_key("int", 1, check=ge(0), help="seed of every random stream")
    units: Units = field(metadata={"section": Units})
    box: Box = field(metadata={"section": Box})
    time: Time = field(metadata={"section": Time})
    species: tuple[Species, ...] = field(metadata={"array": Species})
    perturbation: Perturbation = field(metadata={"section": Perturbation})
    output: Output = field(metadata={"section": Output})
    analysis: Analysis = field(metadata={"section": Analysis})
    description: str = deck_key("str", "", field_default="", write=lambda d: bool(d.description),
                                help="free text")
    drive: Drive | None = field(default=None, metadata={"section": Drive, "optional": True})
    method: str = deck_key("str", "pic", choices=METHODS, field_default="pic",
                           write=lambda d: d.method != "pic", help='"pic" | "vlasov"')
    vlasov: Vlasov = field(default_factory=Vlasov, metadata={
        "section": Vlasov, "write": lambda d: d.method != "pic" or d.vlasov != Vlasov()})

    def species_named(self, name: str) -> Species:
        for s in self.species:
            if s.name == name:
                return s
        raise KeyError(name)

    @property
    def is_resolved(self) -> bool:
        """True when every derived value is filled in (see ``resolve``)."""
        o = self.output
        return (self.box.length is not None and self.box.length_cm is not None
                and self.time.dt is not None and self.perturbation.phases is not None
                and all(s.theta is not None and s.temperature_kev is not None for s in self.species)
                and None not in (o.diagnostics_interval, o.fields_interval,
                                 o.phase_space_interval)
                and (self.drive is None or self.drive.current is not None))

    def to_dict(self) -> dict:
        """The resolved deck as plain TOML-ready data in normalised keys (it loads back to an
        equal Deck). The physical forms (``length_cm``, ``temperature_kev``) are left out: they
        follow from these values and ``units.density_cm3``; :meth:`to_toml` shows them as
        comments."""
        if not self.is_resolved:
            raise ValueError("to_dict() needs a resolved deck (streamsim.deck.resolve)")
        out = section_dict(self)      # the top-level keys
        ordered = {}
        for f in dataclasses.fields(self):
            value = getattr(self, f.name)
            if f.name in out:
                ordered[f.name] = out[f.name]
            elif "array" in f.metadata:
                ordered[f.name] = [section_dict(s) for s in value]
            elif "section" in f.metadata and value is not None and \
                    f.metadata.get("write", lambda d: True)(self):
                ordered[f.name] = section_dict(value)
        return ordered

    def to_toml(self) -> str:
        """:meth:`to_dict` as TOML, after a comment block with the physical forms of the box
        length and the species temperatures (informational; loading reads only the keys)."""
        import tomli_w
        head = [f"# Resolved deck, written by streamsim {__version__}. Normalised units: t in "
                "1/omega_p, x in c/omega_p.",
                f"# Physical forms at units.density_cm3 = {show_value(self.units.density_cm3)} "
                "(informational, not read back):",
                f"#   box.length = {self.box.length:.6g} c/omega_p = {self.box.length_cm:.6g} cm"]
        for s in self.species:
            if s.theta > 0:
                head.append(f"#   species.{s.name}.theta = {s.theta:.6g} = "
                            f"{s.temperature_kev:.6g} keV")
        if self.drive is not None:
            from .. import units
            n = self.units.density_cm3
            head.append(f"#   drive.current = {self.drive.current:.6g} e n_ref c = "
                        f"{units.current_statA_cm2(self.drive.current, n):.6g} statA/cm^2 = "
                        f"{units.current_A_m2(self.drive.current, n):.6g} A/m^2")
        return "\n".join(head) + "\n" + tomli_w.dumps(self.to_dict())


# --------------------------------------------------------------------------------------------
# The key tables, derived from the dataclasses above
# --------------------------------------------------------------------------------------------
#: top-level keys
TOP = schema_of(Deck)
#: section name -> its class (the [[species]] array is separate)
SECTION_CLASSES = {f.name: f.metadata["section"] for f in dataclasses.fields(Deck)
                   if "section" in f.metadata}
#: section name -> its keys
SECTIONS = {name: schema_of(cls) for name, cls in SECTION_CLASSES.items()}
#: sections that are absent unless the deck has them (no defaults are filled in)
OPTIONAL_SECTIONS = tuple(f.name for f in dataclasses.fields(Deck) if f.metadata.get("optional"))
SPECIES = schema_of(Species)
ALL_TOP = set(TOP) | set(SECTIONS) | {"species"}

#: keys of earlier versions -> their new names (an old name is a one-line error naming the new)
RENAMED_KEYS = {
    "output.diagnostics_every": "output.diagnostics_interval",
    "output.fields_every": "output.fields_interval",
    "output.phase_space_every": "output.phase_space_interval",
    "output.checkpoint_every": "output.checkpoint_interval",
    "box.filter_passes": "box.smoothing_passes",
    "output.modes": "output.recorded_modes",
    "drive.frequency": "drive.angular_frequency",
}


@dataclass(frozen=True)
class Exclusive:
    """Keys of one section that say the same thing in different forms: give at most one
    (exactly one when ``required``)."""
    section: str
    keys: tuple[str, ...]
    required: bool = False


#: the one table of exclusive groups (validation, --set and scan axes all read it)
EXCLUSIVE = (
    Exclusive("box", ("length", "length_cm", "fastest_wavelengths")),
    Exclusive("species", ("drift_beta", "drift_u")),
    Exclusive("species", ("theta", "temperature_kev")),
    Exclusive("drive", ("current", "current_statA_cm2", "current_A_m2"), required=True),
)


def group_of(section: str, key: str) -> tuple[str, ...]:
    """The exclusive group of ``section.key`` (empty when it has none)."""
    for g in EXCLUSIVE:
        if g.section == section and key in g.keys:
            return g.keys
    return ()


def check_exclusive(section: str, label: str, raw: dict, values: dict) -> None:
    """One DeckError when a table ``raw`` of ``section`` (``label``: its name in messages,
    e.g. ``species.electrons``) gives two forms of one quantity, or none of a required one."""
    for g in EXCLUSIVE:
        if g.section != section:
            continue
        given = [k for k in g.keys if k in raw]
        names = [f"{label}.{k}" for k in g.keys]
        if not given and g.required:
            raise DeckError(names[0], f"is required in [{section}]: give "
                            + ", ".join(names[:-1]) + f" or {names[-1]}")
        if len(given) > 1:
            shown = [f"{label}.{k}" for k in given]
            last = shown[-1]
            if g.required:
                text = "give one of " + ", ".join(shown) + ", not several"
            elif len(given) == 2:
                text = f"give {shown[0]} or {shown[1]}, not both"
            else:
                text = "give one of " + ", ".join(shown) + ", not several"
            raise DeckError(last, text, values[given[-1]])


def exclusive_keys(key: str) -> tuple[str, ...]:
    """The full deck keys that exclude ``key`` (``"box.length"`` -> ``("box.length_cm",
    "box.fastest_wavelengths")``; species keys keep their species name)."""
    parts = key.split(".")
    if len(parts) < 2:
        return ()
    prefix = ".".join(parts[:-1])
    return tuple(f"{prefix}.{k}" for k in group_of(parts[0], parts[-1]) if k != parts[-1])


def unknown_key(schema_key: str, key: str, options) -> str:
    """The message for an unknown ``key``; ``schema_key`` is its section-qualified name
    (``"output.fields_every"``, ``"species.tehta"``), which may name a renamed key."""
    if schema_key in RENAMED_KEYS:
        return f"renamed; use {RENAMED_KEYS[schema_key]}"
    return did_you_mean(key, options)


def check_key_path(parts: list[str]) -> None:
    """Raise :class:`DeckError` unless ``parts`` (a ``--set`` key split at its dots) names a
    deck key. A species key is ``["species", <name>, <key>]`` (``<name>`` may be ``*``, every
    species); the name is not checked here."""
    key = ".".join(parts)
    if parts[0] == "species":
        if len(parts) != 3:
            raise DeckError(key, "address a species key as species.<name>.<key> "
                            "(or species.*.<key> for every species)")
        if parts[2] not in SPECIES:
            raise DeckError(key, unknown_key(f"species.{parts[2]}", parts[2], SPECIES))
        return
    if len(parts) == 1:
        if parts[0] not in TOP:
            raise DeckError(key, did_you_mean(parts[0], set(TOP) | set(SECTIONS)))
    elif len(parts) == 2:
        if parts[0] not in SECTIONS:
            raise DeckError(key, did_you_mean(parts[0], SECTIONS))
        if parts[1] not in SECTIONS[parts[0]]:
            raise DeckError(key, unknown_key(key, parts[1], SECTIONS[parts[0]]))
    else:
        raise DeckError(key, "not a deck key (write section.key)")
