"""Writing the analysis tables: atomic files (temporary name in the same folder, flush + fsync,
os.replace), CSV and HDF5, and JSON-safe conversion (no NaN/inf: None)."""
from __future__ import annotations

from pathlib import Path

import numpy as np

from ..io import jsonable  # noqa: E402,F401 - re-exported: one JSON cleaner for the package

__all__ = ["jsonable", "atomic_write_bytes", "atomic_write_text", "write_csv", "write_h5"]


def atomic_write_bytes(path, data: bytes) -> Path:
    """Write bytes atomically (:func:`streamsim.io.atomic_path`); OSError -> io.OutputError."""
    from ..io import atomic_path
    path = Path(path)
    with atomic_path(path) as tmp:
        with open(tmp, "wb") as fh:
            fh.write(data)
            fh.flush()
    return path


def atomic_write_text(path, text: str) -> Path:
    return atomic_write_bytes(path, text.encode("utf-8"))


def write_csv(path, header: list[str], rows) -> Path:
    """A CSV with one header line; None/NaN cells are left empty (:func:`streamsim.io.write_csv`)."""
    from ..io import write_csv as _write
    return _write(path, header, rows)


def write_h5(path, tables: dict) -> Path:
    """tables: {"group/name": {"column": array, ...} or array, ...}; attributes under "@attrs"."""
    import h5py

    from ..io import atomic_h5
    path = Path(path)
    with atomic_h5(path) as h:
        h.attrs["content"] = "streamsim analysis tables (normalised units unless the column " \
                             "name ends in _cm, _ns, _per_cm or _hz)"
        for name, table in tables.items():
            if isinstance(table, dict):
                g = h.require_group(name)
                for col, arr in table.items():
                    if col == "@attrs":
                        continue
                    a = np.asarray(arr)
                    if a.dtype.kind in "OU":
                        a = np.asarray([("" if v is None else str(v)) for v in a.ravel()],
                                       dtype=h5py.string_dtype())
                    g.create_dataset(col, data=a)
                for ak, av in table.get("@attrs", {}).items():
                    g.attrs[ak] = "" if av is None else av
            else:
                h.create_dataset(name, data=np.asarray(table))
    return path
