"""Driven-state analysis: the flow's mean four-velocity from the recorded series, the energy
balance of a driven run, the rate of E0 under charge starvation, and the coherence cutoff with
the measured bulk Lorentz factor (``analysis.bulk_gamma = "measured"``).

Mean four-velocity of species s at t_n, from the standard series (time-centred sums of
w m (gamma - 1) and w m u, total weight sum_j w_j = n_s L):

    <gamma>_s = 1 + kinetic_s / (m_s n_s L),    <u>_s = momentum_s / (m_s n_s L),

and the bulk Lorentz factor Gamma_s = <gamma>/sqrt(<gamma>^2 - <u>^2)
(:func:`streamsim.drive.bulk_lorentz_factor`), whose frame moves at beta = <u>/<gamma>; the
drift four-velocity of that frame is Gamma_s beta.
"""
from __future__ import annotations

import dataclasses
import math
import sys

import numpy as np

from ..drive import bulk_lorentz_factor

__all__ = ["mean_four_velocity", "bulk_gamma_at", "bulk_drift_u", "energy_balance",
           "late_rate", "is_measured", "coherence_with_measured_gamma"]


def mean_four_velocity(data) -> tuple[np.ndarray, np.ndarray]:
    """(<gamma>, <u>), each (n, S), of every species at the series times (module docstring)."""
    s, deck = data.series, data.deck
    norm = np.array([sp.mass * sp.density * data.length for sp in deck.species])
    return 1.0 + np.asarray(s.kinetic) / norm, np.asarray(s.momentum) / norm


def bulk_drift_u(mean_gamma, mean_u):
    """Drift four-velocity Gamma beta of the frame of the mean four-velocity, beta = <u>/<gamma>,
    Gamma from :func:`streamsim.drive.bulk_lorentz_factor`."""
    return bulk_lorentz_factor(mean_gamma, mean_u) * np.asarray(mean_u) / np.asarray(mean_gamma)


def bulk_gamma_at(data, t: float) -> dict[str, float]:
    """Bulk Lorentz factor of every species at time t (linear interpolation in the series)."""
    g, u = mean_four_velocity(data)
    G = np.atleast_2d(bulk_lorentz_factor(g, u))
    tt = np.asarray(data.series.t, float)
    return {n: float(np.interp(t, tt, G[:, i])) for i, n in enumerate(data.names)}


def energy_balance(series) -> tuple[np.ndarray, float | None]:
    """The residual of the energy theorem of a driven run, W(t) - W(0) - L int_0^t J_ext E0 dt
    (Poynting's theorem for the 1D electrostatic system with an imposed current: d(W_kin +
    W_field)/dt = L E0 J_ext; e.g. Jackson 1999, sec. 6.7), and its largest magnitude relative
    to the largest energy gained, max |W - W0| (None when nothing was gained)."""
    W = np.asarray(series.total_energy, float)
    gain = W - W[0]
    res = gain - np.asarray(series.drive_work, float)
    scale = float(np.max(np.abs(gain))) if gain.size else 0.0
    return res, (float(np.max(np.abs(res)) / scale) if scale > 0 else None)


def late_rate(t, y, fraction: float = 0.25) -> float | None:
    """dy/dt over the last ``fraction`` of the record, by a least-squares line (numpy.polyfit)."""
    t, y = np.asarray(t, float), np.asarray(y, float)
    n = max(3, int(round(fraction * t.size)))
    if t.size < 3:
        return None
    return float(np.polyfit(t[-n:], y[-n:], 1)[0])


# -- analysis.bulk_gamma = "measured" for the coherence block ----------------------------------
def is_measured(options) -> bool:
    return getattr(options, "bulk_gamma", None) == "measured"


def coherence_with_measured_gamma(ctx, compute):
    """The coherence block's result with nu_c = Gamma_s c k_c / 2 pi for the measured bulk
    Lorentz factor Gamma_s of each species at each snapshot's time. The block is computed with
    Gamma = 1 (nu_c is linear in Gamma) and its frequencies rescaled; the headline Gamma is that
    of the species that sets k_c at the snapshot used (the largest over the species when none
    does), and the summary says so."""
    from .base import Context
    sub = Context(data=ctx.data, options=dataclasses.replace(ctx.options, bulk_gamma=1.0),
                  max_particles=ctx.max_particles, results=ctx.results)
    res = compute(sub)
    data = ctx.data
    for head in res.summary.values():
        if not isinstance(head, dict):
            continue
        t = head.get("t")
        if t is None:
            head["bulk_gamma_source"] = "measured: no particle snapshot"
            continue
        gam = bulk_gamma_at(data, float(t))
        for name, r in (head.get("by_species") or {}).items():
            if isinstance(r, dict) and name in gam:
                r["bulk_gamma"] = gam[name]
                if r.get("frequency_cutoff_hz") is not None:
                    r["frequency_cutoff_hz"] *= gam[name]
        who = head.get("species")
        G = gam[who] if who in gam else max(gam.values())
        head["bulk_gamma"] = G
        head["bulk_gamma_measured"] = gam
        if head.get("frequency_cutoff_hz") is not None:
            head["frequency_cutoff_hz"] *= G
            head["frequency_cutoff_ghz"] = head["frequency_cutoff_hz"] / 1e9
        end = head.get("end")
        if isinstance(end, dict) and end.get("t") is not None:
            ge = bulk_gamma_at(data, float(end["t"]))
            end["bulk_gamma"] = ge.get(end.get("species"), max(ge.values()))
            if end.get("frequency_cutoff_hz") is not None:
                end["frequency_cutoff_hz"] *= end["bulk_gamma"]
        head["bulk_gamma_source"] = (
            "measured: bulk Lorentz factor of " + (f"species {who}, which sets k_c," if who in gam
                                                   else "the species with the largest one")
            + f" at t = {float(t):.4g}/omega_p (snapshot {head.get('snapshot')}), from the mean "
            f"four-velocity Gamma = <gamma>/sqrt(<gamma>^2 - <u>^2)")
    mod = sys.modules.get(getattr(compute, "__module__", ""))
    for head in res.summary.values():
        if isinstance(head, dict) and "bulk_gamma_source" in head:
            if mod is not None and hasattr(mod, "_lines"):
                res.lines = list(mod._lines(head))
            res.lines.append(f"  bulk Gamma = {head['bulk_gamma']:.4g} {head['bulk_gamma_source']}"
                             if math.isfinite(head.get("bulk_gamma", math.nan))
                             else f"  {head['bulk_gamma_source']}")
    return res
