"""Growth rates from noise-seeded runs: a noise floor plus one exponential, fitted up to where the
signal departs from it, optionally on the growing eigenmode's amplitude.

Noise-floor fit (:func:`fit_noise_floor`)
-----------------------------------------
A mode that grows from particle noise has the power

    P(t) = |E(t)|^2 = N + A e^{2 gamma t}

on average in its linear phase: a noise level N (the non-growing part of the spectrum, which a
random or phase-mixed start keeps at a roughly steady level) plus the growing mode (the model of
a linear instability emerging from a steady fluctuation level, e.g. Birdsall & Langdon 1991,
ch. 12 and sec. 16-1 on noise in particle simulations). The noise is taken as complex Gaussian
added to the growing mode S(t), |S|^2 = A e^{2 gamma t}; ln P is fitted by weighted least
squares (:func:`scipy.optimize.curve_fit`) with its expectation E[ln P] = ln |S|^2 + E_1(|S|^2/N)
(:func:`log_power_mean`), which removes the bias of fitting ln(N + |S|^2) to ln P (ln P sits
Euler's gamma below ln N at the floor and on ln |S|^2 far above it).

- Weights: for a signal S plus complex Gaussian noise of power N, ln |S + n|^2 scatters with
  variance 2N/|S|^2 where |S|^2 >> N and pi^2/6 at the floor (:func:`_log_power_var`), plus a
  floor ``SCATTER_FLOOR^2`` for the scatter that is not noise (common practice); the scale is
  taken from the residuals. Two weighted passes follow an unweighted one.
- Start: the first sample where the running median of ln P is within one unit of its minimum
  before the peak (an initial transient that decays towards the floor is not modelled).
- End: saturation bends P below the model. Window ends from ``SATURATION_MARGIN`` amplitude
  e-folds below the peak of P backwards are tried
  in turn. For each, the model is refitted without the window's last ``DEPARTURE_EFOLDS``
  amplitude e-fold(s), and the mean normalised residual of that segment against the refit's extrapolation is computed;
  the first (latest) end where it lies within ``DEPARTURE_SIGMA`` standard errors of zero is kept
  (the "departure" test; its standard error combines the scatter and effective sample size of
  the refit's residuals where the exponential exceeds the noise with the uncertainty of the
  extrapolation from the refit's covariance).
- Error: the covariance of curve_fit, inflated by sqrt((n - p)/(n_eff - p)) for correlated
  residuals, n_eff from the integrated autocorrelation of the residuals
  (:func:`integrated_sample_size`; the lag-1 form of Bretherton et al. 1999, used by the
  straight-window fit, undercounts the correlation of a noise floor seen through ln); the
  window choice adds half the change of the rate when the window ends one e-fold earlier, in
  quadrature (also reported alone as ``systematic``).
- A fit whose noise level N is more than e^3 away from the measured floor is rejected.
- Never the noise alone: the fitted exponential must rise ``min_efolds`` amplitude e-folds above
  the fitted noise level by the window end, else there is no fit.

Eigenmode projection (:func:`eigenmode_signal`)
-----------------------------------------------
The field at k is the sum of the growing mode and of the non-growing modes of the same k; the
latter set the noise level. With the species' charge-density modes rho_s(k, t) and their time
derivatives, the normal-mode decomposition of :mod:`streamsim.theory.eigenmodes` separates the
growing mode's field amplitude E_g(t) from the other 2S - 1 roots of a cold or waterbag plasma
exactly, and from the fluid-like part of a warm plasma's non-growing spectrum approximately, so
the noise level of E_g is lower than that of E_k and its exponential starts earlier. Time
derivatives by central differences (numpy.gradient, second order).

Noise level and advice (:func:`levels`, :func:`particles_per_cell_needed`)
-------------------------------------------------------------------------
The noise level is the median of P over the samples before the running median of ln P first
rises one amplitude e-fold above its early level (for exponentially distributed noise power the
median is N ln 2), the saturation level from the peak of the running
median. A random start's noise amplitude scales as 1/sqrt(particles per cell) (shot noise, e.g.
Birdsall & Langdon 1991, sec. 12-2; Hockney & Eastwood 1988, ch. 8), and the saturation level does
not depend on it, so reaching ``target`` e-folds from ``available`` ones needs the particles per cell
multiplied by exp(2 (target - available)).
"""
from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
from scipy.ndimage import median_filter
from scipy.optimize import OptimizeWarning, curve_fit
from scipy.special import exp1


__all__ = ["NoiseFloorFit", "fit_noise_floor", "levels", "Levels", "particles_per_cell_needed",
           "eigenmode_signal", "reason_text", "NOISE_MIN_EFOLDS", "TARGET_EFOLDS"]

#: amplitude e-folds the fitted exponential must rise above the noise level (common practice)
NOISE_MIN_EFOLDS = 2.0
#: the e-folds between noise and saturation the particle advice aims at (common practice)
TARGET_EFOLDS = 4.0
#: a window end is rejected when the mean normalised residual of its last e-fold of power is
#: further than this many standard errors from zero (two-sided 95 %)
DEPARTURE_SIGMA = 3.0
#: window ends stay this many amplitude e-folds below the saturation level (the peak of the
#: running median), where saturation has not yet bent the exponential (common practice)
SATURATION_MARGIN = 1.0
#: the departure test looks at the window's last this many amplitude e-folds
DEPARTURE_EFOLDS = 1.0
#: scatter of ln P that is not noise (common practice: 1 % in power)
SCATTER_FLOOR = 0.01
#: a fit whose noise power differs from the measured floor (running median) by more than this
#: in ln is not a noise-plus-exponential fit (common practice)
FLOOR_MISMATCH = 3.0
#: window ends tried between the least needed rise and the peak
END_CANDIDATES = 40


@dataclass
class NoiseFloorFit:
    rate: float            # gamma: amplitude growth rate (P grows at 2 gamma)
    rate_err: float        # 1-sigma, inflated for correlated residuals, window choice included
    systematic: float      # the window-choice part of rate_err
    noise: float           # fitted noise level sqrt(N) (amplitude units)
    t0: float
    t1: float
    i0: int
    i1: int                # inclusive
    efolds: float          # amplitude e-folds of the exponential above the noise at t1
    rms: float             # rms of the normalised residuals
    departure: float       # mean normalised residual of the last e-fold, in standard errors

    def as_dict(self) -> dict:
        return {"measured": self.rate, "measured_err": self.rate_err,
                "systematic": self.systematic,
                "window": [self.t0, self.t1], "efolds": self.efolds, "rms_residual": self.rms,
                "noise_level": self.noise}


@dataclass
class Levels:
    noise: float | None        # amplitude
    saturation: float | None   # amplitude
    t_saturation: float | None
    efolds: float | None       # ln(saturation / noise)


def _running_median(y: np.ndarray) -> np.ndarray:
    w = max(5, (y.size // 60) | 1)
    return median_filter(y, size=w, mode="nearest")


def levels(t, power, t_max: float | None = None) -> Levels:
    """Noise and saturation levels (amplitudes) of a power series P(t) (module docstring)."""
    t = np.asarray(t, float)
    p = np.asarray(power, float)
    ok = np.isfinite(p) & (p > 0) & np.isfinite(t)
    if t_max is not None:
        ok &= t <= t_max
    if ok.sum() < 8:
        return Levels(None, None, None, None)
    tt, y = t[ok], np.log(p[ok])
    ys = _running_median(y)
    ipk = int(np.argmax(ys))
    imin = int(np.argmin(ys[:ipk + 1]))
    # the floor: the samples before the running median first rises two units (one amplitude
    # e-fold) above the median of the pre-minimum part
    base = float(np.median(ys[:imin + 1]))
    up = np.flatnonzero(ys[imin:] >= base + 2.0)
    i_rise = imin + (int(up[0]) if up.size else ys.size - imin)
    noise = math.sqrt(float(np.median(np.exp(y[:max(i_rise, 1)]))) / math.log(2.0))
    sat = math.sqrt(math.exp(ys[ipk]))
    return Levels(noise, sat, float(tt[ipk]), max(0.0, math.log(sat / noise)))


def particles_per_cell_needed(ppc: int, available: float | None,
                              target: float = TARGET_EFOLDS) -> int | None:
    """ppc exp(2 (target - available)), rounded up (shot-noise law, module docstring); None when
    the available e-folds already reach the target or are unknown."""
    if available is None or not math.isfinite(available) or available >= target:
        return None
    return int(math.ceil(ppc * math.exp(2.0 * (target - available))))


def reason_text(lv: Levels, min_efolds: float = NOISE_MIN_EFOLDS) -> str:
    """One line saying in numbers why no rate could be measured."""
    if lv.efolds is None:
        return "too few positive samples to measure a growth"
    span = (f"the signal rises {lv.efolds:.2g} e-folds between the noise level {lv.noise:.2g} "
            f"and saturation {lv.saturation:.2g} (t = {lv.t_saturation:.3g} /omega_p)")
    if lv.efolds < min_efolds + 0.5:
        return f"the linear phase is too short: {span}; at least {min_efolds + 0.5:g} needed"
    return f"no window where noise plus one exponential fits: {span}"


def log_power_mean(ln_signal_power, ln_noise_power):
    """E[ln |S + n|^2] = ln |S|^2 + E_1(|S|^2 / N) for a complex Gaussian n of mean power N (the
    log-moment of the noncentral chi-square of two degrees of freedom; Lapidoth & Moser 2003,
    IEEE Trans. Inf. Theory 49, 2426, Lemma 10.1); tends to ln N - Euler's gamma as S -> 0."""
    lam = np.exp(np.clip(ln_signal_power - ln_noise_power, -700.0, 700.0))
    return np.clip(ln_signal_power, ln_noise_power - 700.0, None) + exp1(lam)


def integrated_sample_size(residuals: np.ndarray) -> float:
    """n_eff = n / (1 + 2 Sum_k (1 - k/n) rho_k), the sum of the residuals' autocorrelations up
    to the first that is not positive (Thiebaux & Zwiers 1984, J. Clim. Appl. Meteor. 23, 800,
    eq. 2.1; truncation as Geyer 1992, Stat. Sci. 7, 473); n when rho_1 <= 0."""
    r = np.asarray(residuals, float)
    n = r.size
    if n < 4:
        return float(n)
    r = r - r.mean()
    f = np.fft.rfft(r, 2 * n)
    acf = np.fft.irfft(f * np.conj(f))[:n]
    if acf[0] <= 0:
        return float(n)
    rho = acf / acf[0]
    s = 0.0
    for k in range(1, n // 2):
        if rho[k] <= 0:
            break
        s += (1.0 - k / n) * rho[k]
    return max(2.0, n / (1.0 + 2.0 * s))


def _inflation(residuals: np.ndarray, n_params: int) -> float:
    """sqrt((n - p)/(n_eff - p)) with n_eff from :func:`integrated_sample_size`."""
    n = np.asarray(residuals).size
    return math.sqrt(max(n - n_params, 1) / max(integrated_sample_size(residuals) - n_params, 1))


def _log_power_var(ln_signal_power, ln_noise_power):
    """Var[ln |S + n|^2] interpolated between its limits pi^2/6 (S = 0: the log of an exponential
    variable) and 2N/|S|^2 (|S|^2 >> N: first order in n):
    (pi^2/6 N^2 + 2 N |S|^2) / (N + |S|^2)^2, with M = |S|^2 / N."""
    m = np.exp(np.clip(ln_signal_power - ln_noise_power, -300.0, 300.0))
    return (math.pi ** 2 / 6.0 + 2.0 * m) / (1.0 + m) ** 2


def _model(t, lnN, b, g, t1):
    return log_power_mean(b + 2.0 * g * (t - t1), lnN)


def _fit_window(t, y, t1, p0, passes=3):
    sigma = None
    popt = pcov = None
    f = lambda tt, lnN, b, g: _model(tt, lnN, b, g, t1)  # noqa: E731
    for _ in range(passes):
        with warnings.catch_warnings():       # an undetermined covariance is checked by the caller
            warnings.simplefilter("ignore", OptimizeWarning)
            popt, pcov = curve_fit(f, t, y, p0=p0, sigma=sigma, maxfev=4000)
        lnN, b, g = popt
        sigma = np.sqrt(_log_power_var(b + 2.0 * g * (t - t1), lnN) + SCATTER_FLOOR ** 2)
        p0 = popt
    res = (y - f(t, *popt)) / sigma
    return popt, pcov, res, sigma


def fit_noise_floor(t, power, *, min_efolds: float = NOISE_MIN_EFOLDS,
                    t_max: float | None = None,
                    departure_sigma: float = DEPARTURE_SIGMA) -> NoiseFloorFit | None:
    """Fit P(t) = N + A e^{2 gamma t} with the window end from the fit's departure (module
    docstring); None when no window rises ``min_efolds`` amplitude e-folds above the noise."""
    t = np.asarray(t, float)
    p = np.asarray(power, float)
    ok = np.isfinite(p) & (p > 0) & np.isfinite(t)
    if t_max is not None:
        ok &= t <= t_max
    idx = np.flatnonzero(ok)
    if idx.size < 16:
        return None
    tt, y = t[idx], np.log(p[idx])
    ys = _running_median(y)
    ipk = int(np.argmax(ys))
    imin = int(np.argmin(ys[:ipk + 1]))
    if ys[ipk] - ys[imin] < 2.0 * min_efolds:
        return None
    i0 = int(np.flatnonzero(ys[:imin + 1] <= ys[imin] + 1.0)[0])
    above = np.flatnonzero(ys[imin:ipk + 1] >= ys[imin] + 2.0 * min_efolds)
    ilo = imin + int(above[0])
    below = np.flatnonzero(ys[ilo:ipk + 1] <= ys[ipk] - 2.0 * SATURATION_MARGIN)
    if below.size == 0:
        return None
    ipk = ilo + int(below[-1])
    ends = np.unique(np.linspace(ilo, ipk, min(END_CANDIDATES, ipk - ilo + 1)).round().astype(int))
    lnN0 = float(ys[imin] - math.log(math.log(2.0)))     # the median of an exponential is N ln 2
    for ie in ends[::-1]:
        if ie - i0 + 1 < 12:
            break
        tw, yw = tt[i0:ie + 1], y[i0:ie + 1]
        t1 = float(tw[-1])
        rise = np.flatnonzero(ys[imin:ie + 1] >= ys[imin] + 0.5 * (ys[ie] - ys[imin]))
        tm = float(tt[imin + int(rise[0])]) if rise.size else 0.5 * (tw[0] + t1)
        g0 = max(1e-6, 0.5 * (ys[ie] - ys[imin]) / max(t1 - tm, 1e-9) * 0.5)
        try:
            popt, pcov, res, sigma = _fit_window(tw, yw, t1, [lnN0, float(ys[ie]), g0])
        except (RuntimeError, ValueError):
            continue
        lnN, b, g = (float(v) for v in popt)
        err = math.sqrt(abs(pcov[2, 2])) if np.all(np.isfinite(pcov)) else math.nan
        efolds = 0.5 * (b - lnN)
        if not (g > 0 and math.isfinite(err) and err > 0) or abs(lnN - lnN0) > FLOOR_MISMATCH:
            continue
        if efolds < min_efolds:
            break                       # shorter windows rise less: nothing left to find
        # departure: refit without the window's last DEPARTURE_EFOLDS amplitude e-folds and
        # compare that segment with the refit's extrapolation
        last = tw >= t1 - DEPARTURE_EFOLDS / g
        if last.sum() < 5:
            last = np.zeros(tw.size, bool)
            last[-5:] = True
        if (~last).sum() < 12:
            break
        try:
            pB, covB, resB, _ = _fit_window(tw[~last], yw[~last], t1, popt)
        except (RuntimeError, ValueError):
            continue
        relB = _log_power_var(pB[1] + 2.0 * pB[2] * (tw[last] - t1), pB[0])
        zB = (yw[last] - _model(tw[last], *pB, t1)) / np.sqrt(relB + SCATTER_FLOOR ** 2)
        # scatter and correlation of the refit's residuals where the exponential dominates
        grown = (pB[1] + 2.0 * pB[2] * (tw[~last] - t1)) > pB[0]
        ref = resB[grown] if grown.sum() >= 8 else resB
        scale = float(np.sqrt(np.mean(ref * ref)))
        n_seg = max(1.0, last.sum() * integrated_sample_size(ref) / ref.size)
        # the extrapolation's own uncertainty: the gradient of the segment's mean normalised
        # prediction with respect to the refit's parameters, through their inflated covariance
        wseg = 1.0 / np.sqrt(relB + SCATTER_FLOOR ** 2)
        grad = np.zeros(3)
        for j in range(3):
            h = np.zeros(3)
            h[j] = 1e-6 * max(1.0, abs(pB[j]))
            grad[j] = (np.mean(_model(tw[last], *(pB + h), t1) * wseg)
                       - np.mean(_model(tw[last], *(pB - h), t1) * wseg)) / (2 * h[j])
        var_pred = float(grad @ covB @ grad) * _inflation(resB, 3) ** 2 if np.all(
            np.isfinite(covB)) else math.inf
        se = math.sqrt(scale * scale / n_seg + var_pred)
        dep = float(np.mean(zB) / se) if se > 0 else math.inf
        if abs(dep) > departure_sigma:
            continue
        err *= _inflation(res, 3)
        # window choice: half the change of the rate when the window ends DEPARTURE_EFOLDS
        # earlier (the refit above), added in quadrature to the statistical error
        syst = 0.5 * abs(g - float(pB[2]))
        err = math.hypot(err, syst)
        return NoiseFloorFit(rate=g, rate_err=float(err), systematic=float(syst),
                             noise=math.exp(0.5 * lnN),
                             t0=float(tw[0]), t1=t1, i0=int(idx[i0]), i1=int(idx[ie]),
                             efolds=float(efolds), rms=float(np.sqrt(np.mean(res * res))),
                             departure=dep)
    return None


def eigenmode_signal(t, density_modes, charges, basis) -> np.ndarray:
    """E_g(t): the growing mode's field amplitude from the species' density modes n_s(k, t)
    (array (n, S)), their charges and a :class:`streamsim.theory.ModeBasis` at that k."""
    t = np.asarray(t, float)
    rho = np.asarray(density_modes, complex) * np.asarray(charges, float)[None, :]
    drho = np.gradient(rho, t, axis=0)
    return basis.growing(rho, drho)
