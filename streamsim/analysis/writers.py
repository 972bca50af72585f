"""Generic writers of the analysis blocks' tables: ``analysis/<table>.csv`` and one group per
table in ``analysis.h5`` (column datasets, units as attributes ``unit:<column>``). Every file is
written atomically."""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from ..io import jsonable
from .base import BlockResult, Table
from .output import write_csv, write_h5

__all__ = ["write_tables", "read_tables"]


def write_tables(results: dict[str, BlockResult], folder) -> list[Path]:
    folder = Path(folder)
    written = []
    h5 = {}
    for res in results.values():
        for tab in res.tables.values():
            cols = list(tab.columns)
            rows = (list(r) for r in zip(*(tab.columns[c].tolist() for c in cols)))
            written.append(write_csv(folder / "analysis" / f"{tab.name}.csv", cols, rows))
            h5[tab.name] = {**tab.columns, "@attrs": {**{f"unit:{c}": u for c, u in
                                                         tab.units.items()},
                                                      **jsonable(tab.attrs)}}
    summary = {k: v for res in results.values() for k, v in res.summary.items()}
    h5["summary"] = {"@attrs": {"json": json.dumps(jsonable(summary))}}
    written.append(write_h5(folder / "analysis.h5", h5))
    return written


def read_tables(path) -> dict[str, Table]:
    """The tables of an ``analysis.h5`` (strings come back as str arrays)."""
    import h5py
    out = {}
    with h5py.File(path, "r") as h:
        for name, g in h.items():
            if name == "summary" or not isinstance(g, h5py.Group):
                continue
            cols = {}
            for c, d in g.items():
                a = d[()]
                if a.dtype.kind in "OS":
                    a = np.array([v.decode() if isinstance(v, bytes) else str(v) for v in a],
                                 dtype=object)
                cols[c] = a
            attrs = {k: (v.decode() if isinstance(v, bytes) else v) for k, v in g.attrs.items()}
            units = {k[5:]: v for k, v in attrs.items() if k.startswith("unit:")}
            out[name] = Table(name, cols, units,
                              {k: v for k, v in attrs.items() if not k.startswith("unit:")})
    return out
