"""Density contrast delta n/n = n_s(x)/<n_s> - 1 on the grid, per species and for the pair total.

The run records, at every diagnostic time, the maximum and the rms over the grid of delta n/n
(one column per species, a last column for the total of all species).  From these:

- ``max`` and ``t_max``: the largest max delta n/n of the run and when;
- ``saturation``: the median of max delta n/n from t_max to the end (the level it saturates at);
  ``saturated`` is False when the maximum falls in the last 5 % of the run (still growing);
- ``t_unity``: the first time max delta n/n >= 1, "clump formation" (the project's
  convention: a species' density has doubled somewhere), linearly interpolated between the two
  diagnostic samples that bracket the crossing; None if it never happens.
"""
from __future__ import annotations

import math

import numpy as np

from .. import units

__all__ = ["first_crossing", "contrast_block", "species_contrast"]


def first_crossing(t, y, level: float = 1.0) -> float | None:
    """First t where y(t) >= level, linearly interpolated between the bracketing samples."""
    t = np.asarray(t, float)
    y = np.asarray(y, float)
    hit = np.flatnonzero(np.isfinite(y) & (y >= level))
    if hit.size == 0:
        return None
    i = int(hit[0])
    if i == 0 or not np.isfinite(y[i - 1]) or y[i] == y[i - 1]:
        return float(t[i])
    f = (level - y[i - 1]) / (y[i] - y[i - 1])
    return float(t[i - 1] + f * (t[i] - t[i - 1]))


def _finite(v):
    return float(v) if v is not None and math.isfinite(v) else None


def species_contrast(t, cmax, crms, density_cm3: float) -> dict:
    """Contrast summary of one column (one species or the total)."""
    t = np.asarray(t, float)
    cmax = np.asarray(cmax, float)
    crms = np.asarray(crms, float)
    ok = np.isfinite(cmax)
    if not ok.any():
        return {"max": None, "t_max": None, "rms_max": None, "saturation": None,
                "saturated": False, "t_unity": None, "t_unity_ns": None}
    i = int(np.nanargmax(np.where(ok, cmax, -np.inf)))
    sat = float(np.nanmedian(cmax[i:]))
    t_u = first_crossing(t, cmax, 1.0)
    return {
        "max": float(cmax[i]), "t_max": float(t[i]),
        "t_max_ns": units.time_ns(float(t[i]), density_cm3),
        "rms_max": _finite(float(np.nanmax(crms))) if np.isfinite(crms).any() else None,
        "saturation": sat,
        "saturated": bool(i < 0.95 * (t.size - 1)),
        "t_unity": t_u,
        "t_unity_ns": units.time_ns(t_u, density_cm3) if t_u is not None else None,
    }


def contrast_block(series, names: list[str], density_cm3: float) -> dict:
    """The summary "contrast" block: the clumping of any single species (the largest max delta
    n/n over species), with per-species and pair-total details under "by_species"."""
    t = np.asarray(series.t, float)
    cmax = np.asarray(series.contrast_max, float)
    crms = np.asarray(series.contrast_rms, float)
    S = len(names)
    by = {}
    for s, name in enumerate(names):
        by[name] = species_contrast(t, cmax[:, s], crms[:, s], density_cm3)
    by["total"] = species_contrast(t, cmax[:, S], crms[:, S], density_cm3) \
        if cmax.shape[1] > S else None
    any_max = np.nanmax(cmax[:, :S], axis=1) if S else np.full(t.size, np.nan)
    any_rms = np.nanmax(crms[:, :S], axis=1) if S else np.full(t.size, np.nan)
    top = species_contrast(t, any_max, any_rms, density_cm3)
    top["species"] = None
    if top["max"] is not None:
        top["species"] = names[int(np.nanargmax(cmax[np.argmin(np.abs(t - top["t_max"])), :S]))]
    top["by_species"] = by
    return top
