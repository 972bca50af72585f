"""Small number helpers shared by every room (a leaf module: it imports only the standard library
and numpy)."""
from __future__ import annotations

import math

__all__ = ["finite_or_none"]


def finite_or_none(value) -> float | None:
    """``float(value)`` when it is a finite number, else None (None, NaN, inf, non-numbers).

    The one cleaner for values that go into summary.json, tables and terminal lines, where a
    missing or non-finite number is written as null / an empty cell / "n/a"."""
    if value is None or isinstance(value, bool):
        return None
    try:
        v = float(value)
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None
