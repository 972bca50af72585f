"""Formulas of the linear theory: one physical quantity per small function.

The plasma dispersion function Z and its derivative, the 1D Maxwell-Juttner distribution and its
moments, the boosted waterbag edges and the Maxwellian that stands in for a drifting species.
Normalised units (u = gamma*beta, velocities in c, temperatures theta = kT/(m c^2)).
Each docstring gives the equation and where it is published.
"""
from __future__ import annotations

import math

import numpy as np
from scipy import special

__all__ = [
    "plasma_dispersion_z", "plasma_dispersion_z_prime", "one_plus_zeta_z",
    "juttner_normalisation", "juttner_distribution", "juttner_u2_rest",
    "equivalent_waterbag_spread", "waterbag_edges", "maxwellian_parameters",
]


def plasma_dispersion_z(zeta):
    """Plasma dispersion function Z(zeta) = i sqrt(pi) w(zeta), w the Faddeeva function.

    Z(zeta) = pi^(-1/2) Int exp(-x^2)/(x - zeta) dx for Im zeta > 0, analytically continued to the
    whole plane (Landau contour).  Fried & Conte, *The Plasma Dispersion Function* (1961);
    w from :func:`scipy.special.wofz`.
    """
    return 1j * math.sqrt(math.pi) * special.wofz(np.asarray(zeta, dtype=complex))


def plasma_dispersion_z_prime(zeta):
    """Z'(zeta) = -2 (1 + zeta Z(zeta))  (Fried & Conte 1961)."""
    zeta = np.asarray(zeta, dtype=complex)
    return -2.0 * (1.0 + zeta * plasma_dispersion_z(zeta))


def juttner_normalisation(drift_u: float, theta: float) -> float:
    """The normalisation of the lab-frame 1D Juttner distribution, scaled by exp(1/theta):

        Int exp(-Gamma_d (gamma - beta_d u)/theta) du = 2 Gamma_d K_1(1/theta),

    from Int exp(-cosh(eta - eta_d)/theta) cosh(eta) d eta = 2 cosh(eta_d) K_1(1/theta)
    (Abramowitz & Stegun 9.6.24) with u = sinh(eta).  Returned as 2 Gamma_d k1e(1/theta) =
    exp(1/theta) 2 Gamma_d K_1(1/theta) (scaled Bessel function, scipy.special.k1e), the divisor
    of exp(-(Gamma_d (gamma - beta_d u) - 1)/theta); stable for small theta.
    """
    return 2.0 * math.sqrt(1.0 + drift_u**2) * special.k1e(1.0 / theta)


def juttner_distribution(u, drift_u: float, theta: float):
    """Lab-frame drifting 1D Maxwell-Juttner distribution, normalised to 1 in u.

    f(u) = exp(-Gamma_d (gamma - beta_d u)/theta) / (2 Gamma_d K_1(1/theta)),  gamma = sqrt(1+u^2).

    The rest-frame form exp(-gamma'/theta) is Juttner, Ann. Phys. 339, 856 (1911), in 1D; the lab
    form follows from the invariance of the phase-space density.  The normalisation:
    Int exp(-cosh(eta - eta_d)/theta) cosh(eta) d eta = 2 cosh(eta_d) K_1(1/theta)
    (Abramowitz & Stegun 9.6.24), see :func:`juttner_normalisation`.
    """
    u = np.asarray(u, dtype=float)
    eta = np.arcsinh(u)
    xi = eta - math.asinh(drift_u)
    phi = 2.0 * np.sinh(0.5 * xi) ** 2 / theta           # (cosh xi - 1)/theta, no cancellation
    return np.exp(-phi) / juttner_normalisation(drift_u, theta)


def juttner_u2_rest(theta: float) -> float:
    """Rest-frame <u'^2> of the 1D Juttner distribution: theta K_2(1/theta) / K_1(1/theta).

    From Int sinh^2(eta) cosh(eta) e^(-cosh(eta)/theta) d eta = 2 theta K_2(1/theta) (integration
    by parts, A&S 9.6.24).  Tends to theta (the Maxwellian v_th^2) as theta -> 0.
    """
    if theta <= 0:
        return 0.0
    x = 1.0 / theta
    return theta * special.kve(2, x) / special.kve(1, x)


def equivalent_waterbag_spread(theta: float) -> float:
    """Waterbag half-width Delta with the same rest-frame <u'^2> as a Juttner of temperature theta.

    A flat distribution on [-Delta, Delta] has <u'^2> = Delta^2/3, so Delta = sqrt(3 <u'^2>).
    """
    return math.sqrt(3.0 * juttner_u2_rest(theta))


def waterbag_edges(drift_u: float, spread_u: float) -> tuple[float, float]:
    """Lab-frame edges (u_-, u_+) of a waterbag flat in u' on [-Delta, Delta] in its drift frame.

    u_pm = Gamma_d (pm Delta + beta_d sqrt(1 + Delta^2))  (Lorentz boost of the edge momenta).
    By the invariance of the phase-space density the lab distribution is flat between them.
    """
    g = math.sqrt(1.0 + drift_u**2)
    b = drift_u / g
    e = math.sqrt(1.0 + spread_u**2)
    return g * (-spread_u + b * e), g * (spread_u + b * e)


def maxwellian_parameters(s, kinematic: bool = True) -> tuple[float, float, float]:
    """(omega_eff^2, v_s, v_th) of the Maxwellian that stands in for a drifting species.

    With ``kinematic`` (the default) the drift kinematics of the theta -> 0 limit of the drifting
    Juttner are kept: omega_eff^2 = omega_ps^2 / Gamma_d^3 (longitudinal mass) and
    v_th = sqrt(theta) / Gamma_d^2 (dv = du / gamma^3 about the drift); then the Maxwellian model
    reduces to the cold relativistic model as theta -> 0.  Without it: omega_ps^2, v_th^2 = theta.
    At beta_d << 1 both are the textbook non-relativistic Maxwellian; v_s = beta_d in both.
    """
    g = s.drift_gamma
    if kinematic:
        return s.omega_p2 / g**3, s.drift_beta, math.sqrt(s.theta) / g**2
    return s.omega_p2, s.drift_beta, math.sqrt(s.theta)


def one_plus_zeta_z(zeta):
    """R = 1 + zeta Z(zeta) and dR/dzeta = Z - 2 zeta R, without cancellation at large |zeta|.

    Where |zeta| > 30 and Re(zeta^2) > 60 the asymptotic series
    1 + zeta Z = -Sum_{n>=1} (2n-1)!! / (2 zeta^2)^n  (Fried & Conte 1961) is used; there the
    Landau term i sqrt(pi) sigma zeta exp(-zeta^2) is below 1e-20 of the result.
    Elsewhere wofz directly.
    """
    zeta = np.asarray(zeta, dtype=complex)
    with np.errstate(all="ignore"):
        z = plasma_dispersion_z(zeta)
        r = 1.0 + zeta * z
        dr = z - 2.0 * zeta * r
        big = (np.abs(zeta) > 30.0) & ((zeta * zeta).real > 60.0)
        if np.any(big):
            zb = zeta[big]
            x = 1.0 / (2.0 * zb * zb)
            term = np.ones_like(zb)
            ra = np.zeros_like(zb)
            za = np.zeros_like(zb)                       # Z = -(1/zeta) Sum (2n-1)!! x^n, n >= 0
            for n in range(0, 10):
                if n > 0:
                    term = term * (2 * n - 1) * x
                    ra -= term
                za -= term / zb
            r[big] = ra
            dr[big] = za - 2.0 * zb * ra
    return r, dr

