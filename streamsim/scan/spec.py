"""Scan files: read, validate and expand into points, each a resolved deck with its hash.

A scan file is TOML::

    title = "density scan"              # optional; default: the file name
    base = "pair-beams.toml"            # deck path, relative to the scan file (or absolute);
                                        # omitted: the built-in default deck
    set = ["time.end=30.0"]             # optional --set overrides applied to the base first
    combine = "product"                 # or "zip" (all axes the same length, walked together)
    replicas = 1                        # runs per point, random_seed = seed + replica index
    run_figures = false                 # also draw each run's own figures (slower)

    [[axis]]
    key = "units.density_cm3"           # any deck key in the --set syntax
    logspace = {start = 1e8, stop = 1e14, num = 7}   # or values = [...], linspace = {...}

    [[axis]]                            # one axis setting several keys at once
    name = "drift_beta"
    keys = ["species.electrons.drift_beta", "species.positrons.drift_beta"]
    scale = [1.0, -1.0]
    values = [0.05, 0.1, 0.2]

``species.*.<key>`` addresses every species of the base deck. Any deck key may be an axis,
the physical-unit forms too (``box.length_cm``, ``species.*.temperature_kev``); two axes may
not set two forms of one quantity. Every problem is one :class:`ScanError` line naming the
file, the key and what is wrong; keys are checked by the deck's own schema
(:func:`streamsim.deck.check_key_path`), with its "did you mean" and renamed-key messages.

This module imports nothing from :mod:`streamsim.scan.tables`; the table columns an axis may not
be named after (:data:`RESERVED_COLUMNS`) are listed here and the tables use them.
"""
from __future__ import annotations

import copy
import hashlib
import itertools
import json
import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .. import deck as _deck
from ..deck import (Deck, DeckError, InputError, apply_overrides, check_key_path, did_you_mean,
                    exclusive_keys, load_deck, parse_override, read_toml_file)

__all__ = ["ScanError", "Axis", "Point", "Scan", "load_scan", "deck_hash", "normalised_hash",
           "FORBIDDEN_KEYS",
           "RUN_COLUMNS", "METRICS", "METRIC_PATHS", "RESERVED_COLUMNS", "TEXT_METRICS"]

#: deck keys a scan sets itself and that an axis may not vary
FORBIDDEN_KEYS = {"output.folder": "the scan gives every run its own folder",
                  "output.threads": "the scan chooses numba threads per run (streamsim scan "
                                    "--threads)"}

#: The columns of scan.csv / scan.h5 besides the axes (scan.tables writes them). They live here
#: so that an axis name can be checked against them without this module importing the tables.
#: leading columns: which run, its state and where it lives
RUN_COLUMNS = ("run", "point", "replica", "status", "error", "hash", "folder", "random_seed",
               "shared_run")

#: run-level columns (not from an analysis block): (unit, meaning, summary.json path); each
#: column is named after its path like a block's (analysis.base.column_name)
_RUN_METRICS = (("cm^-3", "reference density units.density_cm3",
                 ("normalization", "density_cm3")),)
_TAIL_METRICS = (("", "maximum relative energy error", ("energy", "relative_error_max")),
                 ("s", "wall time of the run", ("wall_s",)))


def _metric_paths() -> dict[str, tuple[str, str, tuple]]:
    """Every scan column with its unit, meaning and summary.json key path: the run-level ones
    and every analysis block's ``SCAN_COLUMNS`` (a new block brings its own columns). A column
    is named after the summary.json key it holds (its path joined by dots), never by hand."""
    from ..analysis import scan_columns
    from ..analysis.base import column_name
    cols = {column_name(p): (u, m, p) for u, m, p in _RUN_METRICS}
    cols.update({c.name: (c.unit, c.meaning, c.path) for c in scan_columns()})
    cols.update({column_name(p): (u, m, p) for u, m, p in _TAIL_METRICS})
    return cols


#: column -> (unit, meaning, summary.json path)
METRIC_PATHS = _metric_paths()


def _text_metrics() -> frozenset[str]:
    from ..analysis import scan_columns
    return frozenset(c.name for c in scan_columns() if c.text)


#: the columns that hold a word (a method's name), not a number
TEXT_METRICS = _text_metrics()
#: column -> (unit, meaning); every number the summary offers that a scan is asked about
METRICS = {k: (unit, meaning) for k, (unit, meaning, _) in METRIC_PATHS.items()}

#: every column name an axis may not take
RESERVED_COLUMNS = frozenset(RUN_COLUMNS) | frozenset(METRICS) | {"error_kind"}

_TOP_KEYS = ("title", "description", "base", "set", "combine", "replicas", "run_figures", "axis")
#: scan-file keys of earlier versions -> their new names (a one-line "renamed; use ..." error)
RENAMED_SCAN_KEYS = {"mode": "combine"}
_AXIS_KEYS = ("name", "key", "keys", "scale", "values", "linspace", "logspace")
_SPACE_KEYS = ("start", "stop", "num")
MAX_POINTS = 100_000


class ScanError(InputError):
    """A scan-file problem; ``str(err)`` is the one line the CLI prints (``where = value:
    message`` as for decks, see :class:`streamsim.deck.InputError`)."""


# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Axis:
    name: str                      # column name in scan.csv / scan.h5
    keys: tuple[str, ...]          # deck keys (wildcards expanded)
    scale: tuple[float, ...]       # one factor per key (1.0 = the value itself)
    values: tuple[Any, ...]
    spacing: str = "values"        # "values" | "linspace" | "logspace"

    def overrides(self, value) -> list[str]:
        out = []
        for key, s in zip(self.keys, self.scale):
            v = value if s == 1.0 else value * s
            out.append(f"{key}={_literal(v)}")
        return out

    @property
    def numeric(self) -> bool:
        return all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in self.values)

    @property
    def log(self) -> bool:
        """Draw this axis on a log scale: logspace, or positive values spanning > 1 decade."""
        if self.spacing == "logspace":
            return True
        if not self.numeric or not self.values or min(self.values) <= 0:
            return False
        return max(self.values) / min(self.values) > 10.0


@dataclass(frozen=True)
class Point:
    """One run of the scan: a combination of axis values and a replica index."""
    run: int                       # row number, point * replicas + replica
    point: int                     # combination number
    replica: int
    indices: tuple[int, ...]       # index into each axis' values
    values: tuple[Any, ...]        # the axis values
    seed: int | None               # random_seed of the run (None if the deck is invalid)
    deck: Deck | None              # resolved deck, or None when invalid
    raw: dict                      # raw deck data after all overrides
    hash: str                      # sha256 hex of the resolved deck (or of the raw data if invalid)
    error: str | None = None       # one-line DeckError when the deck is invalid
    #: sha256 of the normalised resolved deck (without units.density_cm3): points that differ
    #: only in the reference density are one normalised simulation and share one run folder
    run_hash: str = ""

    @property
    def folder_name(self) -> str:
        return ("invalid-" if self.deck is None else "") + (self.run_hash or self.hash)[:16]


@dataclass
class Scan:
    path: Path | None
    title: str
    description: str
    base: Path | None
    base_set: tuple[str, ...]
    combine: str                   # "product" | "zip": how the axes combine
    replicas: int
    run_figures: bool
    axes: tuple[Axis, ...]
    points: list[Point] = field(default_factory=list)
    text: str = ""                 # the scan file as written
    warnings: list[str] = field(default_factory=list)


    @property
    def shape(self) -> tuple[int, ...]:
        """Number of values per axis (product) or (n,) (zip)."""
        if self.combine == "zip":
            return (len(self.axes[0].values),) if self.axes else ()
        return tuple(len(a.values) for a in self.axes)

    def to_dict(self) -> dict:
        return {"title": self.title, "description": self.description,
                "scan_file": str(self.path) if self.path else None,
                "base": str(self.base) if self.base else None, "set": list(self.base_set),
                "combine": self.combine, "replicas": self.replicas, "run_figures": self.run_figures,
                "axes": [{"name": a.name, "keys": list(a.keys), "scale": list(a.scale),
                          "values": list(a.values), "spacing": a.spacing} for a in self.axes]}


# --------------------------------------------------------------------------------------------
def _literal(value) -> str:
    """A TOML literal for an override value (numbers, strings, booleans, lists)."""
    import tomli_w
    return tomli_w.dumps({"v": value})[len("v = "):].strip()


def deck_hash(deck: Deck) -> str:
    """sha256 of the resolved deck's TOML without output.folder and output.threads (where a run
    lives and how many threads run it do not change what it computes)."""
    import tomli_w
    d = deck.to_dict()
    d["output"].pop("folder", None)
    d["output"].pop("threads", None)
    return hashlib.sha256(tomli_w.dumps(d).encode("utf-8")).hexdigest()


def normalised_hash(deck: Deck) -> str:
    """sha256 of what the run computes in normalised units: the resolved deck without
    output.folder, output.threads and units.density_cm3, and without the title.

    In this model the reference density only sets the units (t in 1/omega_p, x in c/omega_p), so
    two decks that agree here are one simulation; a key given in physical units (box.length_cm,
    a current in statA/cm^2) resolves to a different normalised value at another density and so
    changes this hash by itself."""
    import tomli_w
    d = deck.to_dict()
    d["output"].pop("folder", None)
    d["output"].pop("threads", None)
    d.get("units", {}).pop("density_cm3", None)
    d.pop("title", None)
    return hashlib.sha256(tomli_w.dumps(d).encode("utf-8")).hexdigest()


def _raw_hash(raw: dict) -> str:
    text = json.dumps(raw, sort_keys=True, default=repr)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _read(path: Path) -> tuple[dict, str]:
    return read_toml_file(path, "scan file", ScanError)


def _number(where: str, v, *, positive=False) -> float:
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
        raise ScanError(where, "must be a finite number", v)
    if positive and not v > 0:
        raise ScanError(where, "must be > 0 (logspace is evenly spaced in log)", v)
    return v


def _space(where: str, raw, log: bool) -> tuple:
    if not isinstance(raw, dict):
        raise ScanError(where, "must be a table {start = ..., stop = ..., num = ...}")
    for k in raw:
        if k not in _SPACE_KEYS:
            raise ScanError(f"{where}.{k}", did_you_mean(k, _SPACE_KEYS))
    for k in _SPACE_KEYS:
        if k not in raw:
            raise ScanError(f"{where}.{k}", "is required")
    a = _number(f"{where}.start", raw["start"], positive=log)
    b = _number(f"{where}.stop", raw["stop"], positive=log)
    n = raw["num"]
    if isinstance(n, bool) or not isinstance(n, int) or not 1 <= n <= MAX_POINTS:
        raise ScanError(f"{where}.num", f"must be an integer from 1 to {MAX_POINTS}", n)
    if n == 1:
        vals = [float(a)]
    elif log:
        la, lb = math.log(a), math.log(b)
        vals = [math.exp(la + (lb - la) * i / (n - 1)) for i in range(n)]
        vals[0], vals[-1] = float(a), float(b)
    else:
        vals = [a + (b - a) * i / (n - 1) for i in range(n)]
        vals[-1] = float(b)
    if not log and isinstance(a, int) and isinstance(b, int) and all(
            abs(v - round(v)) < 1e-9 for v in vals):
        return tuple(int(round(v)) for v in vals)   # an integer key (box.cells, ...) stays int
    # round away the last-digit noise of the arithmetic so that values print as written
    return tuple(float(f"{v:.12g}") for v in vals)


def _plain(v) -> bool:
    if isinstance(v, list):
        return all(_plain(x) for x in v)
    return isinstance(v, (bool, int, float, str))


def _check_key(where: str, key: str, base_raw: dict) -> list[str]:
    """Check one axis key against the deck schema; return it with ``species.*`` expanded."""
    if key in FORBIDDEN_KEYS:
        raise ScanError(where, f"cannot be scanned ({FORBIDDEN_KEYS[key]})", key)
    wild = key.startswith("species.*.")
    try:
        parts, _ = parse_override((key.replace("*", "X", 1) if wild else key) + "=0")
        if parts[0] == "species" and len(parts) != 3:
            raise DeckError(key, "address a species key as species.<name>.<key> "
                                 "(or species.*.<key> for every species)")
        check_key_path(parts)
    except DeckError as ex:
        raise ScanError(where, ex.message, key) from None
    if parts[0] != "species":
        return [key]
    species = [s.get("name") for s in base_raw.get("species", []) if isinstance(s, dict)]
    if wild:
        if not species:
            raise ScanError(where, "the base deck has no species", key)
        return [f"species.{n}.{parts[2]}" for n in species]
    if parts[1] not in species:
        raise ScanError(where, f"no species named '{parts[1]}' in the base deck; "
                               "species are " + ", ".join(map(str, species)), key)
    return [key]


def _axis(i: int, raw, base_raw: dict) -> Axis:
    where = f"axis[{i}]"
    if not isinstance(raw, dict):
        raise ScanError(where, "write each axis as an [[axis]] table")
    for k in raw:
        if k not in _AXIS_KEYS:
            raise ScanError(f"{where}.{k}", did_you_mean(k, _AXIS_KEYS))
    if ("key" in raw) == ("keys" in raw):
        raise ScanError(where, "give key = \"section.name\" or keys = [...], exactly one")
    if "key" in raw:
        if not isinstance(raw["key"], str):
            raise ScanError(f"{where}.key", "must be a string (in quotes)", raw['key'])
        written = [raw["key"]]
    else:
        written = raw["keys"]
        if not isinstance(written, list) or not written or not all(isinstance(k, str)
                                                                   for k in written):
            raise ScanError(f"{where}.keys", "must be a non-empty list of "
                                             "strings", written)
    scale_raw = raw.get("scale")
    if scale_raw is None:
        scale_w = [1.0] * len(written)
    else:
        if isinstance(scale_raw, (int, float)) and not isinstance(scale_raw, bool):
            scale_raw = [scale_raw]
        if not isinstance(scale_raw, list) or len(scale_raw) != len(written):
            raise ScanError(f"{where}.scale", "must be a list of "
                                              f"{len(written)} number(s), one per key", scale_raw)
        scale_w = [float(_number(f"{where}.scale[{j}]", s)) for j, s in enumerate(scale_raw)]
    keys, scale = [], []
    for j, (k, s) in enumerate(zip(written, scale_w)):
        kw = f"{where}.key" if "key" in raw else f"{where}.keys[{j}]"
        for e in _check_key(kw, k, base_raw):
            if e in keys:
                raise ScanError(kw, f"the key {e} is listed twice", k)
            keys.append(e)
            scale.append(s)
    given = [k for k in ("values", "linspace", "logspace") if k in raw]
    if len(given) != 1:
        raise ScanError(where, "give values = [...], linspace = {...} or logspace = {...}, "
                               "exactly one")
    spacing = given[0]
    if spacing == "values":
        values = raw["values"]
        if not isinstance(values, list) or not values:
            raise ScanError(f"{where}.values", "must be a non-empty list", values)
        if len(values) > MAX_POINTS:
            raise ScanError(f"{where}.values", f"more than {MAX_POINTS} values")
        values = tuple(values)
    else:
        values = _space(f"{where}.{spacing}", raw[spacing], spacing == "logspace")
    if any(s != 1.0 for s in scale):
        for j, v in enumerate(values):
            if isinstance(v, bool) or not isinstance(v, (int, float)):
                raise ScanError(f"{where}.values[{j}]", "a scaled axis needs "
                                                        "numbers", v)
    for j, v in enumerate(values):
        if not _plain(v):
            raise ScanError(f"{where}.values[{j}]", "must be a number, a string, "
                                                    "true/false or a list of those", v)
        if isinstance(v, float) and not math.isfinite(v):
            raise ScanError(f"{where}.values[{j}]", "must be finite", v)
    name = raw.get("name", written[0])
    if not isinstance(name, str) or not name.strip() or "/" in name:
        raise ScanError(f"{where}.name", "must be a non-empty string without '/'", name)
    return Axis(name=name.strip(), keys=tuple(keys), scale=tuple(scale), values=values,
                spacing=spacing)


def load_scan(source: str | Path | dict, overrides: list[str] | None = None, *,
              resolve: bool = True) -> Scan:
    """Read and validate a scan file (a path, or parsed data whose ``base`` is relative to the
    current folder) and expand it into points. ``overrides`` (``--set``) apply to the base
    after the scan file's own ``set``. Raises :class:`ScanError`."""
    if isinstance(source, dict):
        raw, text, path, here = copy.deepcopy(source), "", None, Path.cwd()
        label = "scan"
    else:
        path = Path(source)
        raw, text = _read(path)
        here = path.resolve().parent
        label = str(path)

    try:
        return _validate(raw, path, here, text, list(overrides or []), resolve)
    except ScanError as ex:
        if ex.where.startswith(label):      # already names the file (a TOML syntax error)
            raise
        raise ScanError(f"{label}: {ex.where}" if ex.where else label, ex.message,
                        ex.value) from None


def _validate(raw: dict, path, here: Path, text: str, cli_set: list[str], resolve: bool) -> Scan:
    for k in raw:
        if k in RENAMED_SCAN_KEYS:
            raise ScanError(k, f"renamed; use {RENAMED_SCAN_KEYS[k]}", raw[k])
        if k not in _TOP_KEYS:
            hint = " (axes are written [[axis]])" if k in ("axes", "axis_") else ""
            if "species" in raw or "box" in raw:
                hint = " (this looks like a deck: run it with `streamsim run`, or name it as the scan's base)"
            raise ScanError(k, did_you_mean(k, _TOP_KEYS) + hint)
    title = raw.get("title", path.stem if path else "scan")
    if not isinstance(title, str) or not title.strip():
        raise ScanError("title", "must be a non-empty string", title)
    description = raw.get("description", "")
    if not isinstance(description, str):
        raise ScanError("description", "must be a string")
    combine = raw.get("combine", "product")
    if combine not in ("product", "zip"):
        raise ScanError("combine", "must be \"product\" or \"zip\"", combine)
    replicas = raw.get("replicas", 1)
    if isinstance(replicas, bool) or not isinstance(replicas, int) or not 1 <= replicas <= 10_000:
        raise ScanError("replicas", "must be an integer from 1 to 10000", replicas)
    run_figures = raw.get("run_figures", False)
    if not isinstance(run_figures, bool):
        raise ScanError("run_figures", "must be true or false", run_figures)
    base_set = raw.get("set", [])
    if isinstance(base_set, str):
        base_set = [base_set]
    if not isinstance(base_set, list) or not all(isinstance(s, str) for s in base_set):
        raise ScanError("set", "must be a list of \"key=value\" strings, as for --set")
    # -- the base deck -----------------------------------------------------------------
    base = raw.get("base")
    base_path = None
    if base is None:
        base_raw = tomllib.loads(_deck.DEFAULT_DECK)
    else:
        if not isinstance(base, str) or not base.strip():
            raise ScanError("base", "must be a deck path (a string)", base)
        base_path = Path(base).expanduser()
        if not base_path.is_absolute():
            base_path = here / base_path
        if not base_path.is_file():
            raise ScanError("base", f"no such deck file ({base_path})", base)
        try:
            base_raw = _deck.read_toml(base_path)
        except DeckError as ex:
            raise ScanError("base", f"{ex}", base) from None
        from ..distribution_table import anchor_tables     # tables: relative to the base deck
        anchor_tables(base_raw, base_path.resolve().parent)
    for label, items in (("set", base_set), ("--set", cli_set)):
        for j, s in enumerate(items):
            try:
                base_raw = apply_overrides(base_raw, [s])
            except DeckError as ex:
                raise ScanError(f"{label}[{j}]" if label == "set" else label,
                                f"{s!r}: {ex}") from None
    # -- axes --------------------------------------------------------------------------
    axes_raw = raw.get("axis", [])
    if isinstance(axes_raw, dict):
        raise ScanError("axis", "write each axis as [[axis]] (an array of tables), not [axis]")
    if not isinstance(axes_raw, list):
        raise ScanError("axis", "must be [[axis]] tables")
    axes = tuple(_axis(i, a, base_raw) for i, a in enumerate(axes_raw))
    if not axes and replicas < 2:
        raise ScanError("axis", "a scan needs at least one [[axis]] (or replicas >= 2)")
    names = [a.name for a in axes]
    for i, n in enumerate(names):
        if n in RESERVED_COLUMNS:
            raise ScanError(f"axis[{i}].name", "is a column of scan.csv already; "
                                               "choose another name", n)
    for n in names:
        if names.count(n) > 1:
            raise ScanError("axis", f"two axes have the name {n!r}; give each a distinct name")
    seen: dict[str, int] = {}
    for i, a in enumerate(axes):
        for k in a.keys:
            if k in seen:
                raise ScanError(f"axis[{i}]", f"the key {k} is already set by axis[{seen[k]}]")
            for other in exclusive_keys(k):     # e.g. box.length and box.length_cm
                if other in seen:
                    raise ScanError(f"axis[{i}]", f"the key {k} says what {other} of "
                                                  f"axis[{seen[other]}] says; scan one of them")
            seen[k] = i
    if combine == "zip" and axes:
        lens = {len(a.values) for a in axes}
        if len(lens) > 1:
            raise ScanError("combine", "= \"zip\" walks the axes together, so they need the same "
                                    "number of values; they have " +
                            ", ".join(f"{a.name}: {len(a.values)}" for a in axes))
    n_comb = (len(axes[0].values) if combine == "zip" else math.prod(len(a.values) for a in axes)) \
        if axes else 1
    if n_comb * replicas > MAX_POINTS:
        raise ScanError("axis", f"{n_comb * replicas} runs is more than {MAX_POINTS}; split the scan")
    scan = Scan(path=path, title=title.strip(), description=description, base=base_path,
                base_set=tuple(base_set) + tuple(cli_set), combine=combine, replicas=replicas,
                run_figures=run_figures, axes=axes, text=text)
    if resolve:
        scan.points = _expand(scan, base_raw)
    return scan


def _combinations(scan: Scan):
    if not scan.axes:
        yield ()
    elif scan.combine == "zip":
        for i in range(len(scan.axes[0].values)):
            yield tuple(i for _ in scan.axes)
    else:
        yield from itertools.product(*(range(len(a.values)) for a in scan.axes))


def _expand(scan: Scan, base_raw: dict) -> list[Point]:
    default_seed = _deck.TOP["random_seed"].default
    points: list[Point] = []
    by_hash: dict[str, int] = {}
    for p, idx in enumerate(_combinations(scan)):
        values = tuple(a.values[i] for a, i in zip(scan.axes, idx))
        overrides = [o for a, v in zip(scan.axes, values) for o in a.overrides(v)]
        for r in range(scan.replicas):
            run = p * scan.replicas + r
            deck = error = seed = None
            run_hash = ""
            raw: dict = {}
            try:
                raw = apply_overrides(base_raw, overrides)
                if scan.path is not None:     # a table an axis names: relative to the scan file
                    from ..distribution_table import anchor_tables
                    anchor_tables(raw, Path(scan.path).resolve().parent)
                seed0 = raw.get("random_seed", default_seed)
                if r and isinstance(seed0, int) and not isinstance(seed0, bool):
                    raw = apply_overrides(raw, [f"random_seed={seed0 + r}"])
                deck = load_deck(raw)
                seed = deck.random_seed
                h = deck_hash(deck)
                run_hash = normalised_hash(deck)
            except DeckError as ex:
                deck, error = None, str(ex)
                h = _raw_hash({"deck": raw, "overrides": overrides, "replica": r})
            if h in by_hash:
                q = points[by_hash[h]]
                raise ScanError("axis", f"runs {q.run} and {run} resolve to the same deck "
                                        f"(values {q.values} and {values}); remove the duplicate")
            by_hash[h] = run
            points.append(Point(run=run, point=p, replica=r, indices=tuple(idx), values=values,
                                seed=seed, deck=deck, raw=raw, hash=h, error=error,
                                run_hash=run_hash))
    if points and all(pt.deck is None for pt in points):
        raise ScanError("", f"every run's deck is invalid; the first: {points[0].error}")
    if scan.replicas > 1:
        decks = [pt.deck for pt in points if pt.deck is not None]
        if decks and all(s.loading == "quiet" for d in decks for s in d.species) and not any(
                d.perturbation.phases == "random" and d.perturbation.modes for d in decks):
            scan.warnings.append(
                "replicas differ only in random_seed, and every species has loading = \"quiet\", "
                "and no perturbation has random phases, so the replicas are the same run; use "
                "loading = \"random\" (or perturbation.phases = \"random\") for error bars")
    return points
