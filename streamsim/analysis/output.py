"""Writing the analysis tables: atomic files (temporary name in the same folder, flush + fsync,
os.replace), CSV and HDF5, and JSON-safe conversion (no NaN/inf: None)."""
from __future__ import annotations

import csv
import io
import math
import os
import tempfile
from pathlib import Path

import numpy as np

__all__ = ["jsonable", "atomic_write_bytes", "atomic_write_text", "write_csv", "write_h5"]


def jsonable(obj):
    """Plain JSON data: numpy scalars/arrays to Python, NaN/inf to None, tuples to lists."""
    if isinstance(obj, dict):
        return {str(k): jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return [jsonable(v) for v in obj.tolist()]
    if isinstance(obj, (np.bool_, bool)):
        return bool(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        v = float(obj)
        return v if math.isfinite(v) else None
    if isinstance(obj, Path):
        return str(obj)
    return obj


def _tmp(path: Path):
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, name = tempfile.mkstemp(prefix="." + path.name + ".", suffix=".tmp", dir=path.parent)
    return fd, Path(name)


def atomic_write_bytes(path, data: bytes) -> Path:
    path = Path(path)
    fd, tmp = _tmp(path)
    try:
        with os.fdopen(fd, "wb") as f:
            f.write(data)
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return path


def atomic_write_text(path, text: str) -> Path:
    return atomic_write_bytes(path, text.encode("utf-8"))


def _cell(v):
    if v is None:
        return ""
    if isinstance(v, (float, np.floating)):
        v = float(v)
        return "" if not math.isfinite(v) else repr(v)
    return v


def write_csv(path, header: list[str], rows) -> Path:
    """A CSV with one header line; None/NaN cells are left empty."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    for r in rows:
        w.writerow([_cell(v) for v in r])
    return atomic_write_text(path, buf.getvalue())


def write_h5(path, tables: dict) -> Path:
    """tables: {"group/name": {"column": array, ...} or array, ...}; attributes under "@attrs"."""
    import h5py
    path = Path(path)
    fd, tmp = _tmp(path)
    os.close(fd)
    try:
        with h5py.File(tmp, "w") as h:
            h.attrs["content"] = "streamsim analysis tables (normalised units unless the column " \
                                 "name ends in _cm, _ns, _per_cm or _hz)"
            for name, table in tables.items():
                attrs = {}
                if isinstance(table, dict):
                    attrs = table.get("@attrs", {})
                    g = h.require_group(name)
                    for col, arr in table.items():
                        if col == "@attrs":
                            continue
                        a = np.asarray(arr)
                        if a.dtype.kind in "OU":
                            a = np.asarray([("" if v is None else str(v)) for v in a.ravel()],
                                           dtype=h5py.string_dtype())
                        g.create_dataset(col, data=a)
                    for ak, av in attrs.items():
                        g.attrs[ak] = "" if av is None else av
                else:
                    h.create_dataset(name, data=np.asarray(table))
            h.flush()
        fd2 = os.open(tmp, os.O_RDONLY)
        try:
            os.fsync(fd2)
        finally:
            os.close(fd2)
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return path
