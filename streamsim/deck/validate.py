"""Validation: a raw deck table (parsed TOML) into a :class:`~streamsim.deck.schema.Deck` whose
derived values are still open. Each key is coerced and range-checked from its declaration; the
rules here are only those between keys."""
from __future__ import annotations

import copy
import dataclasses
import math
import re
from pathlib import Path
from typing import Any

from .errors import DeckError, _closest, did_you_mean
from .keys import REQUIRED, Key, build
from .schema import (ALL_TOP, SECTION_CLASSES, SECTIONS, SPECIES, TOP, VLASOV_IGNORED_KEYS,
                     Deck, Drive, Species, Time, Vlasov, check_exclusive, unknown_key)


def coerce(path: str, spec: Key, value: Any) -> Any:
    """One value checked against its key: type, choices and range. Raises :class:`DeckError`."""
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


def table(path: str, raw: Any, schema: dict[str, Key], section: str = "") -> dict:
    """Coerce one table against its keys. ``section`` names the schema for renamed keys
    (``"species"`` for every species table)."""
    if raw is None:
        raw = {}
    if not isinstance(raw, dict):
        raise DeckError(path, "must be a table ([" + path + "])", raw)
    for key in raw:
        if key not in schema:
            raise DeckError(f"{path}.{key}" if path else key,
                            unknown_key(f"{section}.{key}" if section else key, key, schema))
    out = {}
    for key, spec in schema.items():
        full = f"{path}.{key}" if path else key
        if key in raw:
            out[key] = coerce(full, spec, raw[key])
        elif spec.default is REQUIRED:
            raise DeckError(full, "is required")
        else:
            out[key] = copy.deepcopy(spec.default)
    return out


def check_applies(section: str, raw: dict, values: dict) -> None:
    """Keys that mean something only for one value of another key (``applies``): required
    then when so declared, refused otherwise."""
    schema = SECTIONS[section]
    for key, spec in schema.items():
        if spec.applies is None:
            continue
        other, wanted = spec.applies
        if values[other] == wanted and spec.required_when_applies and values[key] is None:
            raise DeckError(f"{section}.{key}", f'is required for {other} = "{wanted}"')
    for key, spec in schema.items():
        if spec.applies is not None and key in raw and values[spec.applies[0]] != spec.applies[1]:
            other, wanted = spec.applies
            raise DeckError(f"{section}.{key}", f'applies only to {other} = "{wanted}"',
                            values[key])


def _slug(title: str) -> str:
    s = re.sub(r"[^A-Za-z0-9]+", "-", title.strip().lower()).strip("-")
    return s[:64] or "run"


def _species(i: int, raw: Any) -> Species:
    label = f"species[{i}]"
    if isinstance(raw, dict) and isinstance(raw.get("name"), str):
        label = f"species.{raw['name']}"
    if not isinstance(raw, dict):
        raise DeckError(label, "must be a table ([[species]])", raw)
    d = table(label, raw, SPECIES, "species")
    if d["table"] is not None or d["distribution"] == "table":
        return _table_species(label, raw, d)
    check_exclusive("species", label, raw, d)
    kev = d["temperature_kev"]
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
    return build(Species, d, drift_u=drift_u, theta=None if kev is not None else d["theta"],
                 distribution=dist, spread_u=d["spread_u"] if dist == "waterbag" else 0.0)


def _table_species(label: str, raw: dict, d: dict) -> Species:
    """A species whose distribution is a table f(u) (streamsim.distribution_table): the table is
    the whole lab-frame distribution, so drift and temperature keys are refused; drift_u is
    derived (the table's mean u), theta = 0."""
    from ..distribution_table import TABLE_EXCLUSIVE, TableError, table_from_deck_value
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
        tab = table_from_deck_value(d["table"])
    except TableError as ex:
        raise DeckError(f"{label}.table", str(ex)) from None
    return build(Species, d, drift_u=tab.moments()[0], theta=0.0, distribution="table",
                 spread_u=0.0, temperature_kev=0.0, table=tab)


def validate(raw: dict) -> Deck:
    """Check raw deck data (a parsed TOML table) and build the :class:`Deck` it describes.

    Derived values stay ``None`` (see ``resolve``). Raises :class:`DeckError`."""
    if not isinstance(raw, dict):
        raise DeckError("", "a deck must be a TOML table")
    for key in raw:
        if key not in ALL_TOP:
            hint = ""
            if "axis" in raw or "base" in raw:
                hint = " (this looks like a scan file: run it with `streamsim scan`)"
            raise DeckError(key, did_you_mean(key, ALL_TOP) + hint)
    top = table("", {k: v for k, v in raw.items() if k in TOP}, TOP)
    sec = {name: table(name, raw.get(name), schema, name) for name, schema in SECTIONS.items()}

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
    check_exclusive("box", "box", raw.get("box") or {}, b)
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

    box = build(SECTION_CLASSES["box"], b)
    auto = t["dt"] == "auto"
    if not auto and t["dt"] > t["end"]:
        raise DeckError("time.dt", f"must be <= time.end = {t['end']:g}", t["dt"])
    time = build(Time, t, dt=None if auto else t["dt"], dt_auto=auto)

    o = sec["output"]
    if not auto:   # a cadence the user gave below the step is an error; defaults are clamped later
        for key in ("diagnostics_interval", "fields_interval", "phase_space_interval"):
            v = o[key]
            if v is not None and v < t["dt"] * (1 - 1e-12):
                raise DeckError(f"output.{key}", f"must be >= time.dt = {t['dt']:g}", v)
    modes = o["recorded_modes"] or min(b["cells"] // 2, 64)
    if modes > b["cells"] // 2:
        raise DeckError("output.recorded_modes", f"must be <= cells/2 = {b['cells'] // 2}", modes)
    title = top["title"]
    output = build(SECTION_CLASSES["output"], o,
                   folder=o["folder"] or str(Path("runs") / "out" / _slug(title)),
                   recorded_modes=modes)
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
    perturbation = build(SECTION_CLASSES["perturbation"], p,
                         modes=() if band else tuple(p["modes"]), species=tuple(p["species"]),
                         band=band)
    return build(Deck, top, units=build(SECTION_CLASSES["units"], sec["units"]), box=box,
                 time=time, species=species, perturbation=perturbation, output=output,
                 analysis=build(SECTION_CLASSES["analysis"], sec["analysis"]), drive=drive,
                 vlasov=vlasov)


def _drive(raw: dict, d: dict, end: float) -> Drive:
    """The [drive] block: exactly one form of the current, and only the keys of its profile."""
    if not isinstance(raw, dict):
        raw = {}
    check_exclusive("drive", "drive", raw, d)
    check_applies("drive", raw, d)
    if d["theory_time"] is not None and d["theory_time"] > end:
        raise DeckError("drive.theory_time", f"must be <= time.end = {end:g}", d["theory_time"])
    return build(Drive, d, phase=d["phase"] if d["profile"] == "sine" else 0.0)


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
    out = build(Vlasov, v, u_min=pairs["u_min"], u_max=pairs["u_max"])
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
