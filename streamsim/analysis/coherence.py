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

Coherence cutoff (a criterion, not a law), from the high-k envelope of the spectrum
(:func:`envelope_cutoff`): the box modes are grouped in logarithmic bins of k, ``bins_per_decade``
per decade (deck ``analysis.coherence_bins_per_decade``, default 8), and the envelope E_b is the
mean of P(k) = |F(k)|^2 over the modes of bin b, placed at their mean k.  A noise-seeded spectrum
scatters from mode to mode like an exponential variable about its mean (a random phasor sum,
Goodman 1985), so one mode moves the mean of a bin of n modes by only ~1/n of itself.  With E_pk
the envelope's peak (the largest mode-weighted mean of three adjacent bins), k_c is where the envelope falls below q E_pk for the last time (above
k_c no bin reaches q E_pk again), q = ``coherence_drop`` (deck ``analysis.coherence_drop``, default 0.5), interpolated linearly in
log E against log k between the two bins that bracket the crossing.  A cutoff is reported only if
q E_pk >= NOISE_SAFETY x floor: exponential noise exceeds 20/N with probability e^-20 ~ 2e-9 per
mode, so shot noise cannot fake it; otherwise "no cutoff above the noise floor".  If the envelope
never falls below q E_pk up to the largest computed k, k_c is only a lower bound (flagged).

Error of k_c: a bootstrap over the modes (Efron & Tibshirani 1993, An Introduction to the
Bootstrap, ch. 6): the modes of every bin are resampled with replacement, the envelope and k_c
recomputed (``BOOTSTRAP`` times, seeded) and the standard deviation of the k_c taken; it is the
scatter that the mode-to-mode fluctuation of this one realisation puts on k_c.  The older
criterion "largest k with P >= q P_pk" (:func:`coherence_cutoff`) is kept for comparison; it
picks the dominant mode or one of its harmonics in a multi-mode state.

Grid limit (:func:`grid_limited_cutoff`): k_c at or above half the grid Nyquist k (wavelengths
of 4 cells or less, where the CIC shape factor sinc^2(k dx/2) already weakens the force, Birdsall
& Langdon 1991, sec. 8-3) is set by the grid, not by the plasma; so is a k_c that is only a lower
bound.  The cutoff frequency is then reported as a lower bound only.

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

__all__ = ["form_factor", "coherence_cutoff", "envelope_cutoff", "log_binned_envelope",
           "emission_cutoff_hz", "species_coherence", "grid_limited_cutoff", "NOISE_SAFETY",
           "ASSUMPTION", "BOOTSTRAP", "GRID_FRACTION"]

#: the crossing level q P_pk must exceed the shot-noise floor 1/N by this factor
NOISE_SAFETY = 20.0
#: Gaussian spreading half-width in oversampled grid points (error ~ e^{-2.2 SPREAD})
SPREAD = 12
#: fewest modes in a bin of the envelope (low-k bins are merged up to it): the mean of 4
#: exponential variables scatters by 1/2 of itself, of one by all of itself
MIN_MODES = 4
#: bootstrap resamples of the modes for the error of k_c
BOOTSTRAP = 200
#: k_c at or above this fraction of the grid Nyquist k pi/dx is set by the grid
GRID_FRACTION = 0.5
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


def log_bins(k, bins_per_decade: int, min_modes: int = 0) -> np.ndarray:
    """The logarithmic bin index floor(bins_per_decade log10(k / k_0)) of each k > 0 (sorted),
    numbered from 0; consecutive bins are merged from low k up until each holds at least
    ``min_modes`` modes (default :data:`MIN_MODES`)."""
    min_modes = min_modes or MIN_MODES
    lk = np.log10(np.asarray(k, float))
    raw = np.floor((lk - lk.min()) * bins_per_decade + 1e-9).astype(int)
    labels = np.empty_like(raw)
    lab = count = 0
    for u in np.unique(raw):
        sel = raw == u
        labels[sel] = lab
        count += int(sel.sum())
        if count >= min_modes:
            lab += 1
            count = 0
    if count and lab > 0:          # a short last group joins the one before
        labels[labels == lab] = lab - 1
    return labels


def log_binned_envelope(k, power, bins_per_decade: int = 8, bins=None):
    """(k_b, E_b, n_b): the mean k, the mean of ``power`` and the number of modes of each
    non-empty logarithmic bin of k (see the module docstring)."""
    k = np.asarray(k, float)
    P = np.asarray(power, float)
    b = log_bins(k, bins_per_decade) if bins is None else bins
    n = np.bincount(b)
    keep = n > 0
    kb = np.bincount(b, weights=k)[keep] / n[keep]
    Eb = np.bincount(b, weights=P)[keep] / n[keep]
    return kb, Eb, n[keep]


def _peak(Eb, nb):
    """(index, value) of the envelope's peak: the largest mode-weighted mean of three adjacent
    bins (so that one scattered bin does not set the reference level)."""
    if Eb.size < 3:
        i = int(np.argmax(Eb))
        return i, float(Eb[i])
    w = np.asarray(nb, float)
    num = np.convolve(Eb * w, np.ones(3), "same")
    den = np.convolve(w, np.ones(3), "same")
    sm = num / den
    i = int(np.argmax(sm))
    return i, float(sm[i])


def _crossing(kb, Eb, level):
    """(k where the envelope falls below level for the last time, or None; reached_end)."""
    above = np.flatnonzero(Eb >= level)
    if above.size == 0:
        return None, False
    j = int(above[-1]) + 1
    if j >= Eb.size:
        return None, True
    a, b = Eb[j - 1], Eb[j]
    if a <= 0 or b <= 0:
        return float(kb[j]), False
    f = (math.log(a) - math.log(level)) / (math.log(a) - math.log(b))
    return float(math.exp(math.log(kb[j - 1]) + f * (math.log(kb[j]) - math.log(kb[j - 1])))), \
        False


def envelope_cutoff(k, power, floor: float, drop: float = 0.5, bins_per_decade: int = 8,
                    safety: float = NOISE_SAFETY, bootstrap: int = BOOTSTRAP,
                    seed: int = 0) -> dict:
    """k_c of a form-factor spectrum from its log-binned high-k envelope, with its bootstrap
    error (see the module docstring). ``k`` > 0, ``power`` = |F(k)|^2 at those k.

    Returns {"k_cutoff" (None when not above the floor), "k_cutoff_err", "k_peak", "peak",
    "level", "lower_bound", "status", "envelope": (k_b, E_b, n_b)}."""
    k = np.asarray(k, float)
    P = np.asarray(power, float)
    out = {"k_cutoff": None, "k_cutoff_err": None, "k_peak": None, "peak": None, "level": None,
           "lower_bound": False, "status": "no cutoff above the noise floor",
           "envelope": (np.zeros(0), np.zeros(0), np.zeros(0, int))}
    ok = np.isfinite(P) & (k > 0)
    if not ok.any():
        out["status"] = "no spectrum"
        return out
    k, P = k[ok], P[ok]
    bins = log_bins(k, bins_per_decade)
    kb, Eb, nb = log_binned_envelope(k, P, bins=bins)
    i, peak = _peak(Eb, nb)
    level = drop * peak
    out.update({"k_peak": float(kb[i]), "peak": peak, "level": level, "envelope": (kb, Eb, nb)})
    if not level >= safety * floor:
        return out
    kc, at_end = _crossing(kb, Eb, level)
    if at_end:
        out.update(k_cutoff=float(k[-1]), lower_bound=True,
                   status="lower bound (the envelope is still high at the largest k computed)")
        return out
    out.update(k_cutoff=kc, status="ok")
    if bootstrap:
        rng = np.random.default_rng(seed)
        order = np.argsort(bins, kind="stable")
        sb = bins[order]
        Ps = P[order]
        starts = np.searchsorted(sb, np.unique(sb))
        counts = np.diff(np.append(starts, sb.size))
        reps = []
        for _ in range(int(bootstrap)):
            pick = starts[np.repeat(np.arange(starts.size), counts)] + \
                (rng.random(sb.size) * np.repeat(counts, counts)).astype(int)
            Eb_r = np.bincount(sb, weights=Ps[pick])[np.unique(sb)] / counts
            lv = drop * _peak(Eb_r, counts)[1]
            kr, end = _crossing(kb, Eb_r, lv)
            reps.append(float(k[-1]) if end else kr)
        out["k_cutoff_err"] = float(np.std(reps, ddof=1))
    return out


def grid_limited_cutoff(k_c: float | None, lower_bound: bool, cells: int, length: float) -> bool:
    """True when k_c is set by the grid: only a lower bound, or at or above GRID_FRACTION of the
    grid Nyquist k = pi cells / L (see the module docstring)."""
    if k_c is None:
        return False
    return bool(lower_bound or k_c >= GRID_FRACTION * math.pi * cells / length)


def form_factor_modes(cells: int, kmax_factor: float) -> int:
    """M, the number of box modes of the form factor: k_M = ``kmax_factor`` x the grid Nyquist
    k = pi/dx, i.e. M = ceil(kmax_factor x cells / 2). The one kmax rule of the coherence."""
    return int(math.ceil(kmax_factor * cells / 2))


def emission_cutoff_hz(k_c: float, bulk_gamma: float, density_cm3: float) -> float:
    """nu_c = Gamma c k_c / (2 pi) in Hz, k_c in omega_p/c (assumptions in :data:`ASSUMPTION`)."""
    return bulk_gamma * units.C_CM_S * units.wavenumber_per_cm(k_c, density_cm3) / (2.0 * math.pi)


def species_coherence(x, length: float, modes: int, *, drop: float, density_cm3: float,
                      bulk_gamma: float = 1.0, max_particles: int | None = None,
                      seed: int = 0, bins_per_decade: int = 8) -> dict:
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
    cut = envelope_cutoff(k, P, floor if floor else math.inf, drop, bins_per_decade, seed=seed)
    env = cut.pop("envelope")
    nu = emission_cutoff_hz(cut["k_cutoff"], bulk_gamma, density_cm3) \
        if cut["k_cutoff"] is not None else None
    nu_err = emission_cutoff_hz(cut["k_cutoff_err"], bulk_gamma, density_cm3) \
        if cut["k_cutoff_err"] is not None else None
    return {"k": k, "power": P, "particles": n_all, "particles_used": n, "noise_floor": floor,
            **cut, "frequency_cutoff_hz": nu, "frequency_cutoff_err_hz": nu_err,
            "envelope": env}
