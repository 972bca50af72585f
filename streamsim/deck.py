"""The deck: what to simulate, read from TOML, validated into frozen dataclasses.

The key names here are a contract that scripts and scans rely on (see README, "Deck reference").
Every key is typed and ranged; an unknown key is rejected with a "did you mean"; every problem is
reported as one :class:`DeckError` naming the key, its value and what is wrong.

No physics lives here, except the resolution of two derived values: ``box.fastest_wavelengths``
(asks the linear theory for the fastest-growing wavelength) and ``time.dt = "auto"`` (asks the
numerical-health rules for a step).
"""
from __future__ import annotations

import copy
import dataclasses
import difflib
import math
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable

__all__ = [
    "DeckError", "Deck", "Species", "Box", "Time", "Units", "Perturbation", "Output", "Analysis",
    "load_deck", "apply_overrides", "parse_override", "DEFAULT_DECK",
]


class DeckError(ValueError):
    """A deck problem, tied to one key. ``str(err)`` is the one line the CLI prints."""

    def __init__(self, key: str, message: str, value: Any = dataclasses.MISSING):
        self.key = key
        self.value = value
        self.message = message
        if value is dataclasses.MISSING:
            text = f"{key}: {message}" if key else message
        else:
            text = f"{key} = {_show(value)}: {message}"
        super().__init__(text)


def _show(value: Any) -> str:
    if isinstance(value, str):
        return repr(value) if len(value) < 60 else repr(value[:57] + "...")
    if isinstance(value, dict):
        return "{...}"
    text = repr(value)
    return text if len(text) < 60 else text[:57] + "..."


# --------------------------------------------------------------------------------------------
# The frozen, resolved deck
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Units:
    density_cm3: float


@dataclass(frozen=True)
class Box:
    length: float                 # c/omega_p (resolved, also when fastest_wavelengths was given)
    cells: int
    shape: str                    # "ngp" | "cic" | "tsc"
    solver: str                   # "spectral" | "finite_difference"
    filter_passes: int            # binomial (1,2,1) passes on rho, with compensation
    fastest_wavelengths: float | None = None

    @property
    def dx(self) -> float:
        return self.length / self.cells

    @property
    def smoothing_passes(self) -> int:
        return self.filter_passes


@dataclass(frozen=True)
class Time:
    dt: float                     # 1/omega_p (resolved, also when "auto" was given)
    end: float
    dt_auto: bool = False

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
    theta: float                  # kT/(m c^2) in the drift frame
    distribution: str             # "cold" | "juttner" | "waterbag"
    spread_u: float               # waterbag half-width in u (drift frame)
    particles_per_cell: int
    loading: str                  # "quiet" | "random"

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
    modes: tuple[int, ...] = ()
    amplitude: float = 0.0        # delta n / n of each listed mode, by displacing positions
    species: tuple[str, ...] = () # which species are displaced; empty = every negative species


@dataclass(frozen=True)
class Output:
    folder: str                   # run folder
    diagnostics_every: float      # 1/omega_p: energies, modes, contrast
    fields_every: float           # 1/omega_p: meshes and density profiles
    phase_space_every: float      # 1/omega_p: (x, u) subsample
    phase_space_particles: int    # per species
    modes: int                    # |E_k| recorded for m = 1..modes
    checkpoint_every: float       # 1/omega_p (default end/10); 0 = only at the end and on a signal
    threads: int                  # numba threads; 0 = all cores

    diagnostics_interval = property(lambda self: self.diagnostics_every)
    fields_interval = property(lambda self: self.fields_every)
    phase_space_interval = property(lambda self: self.phase_space_every)
    checkpoint_interval = property(lambda self: self.checkpoint_every)


@dataclass(frozen=True)
class Analysis:
    clump_threshold: float        # a clump is a connected region with delta n/n above this
    coherence_drop: float         # k_c: where |F|^2 falls to this fraction of its peak
    coherence_kmax_factor: float  # form factor computed up to this multiple of the grid Nyquist k
    bulk_gamma: float             # Lorentz factor of the simulation frame towards the observer
    energy_tolerance: float       # relative energy error above which a run warns


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

    def species_named(self, name: str) -> Species:
        for s in self.species:
            if s.name == name:
                return s
        raise KeyError(name)

    def to_dict(self) -> dict:
        """The resolved deck as plain TOML-ready data (it loads back to an equal Deck)."""
        box = {"length": self.box.length, "cells": self.box.cells, "shape": self.box.shape,
               "solver": self.box.solver, "filter_passes": self.box.filter_passes}
        species = []
        for s in self.species:
            d = {"name": s.name, "charge": s.charge, "mass": s.mass, "density": s.density,
                 "drift_u": s.drift_u, "theta": s.theta, "distribution": s.distribution,
                 "particles_per_cell": s.particles_per_cell, "loading": s.loading}
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
                             "species": list(self.perturbation.species)},
            "output": dataclasses.asdict(self.output),
            "analysis": dataclasses.asdict(self.analysis),
        }
        if self.description:
            out["description"] = self.description
        return out

    def to_toml(self) -> str:
        import tomli_w
        return tomli_w.dumps(self.to_dict())


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


def _gt(lo):   return lambda v: None if v > lo else f"must be > {lo:g}"
def _ge(lo):   return lambda v: None if v >= lo else f"must be >= {lo:g}"


def _finite_pos(v):
    return None if (math.isfinite(v) and v > 0) else "must be a finite number > 0"


_TOP = {
    "title": _Key("str", "streamsim run", lambda v: None if v.strip() else "must not be empty"),
    "description": _Key("str", ""),
    "random_seed": _Key("int", 1, _ge(0)),
}
_UNITS = {"density_cm3": _Key("float", 1.0e10, _finite_pos)}
_BOX = {
    "length": _Key("float", None, _finite_pos),
    "fastest_wavelengths": _Key("float", None, _finite_pos),
    "cells": _Key("int", 256, lambda v: None if 2 <= v <= 1 << 24 else "must be between 2 and 16777216"),
    "shape": _Key("str", "cic", choices=("ngp", "cic", "tsc")),
    "solver": _Key("str", "spectral", choices=("spectral", "finite_difference")),
    "filter_passes": _Key("int", 0, lambda v: None if 0 <= v <= 16 else "must be between 0 and 16"),
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
    "theta": _Key("float", 0.0, lambda v: None if (math.isfinite(v) and v >= 0) else "must be >= 0"),
    "distribution": _Key("str", None, choices=("cold", "juttner", "waterbag")),
    "spread_u": _Key("float", 0.0, lambda v: None if (math.isfinite(v) and v >= 0) else "must be >= 0"),
    "particles_per_cell": _Key("int", 64, lambda v: None if 1 <= v <= 1 << 20 else "must be between 1 and 1048576"),
    "loading": _Key("str", "quiet", choices=("quiet", "random")),
}
_PERTURBATION = {
    "modes": _Key("int_list", [], lambda v: None if all(m >= 1 for m in v) else "mode numbers must be >= 1"),
    "amplitude": _Key("float", 0.0, lambda v: None if (math.isfinite(v) and 0 <= v < 1) else "must be in [0, 1)"),
    "species": _Key("str_list", []),
}
_OUTPUT = {
    "folder": _Key("str", None, lambda v: None if v.strip() else "must not be empty"),
    "diagnostics_every": _Key("float", None, _finite_pos),
    "fields_every": _Key("float", None, _finite_pos),
    "phase_space_every": _Key("float", None, _finite_pos),
    "phase_space_particles": _Key("int", 4096, _ge(0)),
    "modes": _Key("int", None, _ge(1)),
    "checkpoint_every": _Key("float", None, lambda v: None if (math.isfinite(v) and v >= 0) else "must be >= 0"),
    "threads": _Key("int", 0, _ge(0)),
}
_ANALYSIS = {
    "clump_threshold": _Key("float", 0.5, _finite_pos),
    "coherence_drop": _Key("float", 0.5, lambda v: None if 0 < v < 1 else "must be in (0, 1)"),
    "coherence_kmax_factor": _Key("float", 4.0, lambda v: None if 1 <= v <= 64 else "must be between 1 and 64"),
    "bulk_gamma": _Key("float", 1.0, lambda v: None if (math.isfinite(v) and v >= 1) else "must be >= 1"),
    "energy_tolerance": _Key("float", 1.0e-2, _finite_pos),
}
_SECTIONS = {"units": _UNITS, "box": _BOX, "time": _TIME, "perturbation": _PERTURBATION,
             "output": _OUTPUT, "analysis": _ANALYSIS}
_ALL_TOP = set(_TOP) | set(_SECTIONS) | {"species"}


def _did_you_mean(word: str, options) -> str:
    close = difflib.get_close_matches(word, sorted(options), n=1, cutoff=0.6)
    return f"unknown key; did you mean '{close[0]}'?" if close else \
        "unknown key; known keys: " + ", ".join(sorted(options))


def _coerce(path: str, spec: _Key, value: Any) -> Any:
    kind = spec.kind
    if kind in ("float", "float_or_auto"):
        if kind == "float_or_auto" and isinstance(value, str):
            if value == "auto":
                return value
            raise DeckError(path, 'must be a number or "auto"', value)
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
    elif kind == "str":
        if not isinstance(value, str):
            raise DeckError(path, "must be a string (in quotes)", value)
        if spec.choices and value not in spec.choices:
            close = [c for c in spec.choices if c == value.strip().lower()] or \
                difflib.get_close_matches(value, spec.choices, n=1)
            hint = f"; did you mean '{close[0]}'?" if close else ""
            raise DeckError(path, "must be one of " + ", ".join(f'"{c}"' for c in spec.choices) + hint,
                            value)
    elif kind == "bool":
        if not isinstance(value, bool):
            raise DeckError(path, "must be true or false", value)
    elif kind == "int_list":
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
    if spec.check is not None and value is not None and not (kind == "float_or_auto" and value == "auto"):
        problem = spec.check(value)
        if problem:
            raise DeckError(path, problem, value)
    return value


def _table(path: str, raw: Any, schema: dict[str, _Key]) -> dict:
    if raw is None:
        raw = {}
    if not isinstance(raw, dict):
        raise DeckError(path, "must be a table ([" + path + "])", raw)
    for key in raw:
        if key not in schema:
            raise DeckError(f"{path}.{key}" if path else key, _did_you_mean(key, schema))
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
    d = _table(label, raw, _SPECIES)
    if d["drift_beta"] is not None and d["drift_u"] is not None:
        raise DeckError(f"{label}.drift_u", "give drift_beta or drift_u, not both", d["drift_u"])
    if d["drift_beta"] is not None:
        b = d["drift_beta"]
        drift_u = b / math.sqrt(1.0 - b * b)
    else:
        drift_u = d["drift_u"] if d["drift_u"] is not None else 0.0
    dist = d["distribution"]
    if dist is None:
        dist = "waterbag" if d["spread_u"] > 0 else ("juttner" if d["theta"] > 0 else "cold")
    if dist == "cold" and d["theta"] > 0:
        raise DeckError(f"{label}.theta", 'a "cold" species must have theta = 0 '
                        '(use distribution = "juttner" for a warm one)', d["theta"])
    if dist == "waterbag":
        if "theta" in raw and d["theta"] > 0:
            raise DeckError(f"{label}.theta", "a waterbag species is set by spread_u, not theta",
                            d["theta"])
        if not d["spread_u"] > 0:
            raise DeckError(f"{label}.spread_u", "a waterbag species needs spread_u > 0", d["spread_u"])
    elif "spread_u" in raw and d["spread_u"] > 0:
        raise DeckError(f"{label}.spread_u", 'spread_u applies only to distribution = "waterbag"',
                        d["spread_u"])
    return Species(name=d["name"], charge=d["charge"], mass=d["mass"], density=d["density"],
                   drift_u=drift_u, theta=d["theta"], distribution=dist,
                   spread_u=d["spread_u"] if dist == "waterbag" else 0.0,
                   particles_per_cell=d["particles_per_cell"], loading=d["loading"])


def _validate(raw: dict) -> Deck:
    if not isinstance(raw, dict):
        raise DeckError("", "a deck must be a TOML table")
    for key in raw:
        if key not in _ALL_TOP:
            hint = ""
            if "axis" in raw or "base" in raw:
                hint = " (this looks like a scan file: run it with `streamsim scan`)"
            raise DeckError(key, _did_you_mean(key, _ALL_TOP) + hint)
    top = _table("", {k: v for k, v in raw.items() if k in _TOP}, _TOP)
    sec = {name: _table(name, raw.get(name), schema) for name, schema in _SECTIONS.items()}

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
    if b["length"] is not None and b["fastest_wavelengths"] is not None:
        raise DeckError("box.fastest_wavelengths", "give box.length or box.fastest_wavelengths, not both",
                        b["fastest_wavelengths"])
    t = sec["time"]
    p = sec["perturbation"]
    for n in p["species"]:
        if n not in names:
            raise DeckError("perturbation.species", f"no species named '{n}'; species are "
                            + ", ".join(names), p["species"])
    if p["amplitude"] > 0 and not p["modes"]:
        raise DeckError("perturbation.modes", "an amplitude > 0 needs at least one mode", p["modes"])
    if p["modes"] and max(p["modes"]) > b["cells"] // 2:
        raise DeckError("perturbation.modes", f"mode numbers must be <= cells/2 = {b['cells'] // 2}",
                        p["modes"])

    units = Units(**sec["units"])
    # -- resolve the box length: explicit, from the linear theory, or a default ------------
    if b["length"] is not None:
        length = b["length"]
    elif b["fastest_wavelengths"] is not None:
        try:
            from .theory import fastest_mode  # lazy: the deck asks the theory only when it must
            fast = fastest_mode(species)
        except Exception as ex:  # noqa: BLE001 - reported as a deck error naming the key
            raise DeckError("box.fastest_wavelengths", f"the linear theory could not find the "
                            f"fastest mode for these species ({ex})", b["fastest_wavelengths"])
        if fast is None or not fast[1] > 0:
            raise DeckError("box.fastest_wavelengths", "these species are linearly stable, so there "
                            "is no fastest-growing mode; give box.length", b["fastest_wavelengths"])
        length = b["fastest_wavelengths"] * 2.0 * math.pi / fast[0]
    else:
        length = 2.0 * math.pi
    box = Box(length=length, cells=b["cells"], shape=b["shape"], solver=b["solver"],
              filter_passes=b["filter_passes"], fastest_wavelengths=b["fastest_wavelengths"])

    if t["dt"] == "auto":
        from .health import auto_dt
        dt = auto_dt(box, species, t["end"])
    else:
        dt = t["dt"]
    if dt > t["end"]:
        raise DeckError("time.dt", f"must be <= time.end = {t['end']:g}", t["dt"])
    time = Time(dt=dt, end=t["end"], dt_auto=t["dt"] == "auto")

    o = sec["output"]
    title = top["title"]
    folder = o["folder"] or str(Path("runs") / "out" / _slug(title))
    # default: 0.1/omega_p (ten samples per e-fold at growth omega_p, ~60 per plasma period),
    # more often for short runs, never more than once a step
    diag = o["diagnostics_every"] or max(dt, min(0.1, t["end"] / 200.0))
    fields_every = o["fields_every"] or t["end"] / 20.0
    ps_every = o["phase_space_every"] or t["end"] / 8.0
    if time.dt_auto:  # the user did not choose dt, so a cadence below it means "every step"
        diag, fields_every, ps_every = (max(v, dt) for v in (diag, fields_every, ps_every))
    for key, v in (("diagnostics_every", diag), ("fields_every", fields_every),
                   ("phase_space_every", ps_every)):
        if v < dt * (1 - 1e-12):
            raise DeckError(f"output.{key}", f"must be >= time.dt = {dt:g}", v)
    modes = o["modes"] or min(b["cells"] // 2, 64)
    if modes > b["cells"] // 2:
        raise DeckError("output.modes", f"must be <= cells/2 = {b['cells'] // 2}", modes)
    output = Output(folder=folder, diagnostics_every=diag, fields_every=fields_every,
                    phase_space_every=ps_every, phase_space_particles=o["phase_space_particles"],
                    modes=modes, threads=o["threads"],
                    checkpoint_every=t["end"] / 10.0 if o["checkpoint_every"] is None else o["checkpoint_every"])
    return Deck(title=title, random_seed=top["random_seed"], units=units, box=box, time=time,
                species=species,
                perturbation=Perturbation(modes=tuple(p["modes"]), amplitude=p["amplitude"],
                                          species=tuple(p["species"])),
                output=output, analysis=Analysis(**sec["analysis"]),
                description=top["description"])


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
    """Apply ``--set`` overrides to raw deck data; species are addressed by name."""
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
            if parts[2] in ("drift_beta", "drift_u"):
                target.pop("drift_beta", None)
                target.pop("drift_u", None)
            target[parts[2]] = value
            continue
        node = raw
        for p in parts[:-1]:
            if p not in _SECTIONS:
                raise DeckError(key, _did_you_mean(p, _SECTIONS))
            node = node.setdefault(p, {})
            if not isinstance(node, dict):
                raise DeckError(key, f"{p} is not a table")
        last = parts[-1]
        if len(parts) == 2 and parts[0] == "box" and last in ("length", "fastest_wavelengths"):
            node.pop("length", None)
            node.pop("fastest_wavelengths", None)
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
    """Read, override and validate a deck.

    ``source`` is a path to a TOML file, an already-parsed dict, a Deck (returned as is, unless
    there are overrides) or None for the built-in default deck. Raises :class:`DeckError`.
    """
    if isinstance(source, Deck):
        if not overrides:
            return source
        raw = source.to_dict()
    elif source is None:
        raw = tomllib.loads(DEFAULT_DECK)
    elif isinstance(source, dict):
        raw = copy.deepcopy(source)
    else:
        raw = read_toml(source)
    if overrides:
        raw = apply_overrides(raw, list(overrides))
    return _validate(raw)


#: The built-in default deck (`streamsim run` with no DECK). Also shipped as runs/pair-beams.toml.
DEFAULT_DECK = """\
# Symmetric electron-positron beams, the default demo. Invented parameters: a pair plasma of
# 1e10 cm^-3 whose two species counter-stream at 0.1 c. The two-stream instability grows at about
# half the beam plasma frequency, saturates near t = 30/omega_p and leaves electron and positron
# clumps behind.
title = "symmetric pair beams"
random_seed = 1

[units]
density_cm3 = 1.0e10

[box]
fastest_wavelengths = 8
cells = 256
shape = "cic"

[time]
dt = 0.05
end = 60.0

[[species]]
name = "electrons"
charge = -1.0
mass = 1.0
density = 0.5
drift_beta = 0.1
theta = 0.0
particles_per_cell = 128
loading = "quiet"

[[species]]
name = "positrons"
charge = 1.0
mass = 1.0
density = 0.5
drift_beta = -0.1
theta = 0.0
particles_per_cell = 128
loading = "quiet"

[perturbation]
modes = [8]
amplitude = 1.0e-4
"""
