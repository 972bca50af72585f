"""Coherence: the form factor of each species from the macro-particle positions.

    F_s(k) = sum_j w_j e^{i k x_j} / sum_j w_j,        |F_s(k)|^2 in [0, 1]

evaluated at the box wavenumbers k_m = 2 pi m / L, m = 1..M, with M = ``kmax_factor`` x cells/2
(the grid Nyquist k = pi/dx times ``kmax_factor``, deck ``analysis.coherence_kmax_factor``, default
4): positions resolve clump structure far below the cell size.

Fast evaluation: the type-1 non-uniform FFT with Gaussian gridding (Dutt & Rokhlin 1993, SIAM J.
Sci. Comput. 14, 1368; Greengard & Lee 2004, SIAM Review 46, 443): each particle is spread onto an
oversampled periodic grid with a Gaussian, the grid is FFT'd and the Gaussian's Fourier series
divided out.  Cost ~ N x 2 x SPREAD + M log M instead of N x M; error ~ 1e-10 of sum w (checked
against the direct sum in the tests).

Shot-noise floor: N equal-weight macro-particles at random positions give <|F|^2> = 1/N
(e.g. Goodman, Statistical Optics, 1985, for a random phasor sum), and |F|^2 of pure noise is
exponentially distributed about it.  Quiet-start (evenly spaced) positions lie far below 1/N
until phase mixing; ``noise_floor`` is reported as 1/N all the same (1/N_used if subsampled).

Coherence cutoff (a criterion, not a law): with P(k) = |F(k)|^2 and P_pk its largest value over
m >= 1, k_c is the largest k at which P(k) >= q P_pk, q = ``coherence_drop`` (deck
``analysis.coherence_drop``, default 0.5), i.e. above k_c the spectrum never again reaches q of its
peak (harmonics of a periodic clump train count).  A cutoff is reported only if q P_pk >=
NOISE_SAFETY x floor: exponential noise exceeds 20/N with probability e^-20 ~ 2e-9 per mode, so
shot noise cannot fake it; otherwise "no cutoff above the noise floor".  If P(k) still exceeds
q P_pk at the largest computed k, k_c is only a lower bound (flagged).

Emission cutoff frequency: particles on the same trajectory, shifted in time, emitting along their
motion, radiate coherently at wavelengths longer than 2 pi / k_c; with the simulation frame moving
toward the observer with bulk Lorentz factor Gamma, lengths seen by the observer contract by Gamma
(assumption: bulk flow along the line of sight), so nu_c = Gamma c k_c / (2 pi).
"""
from __future__ import annotations

import math

import numba
import numpy as np

from .. import units

__all__ = ["form_factor", "coherence_cutoff", "emission_cutoff_hz",
           "species_coherence", "NOISE_SAFETY", "ASSUMPTION"]

#: the crossing level q P_pk must exceed the shot-noise floor 1/N by this factor
NOISE_SAFETY = 20.0
#: Gaussian spreading half-width in oversampled grid points (error ~ e^{-2.2 SPREAD})
SPREAD = 12
ASSUMPTION = ("nu_c = Gamma c k_c / 2 pi: particles on the same trajectory, shifted in time, "
              "emitting along their motion; the simulation frame moves toward the observer with "
              "bulk Lorentz factor Gamma along the line of sight (lengths contract by Gamma)")


@numba.njit(parallel=True, cache=True)
def _spread(theta, w, mr, h, tau, sp, nchunks):
    """Spread weights w at angles theta in [0, 2 pi) onto mr periodic nodes with the Gaussian
    exp(-(xi - theta)^2 / (4 tau)), |xi - theta| <= sp h (fast Gaussian gridding)."""
    n = theta.size
    grids = np.zeros((nchunks, mr))
    e3 = np.empty(sp + 1)
    for j in range(sp + 1):
        e3[j] = math.exp(-(j * h) ** 2 / (4.0 * tau))
    per = (n + nchunks - 1) // nchunks
    for c in numba.prange(nchunks):
        g = grids[c]
        lo = c * per
        hi = min(n, lo + per)
        for p in range(lo, hi):
            l0 = int(theta[p] / h)
            d = theta[p] - l0 * h
            e1 = w[p] * math.exp(-d * d / (4.0 * tau))
            e2 = math.exp(d * h / (2.0 * tau))
            # right side j = 0..sp, left side j = 1..sp-1 (2 sp nodes in all)
            v = e1
            for j in range(sp + 1):
                g[(l0 + j) % mr] += v * e3[j]
                v *= e2
            inv = 1.0 / e2
            v = e1 * inv
            for j in range(1, sp):
                g[(l0 - j) % mr] += v * e3[j]
                v *= inv
    out = np.zeros(mr)
    for c in range(nchunks):
        out += grids[c]
    return out


def form_factor(x, length: float, modes: int, weights=None) -> np.ndarray:
    """F(k_m) = sum_j w_j e^{i k_m x_j} / sum_j w_j for m = 0..modes, k_m = 2 pi m / L.

    Type-1 NUFFT by Gaussian gridding (Greengard & Lee 2004, SIAM Review 46, 443, with oversampling
    R = mr/M >= 2): oversampled grid of mr >= 4 (modes + 1) nodes (a power of 2), tau = pi SPREAD / (M^2 R (R - 1/2)) with
    M = 2 (modes + 1); F(k) = [(1/mr) sum_l f_tau(xi_l) e^{i k xi_l}] sqrt(pi/tau) e^{k^2 tau}.
    """
    x = np.ascontiguousarray(x, dtype=np.float64)
    if weights is None:
        w = np.ones(x.size)
    else:
        w = np.broadcast_to(np.asarray(weights, float), x.shape).astype(np.float64)
    wsum = float(w.sum())
    if x.size == 0 or wsum == 0:
        return np.zeros(modes + 1, complex)
    theta = np.mod(x * (2.0 * math.pi / length), 2.0 * math.pi)
    theta[theta >= 2.0 * math.pi] = 0.0
    M = 2 * (modes + 1)
    mr = int(2 ** math.ceil(math.log2(2.0 * M)))
    R = mr / M                      # the actual oversampling, 2 <= R < 4
    h = 2.0 * math.pi / mr
    tau = math.pi * SPREAD / (M * M * R * (R - 0.5))
    nchunks = max(1, min(numba.get_num_threads() * 4, x.size // 4096 + 1))
    f = _spread(theta, w, mr, h, tau, SPREAD, nchunks)
    # (1/mr) sum_l f_l e^{+i k xi_l} = conj(rfft(f)[k]) / mr for real f
    S = np.conj(np.fft.rfft(f)[:modes + 1]) / mr
    m = np.arange(modes + 1, dtype=float)
    S *= math.sqrt(math.pi / tau) * np.exp(m * m * tau)
    return S / wsum


def coherence_cutoff(k, power, floor: float, drop: float = 0.5,
                     safety: float = NOISE_SAFETY) -> dict:
    """The cutoff k_c of a form-factor spectrum (see module docstring) with its diagnostics.

    ``k``, ``power`` exclude k = 0.  Returns {"k_cutoff" (None when not above the floor),
    "k_peak", "peak", "level", "lower_bound", "status"}.
    """
    k = np.asarray(k, float)
    P = np.asarray(power, float)
    out = {"k_cutoff": None, "k_peak": None, "peak": None, "level": None, "lower_bound": False,
           "status": "no cutoff above the noise floor"}
    if P.size == 0 or not np.isfinite(P).any():
        out["status"] = "no spectrum"
        return out
    i = int(np.nanargmax(P))
    peak = float(P[i])
    level = drop * peak
    out.update({"k_peak": float(k[i]), "peak": peak, "level": level})
    if not level >= safety * floor:
        return out
    above = np.flatnonzero(P >= level)
    j = int(above[-1])
    out["k_cutoff"] = float(k[j])
    out["lower_bound"] = bool(j == P.size - 1)
    out["status"] = "lower bound (spectrum still high at the largest k computed)" \
        if out["lower_bound"] else "ok"
    return out


def form_factor_modes(cells: int, kmax_factor: float) -> int:
    """M, the number of box modes of the form factor: k_M = ``kmax_factor`` x the grid Nyquist
    k = pi/dx, i.e. M = ceil(kmax_factor x cells / 2). The one kmax rule of the coherence."""
    return int(math.ceil(kmax_factor * cells / 2))


def emission_cutoff_hz(k_c: float, bulk_gamma: float, density_cm3: float) -> float:
    """nu_c = Gamma c k_c / (2 pi) in Hz, k_c in omega_p/c (assumptions in :data:`ASSUMPTION`)."""
    return bulk_gamma * units.C_CM_S * units.wavenumber_per_cm(k_c, density_cm3) / (2.0 * math.pi)


def species_coherence(x, length: float, modes: int, *, drop: float, density_cm3: float,
                      bulk_gamma: float = 1.0, max_particles: int | None = None,
                      seed: int = 0) -> dict:
    """Form factor, floor and cutoff of one species at one time (uniform weights).

    ``max_particles`` subsamples (without replacement, seeded) when there are more; the floor is
    then 1/N_used.
    """
    x = np.asarray(x, float)
    n_all = x.size
    if max_particles and n_all > max_particles:
        rng = np.random.default_rng(seed)
        x = x[np.sort(rng.choice(n_all, size=max_particles, replace=False))]
    n = x.size
    F = form_factor(x, length, modes)
    P = np.abs(F[1:]) ** 2
    k = 2.0 * math.pi * np.arange(1, modes + 1) / length
    floor = 1.0 / n if n else None
    cut = coherence_cutoff(k, P, floor if floor else math.inf, drop)
    nu = emission_cutoff_hz(cut["k_cutoff"], bulk_gamma, density_cm3) \
        if cut["k_cutoff"] is not None else None
    return {"k": k, "power": P, "particles": n_all, "particles_used": n, "noise_floor": floor,
            **cut, "frequency_cutoff_hz": nu}
