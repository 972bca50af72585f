"""The scan's tables: one row per run, assembled from the run folders (never from messages of
the workers, so a retried or resumed run cannot appear twice or go missing).

scan.csv and scan.h5 hold the same columns (:data:`METRICS` after the run and axis columns);
both are rewritten atomically while the scan goes on, so an interrupted scan keeps its rows.
"""
from __future__ import annotations

import csv
import io as _io
import json
import math
from pathlib import Path
from typing import Any

import numpy as np

from .. import units
from .spec import Scan
from .worker import ERROR_FILE, _read_json, read_state

__all__ = ["METRICS", "RUN_COLUMNS", "collect_rows", "write_tables", "run_folder"]

#: leading columns: which run, its state and where it lives
RUN_COLUMNS = ("run", "point", "replica", "status", "error", "hash", "folder", "random_seed")

#: column -> (unit, meaning); every number the summary offers that a scan is asked about
METRICS = {
    "density_cm3": ("cm^-3", "reference density units.density_cm3"),
    "growth_mode": ("", "box mode of the headline growth fit (largest theoretical growth)"),
    "growth_k": ("omega_p/c", "its wavenumber"),
    "growth_measured": ("omega_p", "measured field-amplitude growth rate"),
    "growth_measured_err": ("omega_p", "1-sigma error of the fit"),
    "growth_theory": ("omega_p", "linear theory for the same box mode"),
    "growth_ratio": ("", "measured / theory"),
    "growth_time_ns": ("ns", "measured e-folding time 1/growth_measured"),
    "growth_time_err_ns": ("ns", "its 1-sigma error from the fit"),
    "theory_growth_time_ns": ("ns", "theory e-folding time of the same box mode"),
    "theory_fastest_growth": ("omega_p", "theory growth rate of the fastest mode (any k)"),
    "theory_fastest_growth_time_ns": ("ns", "its e-folding time"),
    "t_unity_ns": ("ns", "first time max delta n/n reaches 1 (clump formation)"),
    "contrast_max": ("", "maximum delta n/n over the run"),
    "clump_count": ("", "clumps at the analysed snapshot"),
    "clump_size_median_cm": ("cm", "median clump size"),
    "nu_c_hz": ("Hz", "coherence cutoff frequency nu_c (see summary.json coherence)"),
    "bulk_gamma": ("", "bulk Lorentz factor assumed for nu_c"),
    "energy_error_max": ("", "maximum relative energy error"),
    "wall_s": ("s", "wall time of the run"),
}


def run_folder(out: Path, point) -> Path:
    return Path(out) / "runs" / point.folder_name


def _get(d: Any, *path):
    for p in path:
        if not isinstance(d, dict):
            return None
        d = d.get(p)
    return d


def _num(v) -> float | None:
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        return None
    v = float(v)
    return v if math.isfinite(v) else None


def metrics_from_summary(s: dict) -> dict:
    """The METRICS of one summary.json (missing or null blocks give None)."""
    n = _num(_get(s, "normalization", "density_cm3"))
    g = _get(s, "growth") or {}
    meas, err, th = _num(g.get("measured")), _num(g.get("measured_err")), _num(g.get("theory"))
    ok_fit = meas is not None and meas > 0 and n is not None
    tau = units.growth_time_ns(meas, n) if ok_fit else None
    tau_err = tau * err / meas if (ok_fit and err is not None) else None
    fast = _num(_get(s, "theory", "fastest", "growth"))
    fast_ns = _num(_get(s, "theory", "fastest", "growth_time_ns"))
    if fast_ns is None and fast is not None and fast > 0 and n is not None:
        fast_ns = units.growth_time_ns(fast, n)
    t_unity_ns = _num(_get(s, "contrast", "t_unity_ns"))
    t_unity = _num(_get(s, "contrast", "t_unity"))
    if t_unity_ns is None and t_unity is not None and n is not None:
        t_unity_ns = units.time_ns(t_unity, n)
    mode = _get(g, "mode")
    return {
        "density_cm3": n,
        "growth_mode": int(mode) if isinstance(mode, int) and not isinstance(mode, bool) else None,
        "growth_k": _num(g.get("k")),
        "growth_measured": meas, "growth_measured_err": err, "growth_theory": th,
        "growth_ratio": _num(g.get("ratio")),
        "growth_time_ns": _num(tau), "growth_time_err_ns": _num(tau_err),
        "theory_growth_time_ns": _num(units.growth_time_ns(th, n))
        if (th is not None and th > 0 and n is not None) else None,
        "theory_fastest_growth": fast, "theory_fastest_growth_time_ns": fast_ns,
        "t_unity_ns": t_unity_ns,
        "contrast_max": _num(_get(s, "contrast", "max")),
        "clump_count": _num(_get(s, "clumps", "count")),
        "clump_size_median_cm": _num(_get(s, "clumps", "size_median_cm")),
        "nu_c_hz": _num(_get(s, "coherence", "frequency_cutoff_hz")),
        "bulk_gamma": _num(_get(s, "coherence", "bulk_gamma")),
        "energy_error_max": _num(_get(s, "energy", "relative_error_max")),
        "wall_s": _num(s.get("wall_s")),
    }


def collect_rows(scan: Scan, out: Path) -> list[dict]:
    """One row per run of the scan, in run order, read from the run folders."""
    rows = []
    for p in scan.points:
        folder = run_folder(out, p)
        state, point = read_state(folder)
        row = {"run": p.run, "point": p.point, "replica": p.replica, "status": state,
               "error": None, "hash": p.hash, "folder": str(Path("runs") / p.folder_name),
               "random_seed": p.seed}
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
                row.update(metrics_from_summary(s))
                if state == "completed" and s.get("analysis_error"):
                    row["error"] = f"analysis: {s['analysis_error']}"
        if row["density_cm3"] is None and p.deck is not None:
            row["density_cm3"] = p.deck.units.density_cm3
        rows.append(row)
    return rows


def columns(scan: Scan) -> list[str]:
    axis_cols = []
    for a in scan.axes:
        axis_cols += [a.name]
    return list(RUN_COLUMNS) + axis_cols + list(METRICS) + ["error_kind"]


def _cell(v):
    if v is None:
        return ""
    if isinstance(v, float):
        return repr(v) if math.isfinite(v) else ""
    if isinstance(v, (list, dict)):
        return json.dumps(v)
    return v


def write_tables(scan: Scan, out: Path, rows: list[dict]) -> tuple[Path, Path]:
    """Write scan.csv and scan.h5 atomically; returns their paths."""
    from .. import io
    out = Path(out)
    cols = columns(scan)
    buf = _io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(cols)
    for r in rows:
        w.writerow([_cell(r.get(c)) for c in cols])
    csv_path = out / "scan.csv"
    io.write_text(csv_path, buf.getvalue())
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
        f.attrs["mode"] = scan.mode
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
        if scan.mode == "product" and scan.axes:
            shape = scan.shape + (scan.replicas,)
            grid = f.create_group("grid")
            grid.attrs["dims"] = json.dumps([a.name for a in scan.axes] + ["replica"])
            for c in list(METRICS) + ["status"]:
                if c == "status":
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
                if c == "status":
                    import h5py
                    grid.create_dataset(c, data=arr.astype(str).astype(object),
                                        dtype=h5py.string_dtype("utf-8"))
                else:
                    d = grid.create_dataset(c, data=arr)
                    d.attrs["unit"] = METRICS[c][0]
