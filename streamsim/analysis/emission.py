"""Emission numbers over the saturated phase: the window, averages over it, and the error budget.

After saturation the density contrast hovers on a plateau while the bunching keeps evolving, so
one instant of it (e.g. the maximum contrast) is an arbitrary point of that plateau. Emission
adds over time, so the quantity reported is the time-averaged form factor over a stated window

    <|F_s(k)|^2>_W = (1/n_W) sum_{t_i in W} |F_s(k, t_i)|^2

with its cutoff k_c, and the clump-size distribution pooled over the same records, plus the
history k_c(t), nu_c(t), size(t).

Window (:func:`saturated_window`): from t_unity (first max delta n/n >= 1, clump formation) to the
end of the run; when the contrast never reaches 1, from the end of the linear phase, taken as
the first time max delta n/n reaches half its largest value. The window is called long enough
when it spans at least ``MIN_SPAN`` x t0 and holds at least ``MIN_RECORDS`` records (a stated
criterion, common practice for a plateau average: enough independent samples for a spread);
otherwise the run says which ``time.end`` it needs.

Errors (:func:`block_jackknife`, :func:`budget`): the mode-to-mode term is the bootstrap of the
averaged spectrum's cutoff (as for one snapshot); the window term is a delete-one-block
jackknife over ``BLOCKS`` contiguous sub-windows of the records (Efron & Tibshirani 1993, An
Introduction to the Bootstrap, ch. 11; blocks keep correlated neighbouring records together,
Kuensch 1989, Ann. Statist. 17, 1217); the replica term is the scatter over replicas where a
study has them. Terms are independent and combined in quadrature.
"""
from __future__ import annotations

import math

import numpy as np

__all__ = ["saturated_window", "window_stats", "block_jackknife", "budget", "MIN_SPAN",
           "MIN_RECORDS", "BLOCKS", "gamma_at"]

#: the window must span at least this multiple of its start time t0
MIN_SPAN = 0.5
#: and hold at least this many records
MIN_RECORDS = 4
#: contiguous sub-windows of the delete-one-block jackknife
BLOCKS = 4


def saturated_window(t, cmax, t_unity: float | None, record_interval: float | None = None,
                     record_times=None) -> dict:
    """The saturated window [t0, t1] of a run from its contrast history (module docstring).

    ``t``, ``cmax``: the diagnostics times and max delta n/n (of any species); ``record_times``:
    the times of the records the window averages (for the count). Returns {"t0", "t1", "how",
    "records", "long_enough", "end_needed"} (times in 1/omega_p)."""
    t = np.asarray(t, float)
    c = np.asarray(cmax, float)
    if t.size == 0:
        return {"t0": None, "t1": None, "how": "no series", "records": 0, "long_enough": False,
                "end_needed": None}
    t1 = float(t[-1])
    if t_unity is not None and math.isfinite(t_unity):
        t0, how = float(t_unity), "from t_unity (first max delta n/n >= 1) to the end of the run"
    else:
        ok = np.isfinite(c)
        top = float(np.max(c[ok])) if ok.any() else math.nan
        i = int(np.flatnonzero(ok & (c >= 0.5 * top))[0]) if math.isfinite(top) else t.size - 1
        t0 = float(t[i])
        how = ("from the end of the linear phase (first max delta n/n >= half its largest "
               "value; the contrast never reached 1) to the end of the run")
    rt = np.asarray(record_times if record_times is not None else t, float)
    n = int(np.count_nonzero((rt >= t0 - 1e-9) & (rt <= t1 + 1e-9)))
    dt_rec = record_interval if record_interval else (float(np.median(np.diff(rt)))
                                                      if rt.size > 1 else 0.0)
    need = max(t0 * (1.0 + MIN_SPAN), t0 + (MIN_RECORDS - 1) * dt_rec)
    return {"t0": t0, "t1": t1, "how": how, "records": n,
            "long_enough": bool(t1 >= need - 1e-9 and n >= MIN_RECORDS),
            "end_needed": float(need)}


def block_jackknife(n: int, stat, blocks: int = BLOCKS) -> float | None:
    """Delete-one-block jackknife standard error of ``stat(indices)`` over ``n`` ordered records
    split into ``blocks`` contiguous blocks (fewer when n < blocks):
    se^2 = (B - 1)/B sum_b (theta_(b) - mean theta_(.))^2 (Efron & Tibshirani 1993, eq. 11.5).
    None when fewer than 2 blocks or a leave-out value is missing."""
    B = min(int(blocks), int(n))
    if B < 2:
        return None
    parts = np.array_split(np.arange(n), B)
    vals = []
    for b in range(B):
        keep = np.concatenate([p for j, p in enumerate(parts) if j != b])
        v = stat(keep)
        if v is None or not math.isfinite(v):
            return None
        vals.append(float(v))
    vals = np.array(vals)
    return float(math.sqrt((B - 1) / B * np.sum((vals - vals.mean()) ** 2)))


def window_stats(t, y, t0: float, t1: float, blocks: int = BLOCKS) -> dict:
    """Mean, spread (sample standard deviation) and the block-jackknife error of the mean of a
    series ``y(t)`` over the records with t0 <= t <= t1 (NaN entries skipped)."""
    t = np.asarray(t, float)
    y = np.asarray(y, float)
    sel = (t >= t0 - 1e-9) & (t <= t1 + 1e-9) & np.isfinite(y)
    v = y[sel]
    out = {"t0": float(t0), "t1": float(t1), "n": int(v.size), "mean": None, "spread": None,
           "err": None}
    if v.size:
        out["mean"] = float(v.mean())
    if v.size > 1:
        out["spread"] = float(np.std(v, ddof=1))
        out["err"] = block_jackknife(v.size, lambda idx: float(v[idx].mean()), blocks)
    return out


def budget(terms: dict) -> dict:
    """An error budget: the given terms (None = not available), their quadrature sum and the
    dominant term."""
    have = {k: float(v) for k, v in terms.items() if v is not None and math.isfinite(v)}
    total = math.sqrt(sum(v * v for v in have.values())) if have else None
    dom = max(have, key=have.get) if have else None
    return {"terms": {k: (float(v) if v is not None else None) for k, v in terms.items()},
            "combined": total, "dominant": dom, "combination": "quadrature sum of the terms"}


def gamma_at(data, options, times, measured=None) -> tuple[np.ndarray, dict | None, str]:
    """The bulk Lorentz factor used for nu_c at each of ``times``: (Gamma(t) per species as an
    array (n, S), or None when constant; the constant; how it was chosen). ``measured``: the
    typed :class:`streamsim.analysis.driven.BulkGamma` (``analysis.bulk_gamma = "measured"``;
    taken from the run when not given). The one place the emission analysis reads the bulk
    Gamma."""
    G = getattr(options, "bulk_gamma", 1.0)
    if G == "measured":
        if measured is None:
            from .driven import measured_bulk_gamma
            measured = measured_bulk_gamma(data)
        rows = [measured.at(float(t)) for t in times]
        arr = np.array([[r.get(n, math.nan) for n in data.names] for r in rows]) \
            if rows else np.zeros((0, len(data.names)))
        return arr, None, ("measured: the bulk Lorentz factor of the species that sets k_c, "
                           "from its mean four-velocity at each record's time")
    return None, float(G), "analysis.bulk_gamma (stated)"
