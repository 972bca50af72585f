"""The shape every analysis block shares.

A block is one module in :mod:`streamsim.analysis.blocks` with

- ``NAME``: its name (the key of its result in :attr:`Context.results`);
- ``compute(ctx: Context) -> BlockResult``;
- ``SCAN_COLUMNS``: the numbers a scan tabulates from it, as :class:`ScanColumn` (optional).

A :class:`BlockResult` carries everything that leaves the block: its summary.json entries, its
named tables (written as CSV and HDF5 by :mod:`streamsim.analysis.writers`), its figures (drawn
from the tables and the summary entries, never recomputed), its terminal lines and the typed
values a later block reads (``values``; a later block never parses an earlier one's summary). The package
loops over :data:`streamsim.analysis.registry.BLOCKS`; nothing else needs to know a block exists.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Callable

import numpy as np

from ..numbers import finite_or_none

__all__ = ["Table", "BlockResult", "Context", "ScanColumn", "Figure", "fmt", "column_name"]


@dataclass
class Table:
    """Columns of equal length; strings allowed. ``units`` maps a column to its unit.

    Written to ``analysis/<name>.csv`` and to the group ``<name>`` of ``analysis.h5``."""
    name: str
    columns: dict[str, np.ndarray]
    units: dict[str, str] = field(default_factory=dict)
    attrs: dict[str, Any] = field(default_factory=dict)

    def __post_init__(self):
        self.columns = {k: np.asarray(v) for k, v in self.columns.items()}
        n = {v.shape[0] if v.ndim else 1 for v in self.columns.values()}
        if len(n) > 1:
            raise ValueError(f"table {self.name}: columns of unequal length {sorted(n)}")

    def __len__(self) -> int:
        for v in self.columns.values():
            return int(v.shape[0])
        return 0

    def col(self, name: str) -> np.ndarray:
        return self.columns[name]

    def where(self, column: str, value) -> "Table":
        """The rows whose ``column`` equals ``value`` (e.g. one snapshot of a table)."""
        sel = self.columns[column] == value
        return Table(self.name, {k: v[sel] for k, v in self.columns.items()}, self.units,
                     self.attrs)


@dataclass
class Figure:
    """One figure file of a block: ``draw(block, data) -> matplotlib Figure``."""
    file: str
    what: str
    draw: Callable[["BlockResult", Any], Any]


@dataclass
class BlockResult:
    name: str
    summary: dict[str, Any]                 # top-level summary.json key -> JSON-able entry
    tables: dict[str, Table] = field(default_factory=dict)
    figures: list[Figure] = field(default_factory=list)
    lines: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    #: typed values a later block reads from ``ctx.results[NAME].values`` (never written to a
    #: file: what leaves the analysis is ``summary`` and ``tables``)
    values: dict[str, Any] = field(default_factory=dict)

    def table(self, name: str) -> Table | None:
        return self.tables.get(name)


def column_name(path: tuple[str, ...]) -> str:
    """The scan-table name of the summary.json entry at ``path``: its keys joined by dots
    (``("coherence", "frequency_cutoff_hz")`` -> ``coherence.frequency_cutoff_hz``), the one rule
    for every column, so a column is always named after the key it holds."""
    return ".".join(path)


@dataclass(frozen=True)
class ScanColumn:
    """A scan-table column read from summary.json: ``path`` is the key path into it and its
    name is derived from the path (:func:`column_name`). A ``text`` column holds a word (a fit's
    name), not a number."""
    path: tuple[str, ...]
    unit: str
    meaning: str
    text: bool = False

    @property
    def name(self) -> str:
        return column_name(self.path)


@dataclass
class Context:
    """What a block may read: the run's data, the analysis options and earlier blocks' results."""
    data: Any                     # streamsim.rundata.RunData
    options: Any                  # streamsim.deck.Analysis (validated by the deck module)
    max_particles: int | None = None
    results: dict[str, BlockResult] = field(default_factory=dict)

    @property
    def density_cm3(self) -> float:
        return float(self.data.deck.units.density_cm3)

    @property
    def theory(self):
        """The deck's :class:`streamsim.theory.Dispersion`, or None."""
        return self.data.theory


def at_ns(t, density_cm3: float, spec: str = ".4g") -> str:
    """A time for a terminal line in both units: "t /omega_p = t_ns ns" ('n/a' for None)."""
    from ..units import time_ns
    v = finite_or_none(t)
    if v is None:
        return "n/a"
    return f"{format(v, spec)} /omega_p = {format(time_ns(v, density_cm3), '.3g')} ns"


def rate_ns(rate, density_cm3: float) -> str:
    """The e-folding time 1/rate of a positive rate (omega_p) in ns, for a terminal line."""
    from ..units import time_ns
    v = finite_or_none(rate)
    if v is None or v <= 0:
        return "n/a"
    return f"{time_ns(1.0 / v, density_cm3):.3g} ns"


def fmt(value, spec: str = ".4g") -> str:
    """A number for a terminal line; 'n/a' for None/NaN."""
    v = finite_or_none(value)
    return "n/a" if v is None else format(v, spec)
