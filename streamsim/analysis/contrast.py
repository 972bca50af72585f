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
from ..numbers import finite_or_none

__all__ = ["first_crossing", "contrast_block", "species_contrast", "exponential_phase",
           "initial_level", "t_unity_for_level", "t_unity_for_level_err", "LINEAR_TOP", "FIT_RMS", "MIN_EFOLDS",
           "NOISE_MARGIN", "UNIFORM_LEVEL", "stayed_uniform"]

#: the exponential phase is fitted below this max delta n/n (still linear: common practice)
LINEAR_TOP = 0.3
#: rms residual of ln(max delta n/n) about the fitted line that counts as exponential
FIT_RMS = 0.15
#: the fitted phase must span at least this many e-folds
MIN_EFOLDS = 1.5
#: a seed whose max delta n/n is this far below the loading's own level before the growth
#: is "below the noise" (common practice)
NOISE_MARGIN = 3.0
#: a run whose max delta n/n never exceeds this stayed uniform: float64 round-off of a density
#: is ~1e-16, any seed or particle noise is orders of magnitude above (common practice)
UNIFORM_LEVEL = 1e-10


def stayed_uniform(max_contrast) -> bool:
    """True when the largest delta n/n of the run is at round-off level (:data:`UNIFORM_LEVEL`):
    an unseeded, noise-free plasma (a continuum run with no perturbation) has no structure, so
    it has no clumps and no coherence cutoff to report."""
    return max_contrast is not None and bool(np.isfinite(max_contrast)) \
        and float(max_contrast) <= UNIFORM_LEVEL


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


def exponential_phase(t, y, top: float = LINEAR_TOP, rms: float = FIT_RMS,
                      min_efolds: float = MIN_EFOLDS) -> dict | None:
    """The exponential growth of y(t) (max delta n/n) before it first reaches ``top``:
    least-squares line ln y = a + rate t over [t0, t1], t1 the last sample below ``top``, t0 the
    earliest sample from which the residual rms stays <= ``rms`` and the line spans at least
    ``min_efolds`` (the loading's transient and phase mixing come before t0).

    Returns {"rate", "t0", "t1", "level_t0" (the line at t0), "intercept", "rms"} or None."""
    t = np.asarray(t, float)
    y = np.asarray(y, float)
    ok = np.isfinite(y) & (y > 0)
    hit = np.flatnonzero(ok & (y >= top))
    i1 = int(hit[0]) - 1 if hit.size else t.size - 1
    if i1 < 3:
        return None
    tt, ly = t[:i1 + 1], np.where(ok[:i1 + 1], np.log(np.where(ok[:i1 + 1], y[:i1 + 1], 1.0)),
                                  np.nan)
    good = np.isfinite(ly)
    for i0 in range(0, i1 - 2):
        sel = good[i0:]
        x, z = tt[i0:][sel], ly[i0:][sel]
        if x.size < 4:
            break
        A = np.vstack([np.ones_like(x), x]).T
        coef, *_ = np.linalg.lstsq(A, z, rcond=None)
        res = z - A @ coef
        r = float(np.sqrt(np.mean(res * res)))
        if coef[1] > 0 and coef[1] * (x[-1] - x[0]) >= min_efolds and r <= rms:
            return {"rate": float(coef[1]), "t0": float(x[0]), "t1": float(x[-1]),
                    "intercept": float(coef[0]),
                    "level_t0": float(math.exp(coef[0] + coef[1] * x[0])), "rms": r}
    return None


def initial_level(t, cmax) -> dict | None:
    """The level the growth started from: the fitted exponential phase of max delta n/n
    (:func:`exponential_phase`) at its start t0, once the loading has phase-mixed."""
    return exponential_phase(t, cmax)


def t_unity_for_level(t_unity: float, level0: float, rate: float, level: float) -> float:
    """Formation time from a starting level: t_unity + ln(level0 / level) / rate, i.e. the
    measured formation time moved along the measured exponential growth e^{rate t} from the
    measured starting level level0 to ``level`` (assumes the same linear growth below level0
    and the same nonlinear phase above it)."""
    return float(t_unity + math.log(level0 / level) / rate)


def t_unity_for_level_err(t_unity: float, level0: float, rate: float, level: float,
                          rate_err: float | None, ln_level0_err: float | None):
    """(t_L, its error) with t_L = t_unity + ln(level0 / level) / rate (:func:`t_unity_for_level`)
    and first-order error propagation (e.g. Taylor 1997, An Introduction to Error Analysis,
    ch. 3): sigma^2 = (ln(level0/level) sigma_rate / rate^2)^2 + (sigma_ln level0 / rate)^2.
    The error is None without a rate error."""
    tl = t_unity_for_level(t_unity, level0, rate, level)
    if rate_err is None:
        return tl, None
    a = math.log(level0 / level) * rate_err / rate ** 2
    b = (ln_level0_err or 0.0) / rate
    return tl, float(math.hypot(a, b))


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
        "rms_max": finite_or_none(np.nanmax(crms)) if np.isfinite(crms).any() else None,
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
