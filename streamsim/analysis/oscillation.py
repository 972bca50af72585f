"""Oscillating (stable or damped) modes: frequency and damping rate of a seeded box mode.

A stable mode does not grow, so the growth fit says "no linear phase found"; what it does is
ring. For each seeded mode (deck ``perturbation.modes``) whose linear theory does not grow, the
wave signal s(t) = Im E_m(t) (the component that carries a seeded standing wave, see
:mod:`streamsim.analysis.fits`) is fitted with

    s(t) = A exp(rate (t - t0)) cos(omega (t - t0) + phi)

by :func:`streamsim.analysis.fits.fit_damped_oscillation` with its automatic window: from the
first peak after one period (the seed's other, faster-damped roots die out) to where the peaks
fall to 3x the late-time noise (common practice). ``rate`` is negative for damping, as the
theory's growth; its error and that of omega are the fit's standard errors inflated for
correlated residuals (Bretherton et al. 1999), as for the growth fit.

The reference is the root of the deck's dielectric function nearest the measured omega + i rate:
the Maxwellian roots (Landau contour; :func:`streamsim.theory.maxwellian_roots`) when a species
is warm, else the cold roots.
"""
from __future__ import annotations

import math

import numpy as np

from .fits import NOISE_FACTOR, fit_damped_oscillation, wave_signal

__all__ = ["reference_root", "oscillation_block", "NOISE_FACTOR"]


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
        fit = fit_damped_oscillation(series.t, wave_signal(e), auto_window=True)
        k = 2 * math.pi * m / data.length
        row = {"mode": m, "k": k, "omega_r": None, "omega_r_err": None, "rate": None,
               "rate_err": None, "window": None, "theory_omega_r": None, "theory_rate": None,
               "theory_model": None}
        if fit is None:
            row["note"] = "no oscillation to fit"
            out.append(row)
            continue
        row.update(omega_r=fit.omega, omega_r_err=fit.omega_err, rate=fit.rate,
                   rate_err=fit.rate_err, window=[fit.window[0], fit.window[1]])
        if species is None:
            species = data.deck.species
        ref = reference_root(k, species, complex(fit.omega, fit.rate))
        if ref is not None:
            root, model = ref
            row.update(theory_omega_r=root.real, theory_rate=root.imag, theory_model=model)
        out.append(row)
    return out
