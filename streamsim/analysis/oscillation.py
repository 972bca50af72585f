"""Oscillating (stable or damped) modes: frequency and damping rate of a seeded box mode.

A stable mode does not grow, so the growth fit says "no linear phase found"; what it does is
ring. For each seeded mode (deck ``perturbation.modes``) whose linear theory does not grow, the
real signal s(t) (the real or imaginary part of E_m, whichever carries more power) is fitted by
least squares (:func:`scipy.optimize.curve_fit`) with

    s(t) = A exp(-nu t) cos(omega t + phi),

starting from the peak of its FFT for omega and from a straight fit of ln|s| at its peaks
(:func:`scipy.signal.find_peaks`) for nu. The window starts after the first peak (the seed's
other, faster-damped roots die out) and ends where the peaks fall to 3x the late-time noise
(common practice). ``rate`` = -nu, negative for damping, as the theory's growth.

The reference is the root of the deck's dielectric function nearest the measured omega - i nu:
the Maxwellian roots (Landau contour; :func:`streamsim.theory.maxwellian_roots`) when a species
is warm, else the cold roots.
"""
from __future__ import annotations

import math

import numpy as np
from scipy.optimize import curve_fit
from scipy.signal import find_peaks

__all__ = ["fit_damped_oscillation", "reference_root", "oscillation_block"]

#: the fit window ends where the peaks of |s| fall below this multiple of the late-time noise
NOISE_FACTOR = 3.0


def _model(t, a, nu, w, phi):
    return a * np.exp(-nu * t) * np.cos(w * t + phi)


def fit_damped_oscillation(t: np.ndarray, s: np.ndarray) -> dict | None:
    """Fit s(t) = A e^{-nu t} cos(omega t + phi); None when there is no oscillation to fit.

    Returns {"omega_r", "omega_r_err", "rate", "rate_err", "window": [t0, t1]} with
    rate = -nu and 1-sigma errors from the fit covariance.
    """
    t = np.asarray(t, float)
    s = np.asarray(s, float)
    if t.size < 16 or not np.any(s):
        return None
    dt = float(np.median(np.diff(t)))
    # frequency guess: FFT peak (zero-padded)
    nfft = 1 << int(math.ceil(math.log2(8 * t.size)))
    spec = np.abs(np.fft.rfft(s - s.mean(), nfft))
    freqs = 2 * math.pi * np.fft.rfftfreq(nfft, dt)
    spec[0] = 0.0
    w0 = float(freqs[int(np.argmax(spec))])
    if not w0 > 0:
        return None
    peaks, _ = find_peaks(np.abs(s), distance=max(1, int(0.3 * math.pi / w0 / dt)))
    if peaks.size < 4:
        return None
    tail = np.abs(s[int(0.8 * s.size):])
    noise = float(np.sqrt(np.mean(tail * tail))) if tail.size else 0.0
    heights = np.abs(s[peaks])
    keep = heights > NOISE_FACTOR * noise
    # the window: from the first peak after one period (the seed's faster-damped roots die
    # out) to the last peak still above the noise, contiguously
    after = np.flatnonzero(t[peaks] >= t[0] + 2 * math.pi / w0)
    if after.size < 4:
        return None
    first = int(after[0])
    last = first
    while last + 1 < peaks.size and keep[last + 1]:
        last += 1
    if last - first < 3:                      # it never rises clear of the noise: all of it
        last = peaks.size - 1
    i0, i1 = int(peaks[first]), int(peaks[last]) + 1
    tp, hp = t[peaks[first:last + 1]], heights[first:last + 1]
    nu0 = -float(np.polyfit(tp, np.log(hp), 1)[0]) if tp.size > 1 else 0.0
    tw, sw = t[i0:i1], s[i0:i1]
    a0 = float(hp[0] * math.exp(nu0 * tp[0]))
    phi0 = float(np.angle(np.sum(sw * np.exp(1j * w0 * tw))))   # phase guess, either sign
    best = None
    for phi in (-phi0, phi0, 0.0, math.pi / 2):
        try:
            popt, pcov = curve_fit(_model, tw, sw, p0=[a0, nu0, w0, phi], maxfev=20000)
        except (RuntimeError, ValueError):
            continue
        res = float(np.sum((sw - _model(tw, *popt)) ** 2))
        if best is None or res < best[0]:
            best = (res, popt, pcov)
    if best is None:
        return None
    _, popt, pcov = best
    err = np.sqrt(np.abs(np.diag(pcov)))
    if not np.all(np.isfinite(err)):
        return None
    return {"omega_r": abs(float(popt[2])), "omega_r_err": float(err[2]),
            "rate": -float(popt[1]), "rate_err": float(err[1]),
            "window": [float(tw[0]), float(tw[-1])]}


def reference_root(k: float, species, measured: complex) -> tuple[complex, str] | None:
    """The root of the deck's dielectric function nearest ``measured`` (omega_r + i rate), and
    the model it comes from ("maxwellian" for warm species, else "cold")."""
    from .. import theory
    warm = any(not s.is_cold for s in species)
    try:
        if warm:
            roots = np.asarray(theory.maxwellian_roots(k, species), complex)
            model = "maxwellian"
        else:
            roots = np.asarray(theory.cold_roots([k], species)[0], complex)
            model = "cold"
    except Exception:  # noqa: BLE001 - no reference rather than a wrong one
        return None
    roots = roots[np.isfinite(roots)]
    roots = roots[roots.real >= 0]
    if roots.size == 0:
        return None
    return complex(roots[int(np.argmin(np.abs(roots - measured)))]), model


def oscillation_block(data) -> list[dict]:
    """Fits of every seeded box mode that the linear theory does not make grow."""
    pert = data.deck.perturbation
    seeded = [int(m) for m in pert.modes]
    if not seeded or not pert.amplitude > 0:
        return []
    growth = {m.mode: m.growth for m in data.theory.box_modes} if data.theory else {}
    species = None
    out = []
    series = data.series
    for m in seeded:
        if m > series.mode_amplitude.shape[1] or (growth.get(m) or 0.0) > 0:
            continue
        e = series.mode_amplitude[:, m - 1]
        s = e.real if np.sum(e.real**2) >= np.sum(e.imag**2) else e.imag
        fit = fit_damped_oscillation(series.t, s)
        k = 2 * math.pi * m / data.length
        row = {"mode": m, "k": k, "omega_r": None, "omega_r_err": None, "rate": None,
               "rate_err": None, "window": None, "theory_omega_r": None, "theory_rate": None,
               "theory_model": None}
        if fit is None:
            row["note"] = "no oscillation to fit"
            out.append(row)
            continue
        row.update(fit)
        if species is None:
            species = data.deck.species
        ref = reference_root(k, species, complex(fit["omega_r"], fit["rate"]))
        if ref is not None:
            root, model = ref
            row.update(theory_omega_r=root.real, theory_rate=root.imag, theory_model=model)
        out.append(row)
    return out
