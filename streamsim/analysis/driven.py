"""Driven-state analysis: the flow's mean four-velocity from the recorded series, the energy
balance of a driven run, the rate of E0 under charge starvation, and the measured bulk Lorentz
factor (:class:`BulkGamma`) that the coherence block takes as its Gamma when
``analysis.bulk_gamma = "measured"``.

Mean four-velocity of species s at t_n, from the standard series (time-centred sums of
w m (gamma - 1) and w m u, total weight sum_j w_j = n_s L):

    <gamma>_s = 1 + kinetic_s / (m_s n_s L),    <u>_s = momentum_s / (m_s n_s L),

and the bulk Lorentz factor Gamma_s = <gamma>/sqrt(<gamma>^2 - <u>^2)
(:func:`streamsim.drive.bulk_lorentz_factor`), whose frame moves at beta = <u>/<gamma>; the
drift four-velocity of that frame is Gamma_s beta.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..drive import bulk_lorentz_factor

__all__ = ["mean_four_velocity", "bulk_drift_u", "energy_balance",
           "late_rate", "is_measured", "BulkGamma", "measured_bulk_gamma"]


def mean_four_velocity(data) -> tuple[np.ndarray, np.ndarray]:
    """(<gamma>, <u>), each (n, S), of every species at the series times (module docstring)."""
    s, deck = data.series, data.deck
    norm = np.array([sp.mass * sp.density * data.length for sp in deck.species])
    return 1.0 + np.asarray(s.kinetic) / norm, np.asarray(s.momentum) / norm


def bulk_drift_u(mean_gamma, mean_u):
    """Drift four-velocity Gamma beta of the frame of the mean four-velocity, beta = <u>/<gamma>,
    Gamma from :func:`streamsim.drive.bulk_lorentz_factor`."""
    return bulk_lorentz_factor(mean_gamma, mean_u) * np.asarray(mean_u) / np.asarray(mean_gamma)


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


# -- analysis.bulk_gamma = "measured": a typed input of the coherence block ---------------------
def is_measured(options) -> bool:
    return getattr(options, "bulk_gamma", None) == "measured"


@dataclass(frozen=True)
class BulkGamma:
    """The measured bulk Lorentz factor Gamma_s(t) of every species over the run (from the mean
    four-velocity, module docstring), for nu_c = Gamma c k_c / 2 pi of the coherence block."""
    t: np.ndarray               # (n,) the series times, 1/omega_p
    names: tuple[str, ...]
    gamma: np.ndarray           # (n, S)

    def at(self, t: float) -> dict[str, float]:
        """Gamma of every species at time t (linear interpolation in the series)."""
        return {n: float(np.interp(t, self.t, self.gamma[:, i]))
                for i, n in enumerate(self.names)}

    @staticmethod
    def source(who: str | None, t: float, snapshot: str | None) -> str:
        """What the headline Gamma is, for the summary (``bulk_gamma_source``)."""
        return ("measured: bulk Lorentz factor of "
                + (f"species {who}, which sets k_c," if who is not None
                   else "the species with the largest one")
                + f" at t = {float(t):.4g}/omega_p (snapshot {snapshot}), from the mean "
                "four-velocity Gamma = <gamma>/sqrt(<gamma>^2 - <u>^2)")


def measured_bulk_gamma(data) -> BulkGamma:
    """The :class:`BulkGamma` of a run's recorded series."""
    g, u = mean_four_velocity(data)
    return BulkGamma(t=np.asarray(data.series.t, float), names=tuple(data.names),
                     gamma=np.atleast_2d(bulk_lorentz_factor(g, u)))
