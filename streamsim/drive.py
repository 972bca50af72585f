"""The imposed current of the deck block ``[drive]``: formulas only (no state, no I/O).

Normalised units (see :mod:`streamsim.units`): t in 1/omega_p, E in m_e c omega_p / e, current
density J in e n_ref c, charge in e, densities in n_ref, c = 1. In these units Ampere's law for
the mean (k = 0) field of a periodic 1D box, whose curl B has no k = 0 part, reads

    dE0/dt = -(<J> - J_ext)          (Gaussian: dE0/dt = -4 pi (<J> - J_ext))

(Jackson, *Classical Electrodynamics*, 3rd ed. (1999), sec. 6.1, the displacement current;
J_ext is the current the large-scale field imposes). The k != 0 part of E still comes from
Poisson's equation. The plasma cannot carry more than every carrier at c,

    |<J>| <= sum_s |q_s| n_s c      (the carrying limit; |v| <= c),

so a larger |J_ext| makes E0 grow without bound ("charge starvation").
"""
from __future__ import annotations

import math

import numpy as np

__all__ = ["PROFILES", "carrying_limit", "external_current", "max_abs_current", "ampere_step",
           "mean_current", "bulk_lorentz_factor", "convert_current"]

PROFILES = ("constant", "ramp", "sine")


def carrying_limit(species) -> float:
    """The largest current density the species can carry, every carrier at |v| = c:
    J_max = sum_s |q_s| n_s (units of e n_ref c), from J = sum_s q_s n_s <v_s> and |v| <= c
    (special relativity)."""
    return float(sum(abs(s.charge) * s.density for s in species))


def external_current(drive, t: float) -> float:
    """J_ext(t) of a :class:`streamsim.deck.Drive` (units of e n_ref c), switched on at t = 0:

    - ``constant``: J_ext = current for t >= 0;
    - ``ramp``: J_ext = current * min(t / ramp_time, 1), a linear rise;
    - ``sine``: J_ext = current * sin(angular_frequency * t + phase).

    Before t = 0 (the initial half step) J_ext = 0."""
    if t < 0:
        return 0.0
    if drive.profile == "constant":
        return drive.current
    if drive.profile == "ramp":
        return drive.current * min(t / drive.ramp_time, 1.0)
    return drive.current * math.sin(drive.angular_frequency * t + drive.phase)


def max_abs_current(drive, t_end: float) -> float:
    """max |J_ext(t)| over 0 <= t <= t_end (exact for each profile)."""
    j = abs(drive.current)
    if drive.profile == "constant":
        return j
    if drive.profile == "ramp":
        return j * min(t_end / drive.ramp_time, 1.0)
    a, b = drive.phase, drive.angular_frequency * t_end + drive.phase   # the phase range covered
    # |sin| reaches 1 at pi/2 + m pi; is such a point inside [a, b]?
    m = math.ceil((a - 0.5 * math.pi) / math.pi)
    if 0.5 * math.pi + m * math.pi <= b:
        return j
    return j * max(abs(math.sin(a)), abs(math.sin(b)))


def ampere_step(e0: float, current: float, current_ext: float, dt: float) -> float:
    """One leapfrog step of Ampere's law for the mean field: E0^{n+1} = E0^n - dt (<J>^{n+1/2}
    - J_ext^{n+1/2}), normalised (module docstring; Jackson 1999, sec. 6.1)."""
    return e0 - dt * (current - current_ext)


def mean_current(charges, weights, us, length: float) -> float:
    """Box-averaged current density <J> = (1/L) sum_s q_s w_s sum_j v_j, v = u / sqrt(1 + u^2)
    (units of e n_ref c; w_s the macro-particle weight in n_ref c/omega_p)."""
    total = 0.0
    for q, w, u in zip(charges, weights, us):
        total += float(q) * float(w) * float(np.sum(u / np.sqrt(1.0 + u * u)))
    return total / length


def bulk_lorentz_factor(mean_gamma, mean_u):
    """Bulk Lorentz factor of a flow from its mean four-velocity (<gamma>, <u>):
    Gamma = <gamma> / sqrt(<gamma>^2 - <u>^2), the Lorentz factor of the frame in which the mean
    four-velocity has no spatial part, beta_frame = <u>/<gamma> (Eckart 1940, Phys. Rev. 58, 919,
    the particle frame; for a cold beam Gamma = gamma_0). Arrays allowed."""
    g = np.asarray(mean_gamma, float)
    u = np.asarray(mean_u, float)
    out = g / np.sqrt(np.maximum(g * g - u * u, 1e-300))
    return float(out) if out.ndim == 0 else out


def convert_current(value: float, form: str, density_cm3: float) -> float:
    """A [drive] current given as ``current`` (e n_ref c), ``current_statA_cm2`` (CGS) or
    ``current_A_m2`` (SI), in units of e n_ref c (conversions in :mod:`streamsim.units`)."""
    from . import units
    if form == "current":
        return float(value)
    if form == "current_statA_cm2":
        return units.current_from_statA_cm2(value, density_cm3)
    if form == "current_A_m2":
        return units.current_from_A_m2(value, density_cm3)
    raise ValueError(f"unknown current form {form!r}")
