"""The deck: what to simulate, read from TOML, validated into frozen dataclasses.

The key names here are a contract that scripts and scans rely on (see README, "Deck reference").
Every key is typed and ranged; an unknown key is rejected with a "did you mean"; every problem is
reported as one :class:`DeckError` naming the key, its value and what is wrong.

Loading is two steps:

* :func:`validate` checks the raw TOML table and builds a :class:`Deck` whose derived values are
  still open (``None``): a box given as ``fastest_wavelengths`` or ``length_cm``, a species given
  as ``temperature_kev``, ``time.dt = "auto"`` and the output cadences left to their defaults.
* :func:`resolve` fills them in: the box length from the linear theory (``fastest_wavelengths``)
  or from centimetres (:mod:`streamsim.units`), ``dt = "auto"`` from the numerical-health rules,
  theta from keV, and the cadences from ``time.end`` (never below the step).

:func:`load_deck` does both. No physics lives here beyond asking those modules.

This module also holds the one error family for user input (:class:`InputError`, with
:class:`DeckError` here and ``ScanError`` in :mod:`streamsim.scan.spec`), the one
:func:`did_you_mean` and the one value formatter :func:`show_value`.
"""
from __future__ import annotations

import copy
import dataclasses
import difflib
import functools
import importlib.resources
import math
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable

from ._version import __version__

__all__ = [
    "InputError", "DeckError", "did_you_mean", "show_value",
    "Deck", "Species", "Box", "Time", "Units", "Perturbation", "Output", "Analysis", "Drive",
    "Vlasov", "METHODS", "VLASOV_IGNORED_KEYS",
    "load_deck", "validate", "resolve", "apply_overrides", "parse_override", "check_key_path",
    "exclusive_keys", "RENAMED_KEYS", "DEFAULT_DECK",
]

_MISSING = dataclasses.MISSING


# --------------------------------------------------------------------------------------------
# One error family, one "did you mean", one value formatter (decks and scan files)
# --------------------------------------------------------------------------------------------
def show_value(value: Any) -> str:
    """A value as it appears in a one-line message: short, TOML-like numbers (``1e9``, not
    ``1000000000.0``), strings quoted, long things cut at 60 characters."""
    if isinstance(value, float) and math.isfinite(value) and value != 0.0:
        text = repr(value)
        if "e" not in text and (abs(value) >= 1e6 or abs(value) < 1e-4):
            for digits in range(17):
                text = f"{value:.{digits}e}"
                if float(text) == value:
                    break
            mantissa, exponent = text.split("e")
            text = f"{mantissa}e{int(exponent)}"
        return text
    if isinstance(value, str):
        return repr(value) if len(value) < 60 else repr(value[:57] + "...")
    if isinstance(value, dict):
        return "{...}"
    text = repr(value)
    return text if len(text) < 60 else text[:57] + "..."


def _closest(word: str, options) -> str | None:
    close = difflib.get_close_matches(word, sorted(options), n=1, cutoff=0.6)
    return close[0] if close else None


def did_you_mean(word: str, options) -> str:
    """The message for an unknown key ``word`` among ``options``."""
    close = _closest(word, options)
    return (f"unknown key; did you mean '{close}'?" if close
            else "unknown key; known keys: " + ", ".join(sorted(options)))


class InputError(ValueError):
    """A problem with user input tied to one place (a key, a file, an axis).

    ``str(err)`` is the one line the CLI prints: ``where = value: message`` when the value is
    given, else ``where: message``.
    """

    def __init__(self, where: str, message: str, value: Any = _MISSING):
        self.where = where
        self.value = value
        self.message = message
        if value is not _MISSING:
            text = f"{where} = {show_value(value)}: {message}" if where else \
                f"{show_value(value)}: {message}"
        else:
            text = f"{where}: {message}" if where else message
        super().__init__(text)

    @property
    def key(self) -> str:
        return self.where


class DeckError(InputError):
    """A deck problem, tied to one key. ``str(err)`` is the one line the CLI prints."""


# --------------------------------------------------------------------------------------------
# The frozen deck. Fields marked "derived" are None after validate() and filled by resolve();
# fields with compare=False record how a value was given and do not change the run.
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Units:
    density_cm3: float


@dataclass(frozen=True)
class Box:
    length: float | None          # c/omega_p (derived when fastest_wavelengths or length_cm was given)
    cells: int
    shape: str                    # "ngp" | "cic" | "tsc"
    solver: str                   # "spectral" | "finite_difference"
    smoothing_passes: int         # binomial (1,2,1) passes on rho, with compensation
    fastest_wavelengths: float | None = field(default=None, compare=False)
    length_cm: float | None = field(default=None, compare=False)   # the same length in cm

    @property
    def dx(self) -> float:
        return self.length / self.cells


@dataclass(frozen=True)
class Time:
    dt: float | None              # 1/omega_p (derived when "auto" was given)
    end: float
    dt_auto: bool = field(default=False, compare=False)

    @property
    def steps(self) -> int:
        return int(round(self.end / self.dt))


@dataclass(frozen=True)
class Species:
    name: str
    charge: float                 # e
    mass: float                   # m_e
    density: float                # lab-frame density / n_ref
    drift_u: float                # signed gamma*beta of the drift
    theta: float | None           # kT/(m c^2) in the drift frame (derived when temperature_kev was given)
    distribution: str             # "cold" | "juttner" | "waterbag" | "table"
    spread_u: float               # waterbag half-width in u (drift frame)
    particles_per_cell: int
    loading: str                  # "quiet" | "random"
    temperature_kev: float | None = field(default=None, compare=False)  # kT in keV
    table: "DistributionTable | None" = None   # distribution = "table": the checked rows f(u)

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
    modes: tuple[int, ...] = ()   # box modes m (k_m = 2 pi m / L); derived when "band" was given
    amplitude: float = 0.0        # delta n / n of each seeded mode, by placing the positions
    species: tuple[str, ...] = () # which species are displaced; empty = every negative species
    phases: str | None = None     # "zero" | "random" (derived: "random" for a band, else "zero")
    band: bool = field(default=False, compare=False)   # modes = "band" was given


@dataclass(frozen=True)
class Output:
    folder: str                   # run folder
    diagnostics_interval: float | None   # 1/omega_p: energies, modes, contrast
    fields_interval: float | None        # 1/omega_p: meshes and density profiles
    phase_space_interval: float | None   # 1/omega_p: (x, u) subsample
    phase_space_particles: int    # per species
    modes: int                    # |E_k| recorded for m = 1..modes
    checkpoint_interval: float | None    # 1/omega_p (default end/10); 0 = only at the end and on a signal
    threads: int                  # numba threads; 0 = all cores


@dataclass(frozen=True)
class Analysis:
    clump_threshold: float        # a clump is a connected region with delta n/n above this
    coherence_drop: float         # k_c: where the log-binned envelope of |F|^2 falls to this
                                  # fraction of its peak
    coherence_kmax_factor: float  # form factor computed up to this multiple of the grid Nyquist k
    bulk_gamma: float | str       # Lorentz factor of the simulation frame towards the observer, or "measured"
    energy_tolerance: float       # relative energy error above which a run warns
    initial_level: float | None = None     # delta n/n to extrapolate the formation time from
    coherence_bins_per_decade: int = 8     # log bins per decade of k for the |F|^2 envelope
    clump_grid_cells: float = 3.0          # median FWHM below this many cells: grid-limited


#: the simulation methods of the top-level key ``method``
METHODS = ("pic", "vlasov")
#: keys that mean nothing to a continuum run (``method = "vlasov"`` ignores them, saying so once)
VLASOV_IGNORED_KEYS = ("particles_per_cell", "loading", "shape")


@dataclass(frozen=True)
class Vlasov:
    """The ``[vlasov]`` section: the momentum grid and the scheme of ``method = "vlasov"``.

    ``u_min``/``u_max``: None = automatic (from the loaded distribution, ``thermal_widths`` and
    ``widen``), else a tuple of (species name, value) pairs; a single number in the deck applies
    to every species (stored under the name ``"*"``)."""
    momentum_cells: int = 256
    u_min: tuple | None = None
    u_max: tuple | None = None
    thermal_widths: float = 7.0    # automatic range: the loaded distribution out to this many widths
    widen: float = 1.0             # ... widened by this times the largest drift difference
    x_advection: str = "pfc"       # "pfc" (positive, flux-conservative) | "spectral" (FFT shift)
    ignored: tuple[str, ...] = field(default=(), compare=False)   # PIC-only keys the deck gave

    def bound(self, which: str, name: str) -> float | None:
        """The explicit u_min/u_max of species ``name``, or None (automatic)."""
        pairs = getattr(self, which)
        if pairs is None:
            return None
        values = dict(pairs)
        return values.get(name, values.get("*"))

    def to_dict(self) -> dict:
        def bound(pairs):
            if pairs is None:
                return "auto"
            d = dict(pairs)
            return d["*"] if set(d) == {"*"} else d
        return {"momentum_cells": self.momentum_cells, "u_min": bound(self.u_min),
                "u_max": bound(self.u_max), "thermal_widths": self.thermal_widths,
                "widen": self.widen, "x_advection": self.x_advection}


@dataclass(frozen=True)
class Drive:
    """The optional ``[drive]`` block: a uniform current J_ext(t) imposed through Ampere's law
    for the mean field (see :mod:`streamsim.drive`)."""
    current: float | None         # J_ext amplitude, e n_ref c (derived when a physical form was given)
    profile: str                  # "constant" | "ramp" | "sine"
    ramp_time: float | None       # 1/omega_p ("ramp")
    frequency: float | None       # omega_p ("sine")
    phase: float                  # rad ("sine")
    theory_time: float | None     # 1/omega_p: when the theory at the driven state is taken (None: chosen by the analysis)
    current_statA_cm2: float | None = field(default=None, compare=False)  # the same in CGS
    current_A_m2: float | None = field(default=None, compare=False)       # the same in SI


@dataclass(frozen=True)
class Deck:
    title: str
    random_seed: int
    units: Units
    box: Box
    time: Time
    species: tuple[Species, ...]
    perturbation: Perturbation
    output: Output
    analysis: Analysis
    description: str = ""
    drive: Drive | None = None    # the optional [drive] block
    method: str = "pic"           # "pic" | "vlasov"
    vlasov: Vlasov = field(default_factory=Vlasov)

    def species_named(self, name: str) -> Species:
        for s in self.species:
            if s.name == name:
                return s
        raise KeyError(name)

    @property
    def is_resolved(self) -> bool:
        """True when every derived value is filled in (see :func:`resolve`)."""
        o = self.output
        return (self.box.length is not None and self.box.length_cm is not None
                and self.time.dt is not None and self.perturbation.phases is not None
                and all(s.theta is not None and s.temperature_kev is not None for s in self.species)
                and None not in (o.diagnostics_interval, o.fields_interval,
                                 o.phase_space_interval, o.checkpoint_interval)
                and (self.drive is None or self.drive.current is not None))

    def to_dict(self) -> dict:
        """The resolved deck as plain TOML-ready data in normalised keys (it loads back to an
        equal Deck). The physical forms (``length_cm``, ``temperature_kev``) are left out: they
        follow from these values and ``units.density_cm3``; :meth:`to_toml` shows them as
        comments."""
        if not self.is_resolved:
            raise ValueError("to_dict() needs a resolved deck (streamsim.deck.resolve)")
        box = {"length": self.box.length, "cells": self.box.cells, "shape": self.box.shape,
               "solver": self.box.solver, "smoothing_passes": self.box.smoothing_passes}
        species = []
        for s in self.species:
            d = {"name": s.name, "charge": s.charge, "mass": s.mass, "density": s.density,
                 "drift_u": s.drift_u, "theta": s.theta, "distribution": s.distribution,
                 "particles_per_cell": s.particles_per_cell, "loading": s.loading}
            if s.distribution == "table":       # the rows inline: reruns without the file
                del d["drift_u"], d["theta"]
                d["table"] = s.table.to_dict()
            if s.distribution == "waterbag":
                d["spread_u"] = s.spread_u
            species.append(d)
        out = {
            "title": self.title, "random_seed": self.random_seed,
            "units": {"density_cm3": self.units.density_cm3},
            "box": box,
            "time": {"dt": self.time.dt, "end": self.time.end},
            "species": species,
            "perturbation": {"modes": list(self.perturbation.modes),
                             "amplitude": self.perturbation.amplitude,
                             "species": list(self.perturbation.species),
                             "phases": self.perturbation.phases},
            "output": dataclasses.asdict(self.output),
            "analysis": {k: v for k, v in dataclasses.asdict(self.analysis).items()
                         if v is not None},
        }
        if self.description:
            out["description"] = self.description
        if self.drive is not None:
            out["drive"] = _drive_dict(self.drive)
        if self.method != "pic":
            out["method"] = self.method
        if self.method != "pic" or self.vlasov != Vlasov():
            out["vlasov"] = self.vlasov.to_dict()
        return out

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
            from . import units
            n = self.units.density_cm3
            head.append(f"#   drive.current = {self.drive.current:.6g} e n_ref c = "
                        f"{units.current_statA_cm2(self.drive.current, n):.6g} statA/cm^2 = "
                        f"{units.current_A_m2(self.drive.current, n):.6g} A/m^2")
        return "\n".join(head) + "\n" + tomli_w.dumps(self.to_dict())


# --------------------------------------------------------------------------------------------
# Schema: one entry per key, with type, default and range check
# --------------------------------------------------------------------------------------------
_REQUIRED = object()


@dataclass(frozen=True)
class _Key:
    kind: str                              # "float" | "int" | "str" | "bool" | "int_list" | "str_list"
    default: Any = _REQUIRED
    check: Callable[[Any], str | None] | None = None
    choices: tuple[str, ...] = ()


def _ge(lo):   return lambda v: None if v >= lo else f"must be >= {lo:g}"


def _finite_pos(v):
    return None if (math.isfinite(v) and v > 0) else "must be a finite number > 0"


def _finite_nonneg(v):
    return None if (math.isfinite(v) and v >= 0) else "must be >= 0"


_TOP = {
    "title": _Key("str", "streamsim run", lambda v: None if v.strip() else "must not be empty"),
    "description": _Key("str", ""),
    "random_seed": _Key("int", 1, _ge(0)),
    "method": _Key("str", "pic", choices=METHODS),
}
_UNITS = {"density_cm3": _Key("float", 1.0e10, _finite_pos)}
_BOX = {
    "length": _Key("float", None, _finite_pos),
    "length_cm": _Key("float", None, _finite_pos),
    "fastest_wavelengths": _Key("float", None, _finite_pos),
    "cells": _Key("int", 256, lambda v: None if 2 <= v <= 1 << 24 else "must be between 2 and 16777216"),
    "shape": _Key("str", "cic", choices=("ngp", "cic", "tsc")),
    "solver": _Key("str", "spectral", choices=("spectral", "finite_difference")),
    "smoothing_passes": _Key("int", 0, lambda v: None if 0 <= v <= 16 else "must be between 0 and 16"),
}
_TIME = {
    "dt": _Key("float_or_auto", 0.02),
    "end": _Key("float", 100.0, _finite_pos),
}
_SPECIES = {
    "name": _Key("str", _REQUIRED, lambda v: None if re.fullmatch(r"[A-Za-z][A-Za-z0-9_\-]*", v)
                 else "must start with a letter and hold only letters, digits, '_' and '-'"),
    "charge": _Key("float", _REQUIRED, lambda v: None if (math.isfinite(v) and v != 0)
                   else "must be a finite non-zero number (units of e)"),
    "mass": _Key("float", 1.0, _finite_pos),
    "density": _Key("float", _REQUIRED, _finite_pos),
    "drift_beta": _Key("float", None, lambda v: None if abs(v) < 1 else "|drift_beta| must be < 1"),
    "drift_u": _Key("float", None, lambda v: None if math.isfinite(v) else "must be finite"),
    "theta": _Key("float", 0.0, _finite_nonneg),
    "temperature_kev": _Key("float", None, _finite_nonneg),
    "distribution": _Key("str", None, choices=("cold", "juttner", "waterbag", "table")),
    # a CSV file "u,f" (relative to the deck file) or, in a resolved deck, {source, sha256, u, f}
    "table": _Key("table", None),
    "spread_u": _Key("float", 0.0, _finite_nonneg),
    "particles_per_cell": _Key("int", 64, lambda v: None if 1 <= v <= 1 << 20 else "must be between 1 and 1048576"),
    "loading": _Key("str", "quiet", choices=("quiet", "random")),
}
_PERTURBATION = {
    # a list of box mode numbers, or "band": every box mode in the linear theory's unstable band
    "modes": _Key("int_list_or_band", [], lambda v: None if v == "band" or all(m >= 1 for m in v)
                  else "mode numbers must be >= 1"),
    "phases": _Key("str", None, choices=("random", "zero")),
    "amplitude": _Key("float", 0.0, lambda v: None if (math.isfinite(v) and 0 <= v < 1) else "must be in [0, 1)"),
    "species": _Key("str_list", []),
}
_OUTPUT = {
    "folder": _Key("str", None, lambda v: None if v.strip() else "must not be empty"),
    "diagnostics_interval": _Key("float", None, _finite_pos),
    "fields_interval": _Key("float", None, _finite_pos),
    "phase_space_interval": _Key("float", None, _finite_pos),
    "phase_space_particles": _Key("int", 4096, _ge(0)),
    "modes": _Key("int", None, _ge(1)),
    "checkpoint_interval": _Key("float", None, _finite_nonneg),
    "threads": _Key("int", 0, _ge(0)),
}
_ANALYSIS = {
    "clump_threshold": _Key("float", 0.5, _finite_pos),
    "coherence_drop": _Key("float", 0.5, lambda v: None if 0 < v < 1 else "must be in (0, 1)"),
    "coherence_kmax_factor": _Key("float", 4.0, lambda v: None if 1 <= v <= 64 else "must be between 1 and 64"),
    "bulk_gamma": _Key("float_or_measured", 1.0, lambda v: None if (math.isfinite(v) and v >= 1) else "must be >= 1"),
    "energy_tolerance": _Key("float", 1.0e-2, _finite_pos),
    "initial_level": _Key("float", None, lambda v: None if (math.isfinite(v) and 0 < v < 1)
                          else "must be in (0, 1) (a delta n/n)"),
    "coherence_bins_per_decade": _Key("int", 8, lambda v: None if 2 <= v <= 64
                                      else "must be between 2 and 64"),
    "clump_grid_cells": _Key("float", 3.0, lambda v: None if (math.isfinite(v) and 0 < v <= 64)
                             else "must be in (0, 64]"),
}
_DRIVE = {
    "current": _Key("float", None),
    "current_statA_cm2": _Key("float", None),
    "current_A_m2": _Key("float", None),
    "profile": _Key("str", "constant", choices=("constant", "ramp", "sine")),
    "ramp_time": _Key("float", None, _finite_pos),
    "frequency": _Key("float", None, _finite_pos),
    "phase": _Key("float", 0.0),
    "theory_time": _Key("float", None, _finite_nonneg),
}
_VLASOV = {
    "momentum_cells": _Key("int", 256, lambda v: None if 16 <= v <= 65536
                           else "must be between 16 and 65536"),
    "u_min": _Key("float_map_or_auto", "auto"),
    "u_max": _Key("float_map_or_auto", "auto"),
    "thermal_widths": _Key("float", 7.0, lambda v: None if 3 <= v <= 40
                           else "must be between 3 and 40"),
    "widen": _Key("float", 1.0, lambda v: None if 0 <= v <= 10 else "must be between 0 and 10"),
    "x_advection": _Key("str", "pfc", choices=("pfc", "spectral")),
}
_SECTIONS = {"units": _UNITS, "box": _BOX, "time": _TIME, "perturbation": _PERTURBATION,
             "output": _OUTPUT, "analysis": _ANALYSIS, "drive": _DRIVE, "vlasov": _VLASOV}
#: sections that are absent unless the deck has them (no defaults are filled in)
_OPTIONAL_SECTIONS = ("drive",)
_ALL_TOP = set(_TOP) | set(_SECTIONS) | {"species"}

#: keys of earlier versions -> their new names (an old name is a one-line error naming the new)
RENAMED_KEYS = {
    "output.diagnostics_every": "output.diagnostics_interval",
    "output.fields_every": "output.fields_interval",
    "output.phase_space_every": "output.phase_space_interval",
    "output.checkpoint_every": "output.checkpoint_interval",
    "box.filter_passes": "box.smoothing_passes",
}

#: groups of keys that say the same thing in different forms: give at most one of each group
_EXCLUSIVE = {
    "box": (("length", "length_cm", "fastest_wavelengths"),),
    "species": (("drift_beta", "drift_u"), ("theta", "temperature_kev")),
    "drive": (("current", "current_statA_cm2", "current_A_m2"),),
}


def _group(section: str, key: str) -> tuple[str, ...]:
    for group in _EXCLUSIVE.get(section, ()):
        if key in group:
            return group
    return ()


def exclusive_keys(key: str) -> tuple[str, ...]:
    """The full deck keys that exclude ``key`` (``"box.length"`` -> ``("box.length_cm",
    "box.fastest_wavelengths")``; species keys keep their species name)."""
    parts = key.split(".")
    if len(parts) < 2:
        return ()
    prefix = ".".join(parts[:-1])
    return tuple(f"{prefix}.{k}" for k in _group(parts[0], parts[-1]) if k != parts[-1])


def _unknown(schema_key: str, key: str, options) -> str:
    """The message for an unknown ``key``; ``schema_key`` is its section-qualified name
    (``"output.fields_every"``, ``"species.tehta"``), which may name a renamed key."""
    if schema_key in RENAMED_KEYS:
        return f"renamed; use {RENAMED_KEYS[schema_key]}"
    return did_you_mean(key, options)


def check_key_path(parts: list[str]) -> None:
    """Raise :class:`DeckError` unless ``parts`` (a ``--set`` key split at its dots) names a
    deck key. A species key is ``["species", <name>, <key>]``; the name is not checked here."""
    key = ".".join(parts)
    if parts[0] == "species":
        if len(parts) != 3:
            raise DeckError(key, "address a species key as species.<name>.<key>")
        if parts[2] not in _SPECIES:
            raise DeckError(key, _unknown(f"species.{parts[2]}", parts[2], _SPECIES))
        return
    if len(parts) == 1:
        if parts[0] not in _TOP:
            raise DeckError(key, did_you_mean(parts[0], set(_TOP) | set(_SECTIONS)))
    elif len(parts) == 2:
        if parts[0] not in _SECTIONS:
            raise DeckError(key, did_you_mean(parts[0], _SECTIONS))
        if parts[1] not in _SECTIONS[parts[0]]:
            raise DeckError(key, _unknown(key, parts[1], _SECTIONS[parts[0]]))
    else:
        raise DeckError(key, "not a deck key (write section.key)")


def _coerce(path: str, spec: _Key, value: Any) -> Any:
    kind = spec.kind
    if kind in ("float", "float_or_auto", "float_or_measured"):
        if kind == "float_or_auto" and isinstance(value, str):
            if value == "auto":
                return value
            raise DeckError(path, 'must be a number or "auto"', value)
        if kind == "float_or_measured" and isinstance(value, str):
            if value == "measured":
                return value
            raise DeckError(path, 'must be a number or "measured"', value)
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise DeckError(path, "must be a number", value)
        value = float(value)
        if not math.isfinite(value):
            raise DeckError(path, "must be finite", value)
        if kind == "float_or_auto" and not value > 0:
            raise DeckError(path, "must be > 0", value)
    elif kind == "int":
        if isinstance(value, float) and value.is_integer() and abs(value) < 2**53:
            raise DeckError(path, f"must be an integer (write {int(value)}, not {value!r})", value)
        if isinstance(value, bool) or not isinstance(value, int):
            raise DeckError(path, "must be an integer", value)
    elif kind == "table":
        if not isinstance(value, (str, dict)):
            raise DeckError(path, "must be a CSV file path (a string) or an inline table "
                            "{u = [...], f = [...]}", value)
    elif kind == "str":
        if not isinstance(value, str):
            raise DeckError(path, "must be a string (in quotes)", value)
        if spec.choices and value not in spec.choices:
            close = value.strip().lower() if value.strip().lower() in spec.choices else \
                _closest(value, spec.choices)
            hint = f"; did you mean '{close}'?" if close else ""
            raise DeckError(path, "must be one of " + ", ".join(f'"{c}"' for c in spec.choices) + hint,
                            value)
    elif kind == "float_map_or_auto":   # "auto", one number, or {species name = number}
        if value == "auto":
            return value
        items = value.items() if isinstance(value, dict) else [("*", value)]
        out = {}
        for name, v in items:
            where = path if name == "*" else f"{path}.{name}"
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
                raise DeckError(where, 'must be "auto", a number, or a table {species name = '
                                'number}', v)
            out[name] = float(v)
        return out
    elif kind == "bool":
        if not isinstance(value, bool):
            raise DeckError(path, "must be true or false", value)
    elif kind == "int_list_or_band" and isinstance(value, str):
        if value != "band":
            raise DeckError(path, 'must be a list of mode numbers or "band"', value)
    elif kind in ("int_list", "int_list_or_band"):
        if isinstance(value, int) and not isinstance(value, bool):
            value = [value]
        if not isinstance(value, list) or not all(isinstance(v, int) and not isinstance(v, bool)
                                                  for v in value):
            raise DeckError(path, "must be a list of integers", value)
        value = list(value)
    elif kind == "str_list":
        if isinstance(value, str):
            value = [value]
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            raise DeckError(path, "must be a list of strings", value)
        value = list(value)
    if spec.check is not None and value is not None and not (
            kind in ("float_or_auto", "float_or_measured") and isinstance(value, str)):
        problem = spec.check(value)
        if problem:
            raise DeckError(path, problem, value)
    return value


def _table(path: str, raw: Any, schema: dict[str, _Key], section: str = "") -> dict:
    """Coerce one table against its schema. ``section`` names the schema for renamed keys
    (``"species"`` for every species table)."""
    if raw is None:
        raw = {}
    if not isinstance(raw, dict):
        raise DeckError(path, "must be a table ([" + path + "])", raw)
    for key in raw:
        if key not in schema:
            raise DeckError(f"{path}.{key}" if path else key,
                            _unknown(f"{section}.{key}" if section else key, key, schema))
    out = {}
    for key, spec in schema.items():
        full = f"{path}.{key}" if path else key
        if key in raw:
            out[key] = _coerce(full, spec, raw[key])
        elif spec.default is _REQUIRED:
            raise DeckError(full, "is required")
        else:
            out[key] = copy.deepcopy(spec.default)
    return out


def _slug(title: str) -> str:
    s = re.sub(r"[^A-Za-z0-9]+", "-", title.strip().lower()).strip("-")
    return s[:64] or "run"


def _species(i: int, raw: Any) -> Species:
    label = f"species[{i}]"
    if isinstance(raw, dict) and isinstance(raw.get("name"), str):
        label = f"species.{raw['name']}"
    if not isinstance(raw, dict):
        raise DeckError(label, "must be a table ([[species]])", raw)
    d = _table(label, raw, _SPECIES, "species")
    if d["table"] is not None or d["distribution"] == "table":
        return _table_species(label, raw, d)
    if d["drift_beta"] is not None and d["drift_u"] is not None:
        raise DeckError(f"{label}.drift_u", "give drift_beta or drift_u, not both", d["drift_u"])
    kev = d["temperature_kev"]
    if kev is not None and "theta" in raw:
        raise DeckError(f"{label}.temperature_kev", "give theta or temperature_kev, not both", kev)
    if d["drift_beta"] is not None:
        b = d["drift_beta"]
        drift_u = b / math.sqrt(1.0 - b * b)
    else:
        drift_u = d["drift_u"] if d["drift_u"] is not None else 0.0
    # the temperature as given: theta, or keV (converted in resolve())
    temp_key, temp = ("temperature_kev", kev) if kev is not None else ("theta", d["theta"])
    dist = d["distribution"]
    if dist is None:
        dist = "waterbag" if d["spread_u"] > 0 else ("juttner" if temp > 0 else "cold")
    if dist == "cold" and temp > 0:
        raise DeckError(f"{label}.{temp_key}", f'a "cold" species must have {temp_key} = 0 '
                        '(use distribution = "juttner" for a warm one)', temp)
    if dist == "waterbag":
        if temp_key in raw and temp > 0:
            raise DeckError(f"{label}.{temp_key}", f"a waterbag species is set by spread_u, not "
                            f"{temp_key}", temp)
        if not d["spread_u"] > 0:
            raise DeckError(f"{label}.spread_u", "a waterbag species needs spread_u > 0", d["spread_u"])
    elif "spread_u" in raw and d["spread_u"] > 0:
        raise DeckError(f"{label}.spread_u", 'spread_u applies only to distribution = "waterbag"',
                        d["spread_u"])
    return Species(name=d["name"], charge=d["charge"], mass=d["mass"], density=d["density"],
                   drift_u=drift_u, theta=None if kev is not None else d["theta"],
                   distribution=dist, spread_u=d["spread_u"] if dist == "waterbag" else 0.0,
                   particles_per_cell=d["particles_per_cell"], loading=d["loading"],
                   temperature_kev=kev)


def _table_species(label: str, raw: dict, d: dict) -> Species:
    """A species whose distribution is a table f(u) (streamsim.distribution_table): the table is
    the whole lab-frame distribution, so drift and temperature keys are refused; drift_u is
    derived (the table's mean u), theta = 0."""
    from .distribution_table import TABLE_EXCLUSIVE, TableError, table_from_deck_value
    if d["distribution"] not in (None, "table"):
        raise DeckError(f"{label}.table", f'a table needs distribution = "table", not '
                        f'"{d["distribution"]}"', d["table"])
    if d["table"] is None:
        raise DeckError(f"{label}.distribution", 'distribution = "table" needs table = "FILE.csv" '
                        "(a CSV with the header u,f)", "table")
    given = [k for k in TABLE_EXCLUSIVE if k in raw]
    if given:
        raise DeckError(f"{label}.{given[0]}", "a table species takes its drift and spread from "
                        "the table; remove " + ", ".join(given), raw[given[0]])
    try:
        table = table_from_deck_value(d["table"])
    except TableError as ex:
        raise DeckError(f"{label}.table", str(ex)) from None
    return Species(name=d["name"], charge=d["charge"], mass=d["mass"], density=d["density"],
                   drift_u=table.moments()[0], theta=0.0, distribution="table", spread_u=0.0,
                   particles_per_cell=d["particles_per_cell"], loading=d["loading"],
                   temperature_kev=0.0, table=table)


def validate(raw: dict) -> Deck:
    """Check raw deck data (a parsed TOML table) and build the :class:`Deck` it describes.

    Derived values stay ``None`` (see :func:`resolve`). Raises :class:`DeckError`."""
    if not isinstance(raw, dict):
        raise DeckError("", "a deck must be a TOML table")
    for key in raw:
        if key not in _ALL_TOP:
            hint = ""
            if "axis" in raw or "base" in raw:
                hint = " (this looks like a scan file: run it with `streamsim scan`)"
            raise DeckError(key, did_you_mean(key, _ALL_TOP) + hint)
    top = _table("", {k: v for k, v in raw.items() if k in _TOP}, _TOP)
    sec = {name: _table(name, raw.get(name), schema, name) for name, schema in _SECTIONS.items()}

    raw_species = raw.get("species")
    if raw_species is None:
        raise DeckError("species", "at least one [[species]] is required")
    if isinstance(raw_species, dict):
        raise DeckError("species", "write each species as [[species]] (an array of tables), "
                                   "not [species]")
    if not isinstance(raw_species, list) or not raw_species:
        raise DeckError("species", "at least one [[species]] is required", raw_species)
    species = tuple(_species(i, s) for i, s in enumerate(raw_species))
    names = [s.name for s in species]
    for n in names:
        if names.count(n) > 1:
            raise DeckError(f"species.{n}.name", "two species have the same name", n)

    b = sec["box"]
    (group,) = _EXCLUSIVE["box"]
    given = [k for k in group if b[k] is not None]
    if len(given) > 1:
        raise DeckError(f"box.{given[-1]}", f"give box.{given[0]} or box.{given[1]}, not both"
                        if len(given) == 2 else "give one of " + ", ".join(f"box.{k}" for k in given),
                        b[given[-1]])
    t = sec["time"]
    p = sec["perturbation"]
    for n in p["species"]:
        if n not in names:
            raise DeckError("perturbation.species", f"no species named '{n}'; species are "
                            + ", ".join(names), p["species"])
    band = p["modes"] == "band"
    if p["amplitude"] > 0 and not p["modes"]:
        raise DeckError("perturbation.modes", "an amplitude > 0 needs at least one mode", p["modes"])
    if band and not p["amplitude"] > 0:
        raise DeckError("perturbation.amplitude", 'modes = "band" needs an amplitude > 0',
                        p["amplitude"])
    if not band and p["modes"] and p["amplitude"] * len(set(p["modes"])) >= 1:
        raise DeckError("perturbation.amplitude", f"amplitude x {len(set(p['modes']))} modes must "
                        "be < 1 (the density must stay positive)", p["amplitude"])
    if not band and p["modes"] and max(p["modes"]) > b["cells"] // 2:
        raise DeckError("perturbation.modes", f"mode numbers must be <= cells/2 = {b['cells'] // 2}",
                        p["modes"])

    box = Box(length=b["length"], cells=b["cells"], shape=b["shape"], solver=b["solver"],
              smoothing_passes=b["smoothing_passes"], fastest_wavelengths=b["fastest_wavelengths"],
              length_cm=b["length_cm"])
    auto = t["dt"] == "auto"
    if not auto and t["dt"] > t["end"]:
        raise DeckError("time.dt", f"must be <= time.end = {t['end']:g}", t["dt"])
    time = Time(dt=None if auto else t["dt"], end=t["end"], dt_auto=auto)

    o = sec["output"]
    if not auto:   # a cadence the user gave below the step is an error; defaults are clamped later
        for key in ("diagnostics_interval", "fields_interval", "phase_space_interval"):
            v = o[key]
            if v is not None and v < t["dt"] * (1 - 1e-12):
                raise DeckError(f"output.{key}", f"must be >= time.dt = {t['dt']:g}", v)
    modes = o["modes"] or min(b["cells"] // 2, 64)
    if modes > b["cells"] // 2:
        raise DeckError("output.modes", f"must be <= cells/2 = {b['cells'] // 2}", modes)
    title = top["title"]
    output = Output(folder=o["folder"] or str(Path("runs") / "out" / _slug(title)),
                    diagnostics_interval=o["diagnostics_interval"],
                    fields_interval=o["fields_interval"],
                    phase_space_interval=o["phase_space_interval"],
                    phase_space_particles=o["phase_space_particles"], modes=modes,
                    checkpoint_interval=o["checkpoint_interval"], threads=o["threads"])
    drive = _drive(raw["drive"], sec["drive"], t["end"]) if "drive" in raw else None
    method, vlasov = top["method"], _vlasov(sec["vlasov"], raw, species)
    if method == "vlasov":
        for s in species:
            if s.is_cold:
                raise DeckError(f"species.{s.name}.theta", 'method = "vlasov" needs a resolved '
                                'momentum spread (a continuum cannot hold a cold beam): give '
                                'theta > 0 or spread_u > 0', s.theta)
    if method == "vlasov" and drive is not None:
        raise DeckError("drive", 'an imposed current needs method = "pic" (the Vlasov solver '
                        'has no mean-field drive yet)')
    return Deck(title=title, random_seed=top["random_seed"], units=Units(**sec["units"]),
                box=box, time=time, species=species,
                perturbation=Perturbation(modes=() if band else tuple(p["modes"]),
                                          amplitude=p["amplitude"], species=tuple(p["species"]),
                                          phases=p["phases"], band=band),
                output=output, analysis=Analysis(**sec["analysis"]),
                description=top["description"], drive=drive, method=method,
                vlasov=vlasov)


def _drive(raw: dict, d: dict, end: float) -> Drive:
    """The [drive] block: exactly one form of the current, and only the keys of its profile."""
    (forms,) = _EXCLUSIVE["drive"]
    given = [k for k in forms if d[k] is not None]
    if not given:
        raise DeckError("drive.current", "is required in [drive]: give drive.current (e n_ref c), "
                        "drive.current_statA_cm2 or drive.current_A_m2")
    if len(given) > 1:
        raise DeckError(f"drive.{given[-1]}", "give one of " + ", ".join(f"drive.{k}" for k in given)
                        + ", not several", d[given[-1]])
    profile = d["profile"]
    needs = {"ramp": ("ramp_time",), "sine": ("frequency",)}.get(profile, ())
    for key in needs:
        if d[key] is None:
            raise DeckError(f"drive.{key}", f'is required for profile = "{profile}"')
    for key, owner in (("ramp_time", "ramp"), ("frequency", "sine"), ("phase", "sine")):
        if key in raw and profile != owner:
            raise DeckError(f"drive.{key}", f'applies only to profile = "{owner}"', d[key])
    if d["theory_time"] is not None and d["theory_time"] > end:
        raise DeckError("drive.theory_time", f"must be <= time.end = {end:g}", d["theory_time"])
    return Drive(current=d["current"], profile=profile, ramp_time=d["ramp_time"],
                 frequency=d["frequency"], phase=d["phase"] if profile == "sine" else 0.0,
                 theory_time=d["theory_time"], current_statA_cm2=d["current_statA_cm2"],
                 current_A_m2=d["current_A_m2"])


def _drive_dict(d: Drive) -> dict:
    """The resolved [drive] block as TOML-ready data (normalised current only)."""
    out = {"current": d.current, "profile": d.profile}
    if d.profile == "ramp":
        out["ramp_time"] = d.ramp_time
    if d.profile == "sine":
        out.update(frequency=d.frequency, phase=d.phase)
    if d.theory_time is not None:
        out["theory_time"] = d.theory_time
    return out


def _vlasov(v: dict, raw: dict, species: tuple[Species, ...]) -> Vlasov:
    """The [vlasov] section: species named in u_min/u_max exist, u_min < u_max, and the PIC-only
    keys the deck gave (reported once by a continuum run)."""
    names = [s.name for s in species]
    pairs = {}
    for which in ("u_min", "u_max"):
        given = v[which]
        if given == "auto":
            pairs[which] = None
            continue
        for name in given:
            if name != "*" and name not in names:
                raise DeckError(f"vlasov.{which}.{name}", "no species named '" + name +
                                "'; species are " + ", ".join(names), given[name])
        pairs[which] = tuple(sorted(given.items()))
    out = Vlasov(momentum_cells=v["momentum_cells"], u_min=pairs["u_min"], u_max=pairs["u_max"],
                 thermal_widths=v["thermal_widths"], widen=v["widen"],
                 x_advection=v["x_advection"])
    for name in names:
        lo, hi = out.bound("u_min", name), out.bound("u_max", name)
        if lo is not None and hi is not None and not lo < hi:
            raise DeckError("vlasov.u_max", f"must be > vlasov.u_min = {lo:g} (species {name})",
                            hi)
    ignored = []
    for s in raw.get("species") or []:
        if isinstance(s, dict):
            ignored += [f"species.{s.get('name')}.{k}" for k in VLASOV_IGNORED_KEYS if k in s]
    if isinstance(raw.get("box"), dict):
        ignored += [f"box.{k}" for k in VLASOV_IGNORED_KEYS if k in raw["box"]]
    return dataclasses.replace(out, ignored=tuple(ignored))


# --------------------------------------------------------------------------------------------
# Resolution of the derived values
# --------------------------------------------------------------------------------------------
def _resolve_species(s: Species) -> Species:
    from . import units
    theta = s.theta if s.theta is not None else units.theta_from_kev(s.temperature_kev, s.mass)
    kev = s.temperature_kev if s.temperature_kev is not None else units.kev_from_theta(theta, s.mass)
    return dataclasses.replace(s, theta=theta, temperature_kev=kev)


def _resolve_box(b: Box, species: tuple[Species, ...], density_cm3: float) -> Box:
    from . import units
    length = b.length
    if length is None and b.length_cm is not None:
        length = units.length_from_cm(b.length_cm, density_cm3)
    elif length is None and b.fastest_wavelengths is not None:
        try:
            from .theory import fastest_mode  # lazy: the deck asks the theory only when it must
            fast = fastest_mode(species)
        except Exception as ex:  # noqa: BLE001 - reported as a deck error naming the key
            raise DeckError("box.fastest_wavelengths", f"the linear theory could not find the "
                            f"fastest mode for these species ({ex})", b.fastest_wavelengths)
        if fast is None or not fast[1] > 0:
            raise DeckError("box.fastest_wavelengths", "these species are linearly stable, so there "
                            "is no fastest-growing mode; give box.length", b.fastest_wavelengths)
        length = b.fastest_wavelengths * 2.0 * math.pi / fast[0]
    elif length is None:
        length = 2.0 * math.pi
    length_cm = b.length_cm if b.length_cm is not None else units.length_cm(length, density_cm3)
    return dataclasses.replace(b, length=length, length_cm=length_cm)


def _resolve_time(t: Time, box: Box, species: tuple[Species, ...]) -> Time:
    if t.dt is not None:
        return t
    from .health import auto_dt
    return dataclasses.replace(t, dt=auto_dt(box, species, t.end))


def _resolve_output(o: Output, t: Time) -> Output:
    dt, end = t.dt, t.end

    def cadence(given, default):
        if given is None:      # a default never undercuts the step
            return max(dt, default)
        if t.dt_auto:          # the user did not choose dt, so a cadence below it means "every step"
            return max(dt, given)
        return given

    checkpoint = o.checkpoint_interval
    return dataclasses.replace(
        o,
        # 0.1/omega_p: ten samples per e-fold at growth omega_p, ~60 per plasma period; more
        # often for short runs (common practice)
        diagnostics_interval=cadence(o.diagnostics_interval, min(0.1, end / 200.0)),
        fields_interval=cadence(o.fields_interval, end / 20.0),
        phase_space_interval=cadence(o.phase_space_interval, end / 8.0),
        checkpoint_interval=0.0 if checkpoint == 0 else cadence(checkpoint, end / 10.0))


@functools.lru_cache(maxsize=64)
def _bands(species: tuple[Species, ...]) -> tuple[tuple[float, float], ...]:
    from .theory.roots import unstable_bands  # lazy: the deck asks the theory only when it must
    return tuple(unstable_bands(species))


def _resolve_perturbation(p: Perturbation, box: Box, species: tuple[Species, ...]) -> Perturbation:
    """``modes = "band"``: every box mode m = 1..cells/2 whose k_m = 2 pi m / L lies in an
    unstable band of the deck's linear theory; ``phases`` defaults to "random" for a band and
    "zero" for a list of modes."""
    phases = p.phases or ("random" if p.band else "zero")
    if not p.band or p.modes:
        return dataclasses.replace(p, phases=phases)
    try:
        bands = _bands(species)
    except Exception as ex:  # noqa: BLE001 - reported as a deck error naming the key
        raise DeckError("perturbation.modes", f"the linear theory could not find the unstable "
                        f"band ({ex})", "band")
    modes = tuple(m for m in range(1, box.cells // 2 + 1)
                  if any(lo <= 2 * math.pi * m / box.length <= hi for lo, hi in bands))
    if not modes:
        raise DeckError("perturbation.modes", "no box mode lies in an unstable band of the "
                        "linear theory (stable species, or a box shorter than the unstable "
                        "wavelengths)", "band")
    if p.amplitude * len(modes) >= 1:
        raise DeckError("perturbation.amplitude", f"amplitude x {len(modes)} band modes must be "
                        "< 1 (the density must stay positive)", p.amplitude)
    return dataclasses.replace(p, modes=modes, phases=phases)


def resolve(deck: Deck) -> Deck:
    """Fill in the derived values of a validated deck: species temperatures (theta <-> keV),
    the box length (from ``length_cm`` or the linear theory's fastest wavelength) and its cm
    form, ``dt = "auto"`` (numerical-health rules) and the output cadences left to their
    defaults (derived from ``time.end``, never below ``dt``). Resolving a resolved deck
    returns an equal deck. Raises :class:`DeckError`."""
    species = tuple(_resolve_species(s) for s in deck.species)
    box = _resolve_box(deck.box, species, deck.units.density_cm3)
    time = _resolve_time(deck.time, box, species)
    if time.dt > time.end * (1 + 1e-12):
        raise DeckError("time.dt", f"must be <= time.end = {time.end:g}", time.dt)
    output = _resolve_output(deck.output, time)
    drive = deck.drive
    if drive is not None and drive.current is None:
        from .drive import convert_current
        form = "current_statA_cm2" if drive.current_statA_cm2 is not None else "current_A_m2"
        drive = dataclasses.replace(drive, current=convert_current(
            getattr(drive, form), form, deck.units.density_cm3))
    pert = _resolve_perturbation(deck.perturbation, box, species)
    return dataclasses.replace(deck, species=species, box=box, time=time, output=output,
                               drive=drive, perturbation=pert)


# --------------------------------------------------------------------------------------------
# --set overrides
# --------------------------------------------------------------------------------------------
def parse_override(text: str) -> tuple[list[str], Any]:
    """``"species.electrons.theta=1e-3"`` -> (["species", "electrons", "theta"], 0.001).

    The value is parsed as a TOML literal and nothing else (strings need quotes); nothing is
    ever evaluated.
    """
    if "=" not in text:
        raise DeckError(text, "an override is written key=value, e.g. species.electrons.theta=1e-3")
    key, _, literal = text.partition("=")
    key = key.strip()
    if not re.fullmatch(r"[A-Za-z_][A-Za-z0-9_\-]*(\.[A-Za-z0-9_\-]+)*", key):
        raise DeckError(key or text, "not a deck key (write section.key=value)")
    try:
        value = tomllib.loads("v = " + literal.strip())["v"]
    except tomllib.TOMLDecodeError:
        raise DeckError(key, "the value must be a TOML literal: a number, true/false, a list, or a "
                        "string in quotes (e.g. box.shape='\"tsc\"')", literal.strip()) from None
    return key.split("."), value


def apply_overrides(raw: dict, overrides: list[str]) -> dict:
    """Apply ``--set`` overrides to raw deck data; species are addressed by name. Setting one
    key of an exclusive group (``box.length``/``length_cm``/``fastest_wavelengths``,
    ``drift_beta``/``drift_u``, ``theta``/``temperature_kev``) drops the others."""
    raw = copy.deepcopy(raw)
    for text in overrides:
        parts, value = parse_override(text)
        key = ".".join(parts)
        if parts[0] == "species":
            if len(parts) != 3:
                raise DeckError(key, "address a species key as species.<name>.<key>")
            found = [s for s in raw.get("species", []) if isinstance(s, dict) and s.get("name") == parts[1]]
            if not found:
                names = [s.get("name") for s in raw.get("species", []) if isinstance(s, dict)]
                raise DeckError(key, f"no species named '{parts[1]}'; species are "
                                + ", ".join(map(str, names)))
            target = found[0]
            for other in _group("species", parts[2]):
                target.pop(other, None)
            target[parts[2]] = value
            continue
        node = raw
        for p in parts[:-1]:
            if p not in _SECTIONS:
                raise DeckError(key, did_you_mean(p, _SECTIONS))
            node = node.setdefault(p, {})
            if not isinstance(node, dict):
                raise DeckError(key, f"{p} is not a table")
        last = parts[-1]
        if len(parts) == 2:
            for other in _group(parts[0], last):
                node.pop(other, None)
        node[last] = value
    return raw


# --------------------------------------------------------------------------------------------
# Loading
# --------------------------------------------------------------------------------------------
def read_toml_file(path: str | Path, kind: str = "deck", error=DeckError) -> tuple[dict, str]:
    """(data, text) of a TOML file; any failure becomes ``error(path, message)``, a syntax error
    with its line and column. ``kind`` names the file in messages ("deck", "scan file")."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise error(str(path), f"no such {kind}") from None
    except IsADirectoryError:
        raise error(str(path), f"is a folder, not a {kind}") from None
    except (OSError, UnicodeDecodeError) as ex:
        raise error(str(path), f"cannot read the {kind} ({ex.__class__.__name__}: {ex})") from None
    try:
        return tomllib.loads(text), text
    except tomllib.TOMLDecodeError as ex:
        line = getattr(ex, "lineno", None)
        col = getattr(ex, "colno", None)
        msg = getattr(ex, "msg", str(ex))
        where = f"line {line}, column {col}" if line else "unknown position"
        raise error(str(path), f"not valid TOML at {where}: {msg}") from None


def read_toml(path: str | Path) -> dict:
    """Read a deck file; a syntax error becomes a DeckError with line and column."""
    return read_toml_file(path, "deck file")[0]


def load_deck(source: str | Path | dict | Deck | None = None, overrides: list[str] | None = None) -> Deck:
    """Read, override, validate and resolve a deck.

    ``source`` is a path to a TOML file, an already-parsed dict, a Deck (returned resolved,
    unless there are overrides) or None for the built-in default deck. Raises
    :class:`DeckError`.
    """
    if isinstance(source, Deck):
        if not overrides:
            return source if source.is_resolved else resolve(source)
        raw = resolve(source).to_dict()
    elif source is None:
        raw = tomllib.loads(DEFAULT_DECK)
    elif isinstance(source, dict):
        raw = copy.deepcopy(source)
    else:
        raw = read_toml(source)
    if overrides:
        raw = apply_overrides(raw, list(overrides))
    if isinstance(source, (str, Path)):         # table paths are relative to the deck file
        from .distribution_table import anchor_tables
        anchor_tables(raw, Path(source).resolve().parent)
    return resolve(validate(raw))


def _read_default_deck() -> str:
    return (importlib.resources.files("streamsim").joinpath("data").joinpath("default.toml")
            .read_text(encoding="utf-8"))


#: The built-in default deck (`streamsim run` with no DECK), the text of the package data file
#: streamsim/data/default.toml. Also shipped as runs/pair-beams.toml.
DEFAULT_DECK = _read_default_deck()
