"""Fits shared by the analysis and the validation: the damped-oscillation fit and the error
inflation for correlated residuals that it shares with the growth fit.

Damped oscillation
------------------
A stable (or Landau-damped) mode rings: its field is fitted by least squares
(:func:`scipy.optimize.curve_fit`) with

    s(t) = A exp(rate (t - t0)) cos(omega (t - t0) + phi),

``rate`` < 0 for damping (the sign of a growth rate), t0 the start of the fit window. Time is
measured from t0 only for the conditioning of the fit: omega and rate, and their errors, are the
same as for a fit in t (the shift only re-labels A and phi).

Which component carries the wave: the imaginary part of the mode amplitude,
``s(t) = Im E_m(t)`` (:func:`wave_signal`). The decks seed a standing density wave by the
displacement x -> x + (A/k) sin(kx) (:func:`streamsim.loading.displace`), delta n/n = -A cos(kx),
so the charge density is +-A n cos(kx) and Gauss's law dE/dx = rho gives E = +-(A/k) sin(kx).
With E_m = (1/N) sum_i E_i exp(-i k x_i) (:func:`streamsim.fields.mode_amplitudes`) a sine has
E_m = -i |E|/2: for a standing wave the spatial phase stays fixed and E_m(t) = -i (A/2k) s(t)
with s real, so the imaginary part holds the whole wave and the real part only noise. A wave that
travels (a seeded mode in a drifting species) turns E_m around the complex plane, and its
imaginary part is still a damped cosine of the same omega and rate.

Errors
------
The covariance of curve_fit is scaled by the residual variance, rss/(n - p) for p parameters,
which assumes independent residuals. Residuals of a sampled wave are correlated (noise and model
error vary slowly against the sampling), so the standard errors are inflated by
sqrt((n - p)/(n_eff - p)), n_eff the effective sample size of the residuals from their lag-1
autocorrelation (Bretherton et al. 1999, J. Climate 12, 1990, eq. 31): :func:`error_inflation`,
the same rule as the growth-rate fit (:mod:`streamsim.analysis.growth`, p = 2).
"""
from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
from scipy.optimize import OptimizeWarning, curve_fit

__all__ = ["DampedFit", "fit_damped_oscillation", "wave_signal", "effective_sample_size",
           "error_inflation", "NOISE_FACTOR"]

#: the automatic fit window ends where the peaks of |s| fall below this multiple of the
#: late-time noise (common practice)
NOISE_FACTOR = 3.0


def effective_sample_size(residuals: np.ndarray) -> float:
    """n_eff = n (1 - rho1) / (1 + rho1), rho1 the lag-1 autocorrelation of the residuals
    (Bretherton et al. 1999, J. Climate 12, 1990, eq. 31); n if rho1 <= 0."""
    r = np.asarray(residuals, float)
    n = r.size
    if n < 3:
        return float(n)
    r = r - r.mean()
    den = float(np.dot(r, r))
    if den <= 0:
        return float(n)
    rho = float(np.dot(r[:-1], r[1:]) / den)
    if rho <= 0:
        return float(n)
    return max(2.0, n * (1.0 - rho) / (1.0 + rho))


def error_inflation(residuals: np.ndarray, n_params: int) -> float:
    """sqrt((n - p)/(n_eff - p)): the factor on a least-squares standard error (residual variance
    rss/(n - p), p = ``n_params``) for correlated residuals, n_eff from
    :func:`effective_sample_size` (Bretherton et al. 1999); 1 for uncorrelated ones."""
    n = np.asarray(residuals).size
    n_eff = effective_sample_size(residuals)
    return math.sqrt(max(n - n_params, 1) / max(n_eff - n_params, 1))


def wave_signal(mode_series: np.ndarray) -> np.ndarray:
    """The real signal of a seeded wave in a complex mode series E_m(t): Im E_m (see the module
    docstring for why the imaginary part carries a standing seeded wave)."""
    return np.asarray(mode_series).imag.astype(float)


@dataclass
class DampedFit:
    """s(t) = amplitude exp(rate (t - t0)) cos(omega (t - t0) + phase), t0 = window[0]."""
    omega: float           # > 0, in 1/t
    omega_err: float       # 1-sigma, inflated for correlated residuals
    rate: float            # growth rate: negative for damping (0 exactly when damped=False)
    rate_err: float
    amplitude: float       # at t0, > 0
    phase: float
    window: tuple[float, float]
    rms: float             # rms residual relative to the amplitude

    @property
    def damping(self) -> float:
        """nu = -rate, positive for a damped wave."""
        return -self.rate


def _frequency_guess(t, s) -> float:
    """The peak of the zero-padded FFT of s (rad per unit t)."""
    dt = float(np.median(np.diff(t)))
    nfft = 1 << int(math.ceil(math.log2(8 * t.size)))
    spec = np.abs(np.fft.rfft(s - s.mean(), nfft))
    spec[0] = 0.0
    return float(2 * math.pi * np.fft.rfftfreq(nfft, dt)[int(np.argmax(spec))])


def _auto_window(t, s, w0, noise_factor):
    """(i0, i1, peak times, peak heights): from the first peak after one period (the seed's
    faster-damped roots have died out) to the last peak still above ``noise_factor`` x the rms
    of the last 20 % of s, contiguously; all the remaining peaks when it never rises clear."""
    dt = float(np.median(np.diff(t)))
    from scipy.signal import find_peaks  # lazy: scipy.signal costs about half a second
    peaks, _ = find_peaks(np.abs(s), distance=max(1, int(0.3 * math.pi / w0 / dt)))
    if peaks.size < 4:
        return None
    tail = np.abs(s[int(0.8 * s.size):])
    noise = float(np.sqrt(np.mean(tail * tail))) if tail.size else 0.0
    heights = np.abs(s[peaks])
    keep = heights > noise_factor * noise
    after = np.flatnonzero(t[peaks] >= t[0] + 2 * math.pi / w0)
    if after.size < 4:
        return None
    first = last = int(after[0])
    while last + 1 < peaks.size and keep[last + 1]:
        last += 1
    if last - first < 3:
        last = peaks.size - 1
    return (int(peaks[first]), int(peaks[last]) + 1, t[peaks[first:last + 1]],
            heights[first:last + 1])


def fit_damped_oscillation(t, y, guess_omega: float | None = None,
                           guess_rate: float | None = None, *, damped: bool = True,
                           auto_window: bool = False,
                           noise_factor: float = NOISE_FACTOR) -> DampedFit | None:
    """Fit y(t) = A e^{rate (t - t0)} cos(omega (t - t0) + phi) (see the module docstring).

    ``guess_omega``: start value of omega (default: the FFT peak). ``guess_rate``: start value of
    the rate, negative for damping (default: a straight fit of ln|y| at its peaks, 0 if there
    are too few). ``damped=False`` fits a pure cosine (rate fixed at 0). ``auto_window=True``
    fits from the first peak after one period to the last peak above ``noise_factor`` x the
    late-time noise; otherwise all of (t, y) is fitted. None when there is no oscillation to fit
    or the fit gives no finite errors.
    """
    t = np.asarray(t, float)
    y = np.asarray(y, float)
    if t.size < 16 or not np.any(y) or not np.all(np.isfinite(y)):
        return None
    w0 = float(guess_omega) if guess_omega is not None else _frequency_guess(t, y)
    if not w0 > 0:
        return None
    if auto_window:
        win = _auto_window(t, y, w0, noise_factor)
        if win is None:
            return None
        i0, i1, tp, hp = win
    else:
        i0, i1 = 0, t.size
        dt = float(np.median(np.diff(t)))
        from scipy.signal import find_peaks
        pk, _ = find_peaks(np.abs(y), distance=max(1, int(0.3 * math.pi / w0 / dt)))
        tp, hp = t[pk], np.abs(y[pk])
    tw, yw = t[i0:i1] - t[i0], y[i0:i1]
    if guess_rate is not None:
        r0 = float(guess_rate)
    elif tp.size > 1:
        r0 = float(np.polyfit(tp, np.log(hp), 1)[0])
    else:
        r0 = 0.0
    if not damped:
        r0 = 0.0
    a0 = float(np.abs(yw).max())
    phi0 = float(np.angle(np.sum(yw * np.exp(1j * w0 * tw))))   # phase guess, either sign
    starts = [-phi0, phi0] + list(np.linspace(0.0, 2 * math.pi, 8, endpoint=False))

    if damped:
        def model(t, a, r, w, p):
            return a * np.exp(r * t) * np.cos(w * t + p)
    else:
        def model(t, a, w, p):
            return a * np.cos(w * t + p)
    best = None
    for phi in starts:
        p0 = [a0, r0, w0, phi] if damped else [a0, w0, phi]
        try:
            with warnings.catch_warnings():   # a noiseless wave can leave pcov undefined
                warnings.simplefilter("ignore", OptimizeWarning)
                popt, pcov = curve_fit(model, tw, yw, p0=p0, maxfev=20000)
        except (RuntimeError, ValueError):
            continue
        res = yw - model(tw, *popt)
        rss = float(np.dot(res, res))
        if np.isfinite(rss) and (best is None or rss < best[0]):
            best = (rss, popt, pcov, res)
    if best is None:
        return None
    rss, popt, pcov, res = best
    err = np.sqrt(np.abs(np.diag(pcov))) * error_inflation(res, len(popt))
    if not np.all(np.isfinite(err)) or not np.all(np.isfinite(popt)):
        return None
    a, phase = float(popt[0]), float(popt[-1])
    if a < 0:
        a, phase = -a, phase + math.pi
    w = float(popt[-2])
    if w < 0:                                  # cos(-w t + p) = cos(w t - p)
        w, phase = -w, -phase
    return DampedFit(omega=w, omega_err=float(err[-2]),
                     rate=float(popt[1]) if damped else 0.0,
                     rate_err=float(err[1]) if damped else 0.0,
                     amplitude=a, phase=float(math.remainder(phase, 2 * math.pi)),
                     window=(float(t[i0]), float(t[i1 - 1])),
                     rms=float(math.sqrt(rss / res.size) / a) if a > 0 else math.inf)
