"""Numerical-health rules for explicit momentum-conserving PIC (Birdsall & Langdon 1991, ch. 8;
Hockney & Eastwood 1988), and the step that ``time.dt = "auto"`` picks from them.

Each rule is one small function returning the number it checks; :func:`check_deck` turns them
into warnings and refusals.
"""
from __future__ import annotations

import math

#: accuracy bound on omega_p dt for leapfrog (common practice: 0.1-0.2; stability needs < 2)
OMEGA_DT_ACCURATE = 0.1
#: fraction of a cell a particle may cross per step (common practice)
CELL_CROSSING_AUTO = 0.5


def omega_p_total(species) -> float:
    """Total (non-relativistic, upper-bound) plasma frequency sqrt(sum omega_ps^2), in omega_p."""
    return math.sqrt(sum(s.omega_p2 for s in species))


def velocity_max(s) -> float:
    """A bound on |v| for a species' loaded particles, in c.

    Cold: |beta_d|. Waterbag: the faster edge u_d-boost of +-spread_u. Juttner: the drift-frame
    momentum at 7 standard deviations, boosted (common practice for the sampled tail).
    """
    if s.distribution == "waterbag":
        edge = s.spread_u
    elif s.distribution == "juttner" and s.theta > 0:
        edge = 7.0 * math.sqrt(s.theta * (1.0 + s.theta)) + 7.0 * s.theta
    else:
        edge = 0.0
    g_d, b_d = s.drift_gamma, s.drift_beta
    best = 0.0
    for up in (edge, -edge):
        gp = math.sqrt(1.0 + up * up)
        u = g_d * (up + b_d * gp)  # Lorentz boost of (gamma', u') by beta_d
        best = max(best, abs(u) / math.sqrt(1.0 + u * u))
    return best


def auto_dt(box, species, end: float | None = None) -> float:
    """The step for ``dt = "auto"``: omega_p dt <= 0.1 and v_max dt <= 0.5 dx, rounded down to
    two significant digits and, given the run's ``end``, shortened so that it divides it."""
    dt = OMEGA_DT_ACCURATE / max(omega_p_total(species), 1e-300)
    vmax = max(velocity_max(s) for s in species)
    if vmax > 0:
        dt = min(dt, CELL_CROSSING_AUTO * box.dx / vmax)
    exp = math.floor(math.log10(dt))
    dt = float(f"{math.floor(dt / 10**exp * 10) / 10:.1f}e{exp}")
    if end is not None and end > dt:
        dt = end / math.ceil(end / dt * (1 - 1e-12))
    return dt
