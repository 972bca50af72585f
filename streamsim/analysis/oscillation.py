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

The reference is the root nearest the measured omega + i rate of a model that holds for the
plasma's state, or none:

- the state: the deck's species; in a driven run (``[drive]``), the state the plasma is in during
  the fit window, i.e. each species' drift replaced by the measured drift four-velocity of its
  mean flow at the middle of the window (:func:`streamsim.analysis.driven.bulk_drift_u`), its
  temperature kept from the deck (the drive block's driven-state theory does the same);
- the model: the cold relativistic roots when every species is cold; the Maxwellian roots
  (Landau contour; :func:`streamsim.theory.maxwellian_roots`) when some species is warm and every
  species is non-relativistically warm, theta = kT/mc^2 <= ``THETA_NONREL`` (the Maxwellian has
  v_th = sqrt(theta); relativistic corrections to the thermal spread are O(theta), e.g. the 1D
  Juttner <u^2> = theta K_2(1/theta)/K_1(1/theta) = theta (1 + 3 theta/2 + ...), Synge 1957);
  above it no model of this package gives the damped roots of a relativistically hot plasma, so
  no reference is given, and the summary says why.
"""
from __future__ import annotations

import math

import numpy as np

from .fits import NOISE_FACTOR, fit_damped_oscillation, wave_signal

__all__ = ["reference_root", "oscillation_block", "NOISE_FACTOR", "THETA_NONREL"]

#: the non-relativistic Maxwellian stands for a warm species up to this theta = kT / m c^2
THETA_NONREL = 0.05


def reference_root(k: float, species, measured: complex) -> tuple[complex, str] | None:
    """The root of the deck's dielectric function nearest ``measured`` (omega_r + i rate), and
    the model it comes from ("maxwellian" for warm species, else "cold"); None when no model
    holds (a relativistically hot species, theta > THETA_NONREL: see :func:`no_reference_why`)."""
    from .. import theory
    if no_reference_why(species) is not None:
        return None
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


def no_reference_why(species) -> str | None:
    """Why no root of this package's models describes the state, or None when one does."""
    hot = [s for s in species if not s.is_cold and float(getattr(s, "theta", 0.0) or 0.0) > THETA_NONREL]
    if hot:
        return (f"no reference: {', '.join(f'{s.name} (theta = {s.theta:.3g})' for s in hot)} "
                f"relativistically hot (theta > {THETA_NONREL:g}); the non-relativistic "
                "Maxwellian roots do not hold there and no relativistic damped-root model is "
                "available")
    return None


def driven_state(data, t: float):
    """The deck's species with each drift replaced by the measured drift four-velocity of its
    mean flow at time t (a driven run's state; module docstring)."""
    import dataclasses

    from .driven import bulk_drift_u, mean_four_velocity
    g, u = mean_four_velocity(data)
    ud = np.atleast_2d(bulk_drift_u(g, u))
    tt = np.asarray(data.series.t, float)
    return tuple(dataclasses.replace(sp, drift_u=float(np.interp(t, tt, ud[:, i])))
                 for i, sp in enumerate(data.deck.species))


def oscillation_block(data) -> list[dict]:
    """Fits of every seeded box mode that the linear theory does not make grow."""
    pert = data.deck.perturbation
    seeded = [int(m) for m in pert.modes]
    if not seeded or not pert.amplitude > 0:
        return []
    growth = {m.mode: m.growth for m in data.theory.box_modes} if data.theory else {}
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
        state = "the deck's initial state"
        species = data.deck.species
        if getattr(data.deck, "drive", None) is not None:
            t_mid = 0.5 * (fit.window[0] + fit.window[1])
            try:
                species = driven_state(data, t_mid)
                state = (f"the driven state at t = {t_mid:.4g} /omega_p (measured drifts "
                         f"{', '.join(f'{s.name} u = {s.drift_u:.4g}' for s in species)})")
            except Exception as ex:  # noqa: BLE001 - no reference rather than a wrong one
                species = None
                row["theory_note"] = (f"no reference: the driven state could not be measured "
                                      f"({ex.__class__.__name__})")
        row["theory_state"] = state
        why = no_reference_why(species) if species is not None else row.get("theory_note")
        if why is not None:
            row["theory_note"] = why
        elif species is not None:
            ref = reference_root(k, species, complex(fit.omega, fit.rate))
            if ref is not None:
                root, model = ref
                row.update(theory_omega_r=root.real, theory_rate=root.imag, theory_model=model)
                row["agree_sigma"] = _sigma(fit, root)
            else:
                row["theory_note"] = "no reference: the model has no root near the measured one"
        out.append(row)
    return out


def _sigma(fit, root: complex) -> float | None:
    """|measured - root| in units of the measured error (omega and rate in quadrature)."""
    e = math.hypot(fit.omega_err or 0.0, fit.rate_err or 0.0)
    if not e > 0:
        return None
    return float(abs(complex(fit.omega, fit.rate) - root) / e)
