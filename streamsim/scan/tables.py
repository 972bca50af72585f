"""The scan's tables: one row per run, assembled from the run folders (never from messages of
the workers, so a retried or resumed run cannot appear twice or go missing).

scan.csv and scan.h5 hold the same columns (:data:`METRICS` after the run and axis columns);
both are rewritten atomically while the scan goes on, so an interrupted scan keeps its rows.
"""
from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import numpy as np

from ..numbers import finite_or_none
from .spec import METRIC_PATHS as _PATHS
from .spec import METRICS, RUN_COLUMNS, TEXT_METRICS, Scan
from .worker import ERROR_FILE, _read_json, read_state

__all__ = ["METRICS", "RUN_COLUMNS", "collect_rows", "write_tables", "run_folder"]


#: the column of the reference density (summary.json normalization.density_cm3)
DENSITY = "normalization.density_cm3"


def run_folder(out: Path, point) -> Path:
    return Path(out) / "runs" / point.folder_name


def _get(d: Any, *path):
    for p in path:
        if not isinstance(d, dict):
            return None
        d = d.get(p)
    return d


def _number(v):
    """A number for a metric column: a flag (true/false) as 1.0/0.0, else finite or None."""
    return float(v) if isinstance(v, bool) else finite_or_none(v)


def metrics_from_summary(s: dict) -> dict:
    """The METRICS of one summary.json (missing or null entries give None)."""
    out = {k: _number(_get(s, *path)) for k, (_, _, path) in _PATHS.items()
           if k not in TEXT_METRICS}
    for k in TEXT_METRICS:
        v = _get(s, *_PATHS[k][2])
        out[k] = v if isinstance(v, str) else None
    mode = _get(s, "growth", "mode")
    out["growth.mode"] = int(mode) if isinstance(mode, int) and not isinstance(mode, bool) \
        else None
    return out


#: how a column in a physical unit scales with the reference density at fixed normalised
#: values: times and lengths as n^-1/2 (1/omega_p, c/omega_p), frequencies and wavenumbers as
#: n^+1/2 (omega_p = (4 pi n e^2 / m_e)^1/2)
_DENSITY_POWER = {"ns": -0.5, "cm": -0.5, "Hz": 0.5, "1/cm": 0.5}


def at_density(metrics: dict, n_run: float | None, n_row: float | None) -> dict:
    """The metrics of a run made at reference density ``n_run``, expressed at ``n_row``: every
    column in ns or cm scales as (n_run/n_row)^1/2, every one in Hz or 1/cm as (n_row/n_run)^1/2;
    normalised columns are unchanged."""
    if not n_run or not n_row or n_run == n_row:
        return metrics
    out = dict(metrics)
    for k, v in metrics.items():
        p = _DENSITY_POWER.get(METRICS.get(k, ("",))[0])
        if p is not None and v is not None:
            out[k] = v * (n_row / n_run) ** p
    out[DENSITY] = n_row
    return out


def collect_rows(scan: Scan, out: Path) -> list[dict]:
    """One row per point of the scan, in run order, read from the run folders. Points that
    differ only in the reference density share one run (``shared_run``: the number of rows that
    share it); their physical-unit columns are converted to each row's density."""
    from collections import Counter
    sharing = Counter(p.folder_name for p in scan.points)
    rows = []
    for p in scan.points:
        folder = run_folder(out, p)
        state, point = read_state(folder)
        row = {"run": p.run, "point": p.point, "replica": p.replica, "status": state,
               "error": None, "hash": p.hash, "folder": str(Path("runs") / p.folder_name),
               "random_seed": p.seed, "shared_run": sharing[p.folder_name]}
        for a, v, i in zip(scan.axes, p.values, p.indices):
            row[a.name] = v
            row[f"{a.name}#index"] = i
        row.update({k: None for k in METRICS})
        if state == "failed":
            err = _read_json(folder / ERROR_FILE) or point or {}
            row["error"] = err.get("error") or (point or {}).get("error")
            row["error_kind"] = err.get("kind") or (point or {}).get("kind")
        if state in ("completed", "failed"):
            s = _read_json(folder / "summary.json")
            if s is not None:
                n_row = p.deck.units.density_cm3 if p.deck is not None else None
                m = metrics_from_summary(s)
                row.update(at_density(m, m.get(DENSITY), n_row))
                if state == "completed" and s.get("analysis_error"):
                    row["error"] = f"analysis: {s['analysis_error']}"
        if row[DENSITY] is None and p.deck is not None:
            row[DENSITY] = p.deck.units.density_cm3
        rows.append(row)
    return rows


def columns(scan: Scan) -> list[str]:
    axis_cols = []
    for a in scan.axes:
        axis_cols += [a.name]
    return list(RUN_COLUMNS) + axis_cols + list(METRICS) + ["error_kind"]


def write_tables(scan: Scan, out: Path, rows: list[dict]) -> tuple[Path, Path]:
    """Write scan.csv and scan.h5 atomically; returns their paths."""
    from .. import io
    out = Path(out)
    cols = columns(scan)
    csv_path = io.write_csv(out / "scan.csv", cols, ([r.get(c) for c in cols] for r in rows))
    h5_path = out / "scan.h5"
    _write_h5(scan, h5_path, rows, cols)
    return csv_path, h5_path


def _column_array(values: list):
    import h5py
    nums = [v for v in values if v is not None]
    if all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in nums):
        return np.array([np.nan if v is None else float(v) for v in values], dtype=np.float64)
    if all(isinstance(v, bool) for v in nums):
        return np.array([bool(v) for v in values])
    text = ["" if v is None else (json.dumps(v) if isinstance(v, (list, dict)) else str(v))
            for v in values]
    return np.array(text, dtype=h5py.string_dtype("utf-8"))


def _write_h5(scan: Scan, path: Path, rows: list[dict], cols: list[str]) -> None:
    from .. import __version__, io
    with io.atomic_h5(path) as f:
        f.attrs["content"] = ("streamsim scan: /runs one entry per run (columns as in scan.csv); "
                              "/axes the scanned values; /grid the metrics on the axis grid "
                              "(product scans), shape (axis lengths..., replicas)")
        f.attrs["title"] = scan.title
        f.attrs["combine"] = scan.combine
        f.attrs["replicas"] = scan.replicas
        f.attrs["streamsim_version"] = __version__
        f.attrs["scan"] = json.dumps(scan.to_dict(), default=str)
        if scan.text:
            f.attrs["scan_file"] = scan.text
        g = f.create_group("runs")
        for c in cols:
            d = g.create_dataset(c, data=_column_array([r.get(c) for r in rows]))
            if c in METRICS:
                d.attrs["unit"] = METRICS[c][0]
                d.attrs["meaning"] = METRICS[c][1]
        ax = f.create_group("axes")
        for i, a in enumerate(scan.axes):
            d = ax.create_dataset(a.name, data=_column_array(list(a.values)))
            d.attrs["keys"] = json.dumps(list(a.keys))
            d.attrs["scale"] = np.array(a.scale, dtype=np.float64)
            d.attrs["spacing"] = a.spacing
            d.attrs["order"] = i
        if scan.combine == "product" and scan.axes:
            shape = scan.shape + (scan.replicas,)
            grid = f.create_group("grid")
            grid.attrs["dims"] = json.dumps([a.name for a in scan.axes] + ["replica"])
            for c in list(METRICS) + ["status"]:
                text = c == "status" or c in TEXT_METRICS
                if text:
                    arr = np.full(shape, "", dtype=object)
                else:
                    arr = np.full(shape, np.nan)
                for r in rows:
                    idx = tuple(r[f"{a.name}#index"] for a in scan.axes) + (r["replica"],)
                    v = r.get(c)
                    if c == "status":
                        arr[idx] = v
                    elif v is not None:
                        arr[idx] = v
                if text:
                    import h5py
                    d = grid.create_dataset(c, data=arr.astype(str).astype(object),
                                            dtype=h5py.string_dtype("utf-8"))
                else:
                    d = grid.create_dataset(c, data=arr)
                if c in METRICS:
                    d.attrs["unit"] = METRICS[c][0]
