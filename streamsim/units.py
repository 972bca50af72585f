"""Physical units at the edge: the one place where normalised quantities meet CGS.

Inside streamsim time is in 1/omega_p, length in c/omega_p, velocity in c, momentum in
m_e c (u = gamma*beta), charge in e and mass in m_e, with omega_p the plasma frequency of the
reference density ``units.density_cm3``.  Everything here converts to and from that system.

CODATA constants come from :mod:`scipy.constants` (SI) and are converted to Gaussian CGS
explicitly below, so that the textbook CGS formulas can be written as they are printed.
"""
from __future__ import annotations

import math

import scipy.constants as _sc

#: speed of light, cm/s
C_CM_S = _sc.c * 1.0e2
#: electron mass, g
M_E_G = _sc.m_e * 1.0e3
#: elementary charge, statcoulomb (1 C = 10 c[SI] statC, c[SI] the number 299792458)
E_STATC = _sc.e * 10.0 * _sc.c
#: electron rest energy m_e c^2, erg
MC2_ERG = M_E_G * C_CM_S**2
#: electron rest energy m_e c^2, keV (CODATA, scipy.constants: 510.99895 keV)
MC2_KEV = _sc.physical_constants["electron mass energy equivalent in MeV"][0] * 1.0e3


def omega_p_rad_s(density_cm3: float) -> float:
    """Electron plasma frequency, rad/s.

    omega_p = sqrt(4 pi n e^2 / m_e) in Gaussian units (NRL Plasma Formulary:
    omega_pe = 5.64e4 n_e^(1/2) rad/s with n_e in cm^-3).
    """
    if not density_cm3 > 0:
        raise ValueError("density_cm3 must be > 0")
    return math.sqrt(4.0 * math.pi * density_cm3 * E_STATC**2 / M_E_G)


def skin_depth_cm(density_cm3: float) -> float:
    """Electron skin depth (inertial length) d_e = c/omega_p, cm (NRL Plasma Formulary)."""
    return C_CM_S / omega_p_rad_s(density_cm3)


def plasma_period_ns(density_cm3: float) -> float:
    """Plasma period 2 pi/omega_p, ns."""
    return 2.0 * math.pi / omega_p_rad_s(density_cm3) * 1.0e9


def time_ns(t: float, density_cm3: float) -> float:
    """A time in 1/omega_p, converted to ns: t_ns = t / omega_p * 1e9."""
    return t / omega_p_rad_s(density_cm3) * 1.0e9


def length_cm(x: float, density_cm3: float) -> float:
    """A length in c/omega_p, converted to cm: x_cm = x c/omega_p."""
    return x * skin_depth_cm(density_cm3)


def length_from_cm(length_cm: float, density_cm3: float) -> float:
    """A length in cm, converted to c/omega_p: x = x_cm / (c/omega_p) = x_cm omega_p / c
    (inverse of :func:`length_cm`; c/omega_p from :func:`skin_depth_cm`)."""
    return length_cm / skin_depth_cm(density_cm3)


def theta_from_kev(temperature_kev: float, mass: float = 1.0) -> float:
    """The temperature parameter theta = kT/(m c^2) of a species of mass ``mass`` m_e whose kT
    is given in keV: theta = kT / (mass * m_e c^2), m_e c^2 = 510.999 keV (CODATA via
    scipy.constants). theta is the parameter of the Maxwell-Juttner distribution
    f ∝ exp(-gamma/theta) (Synge 1957, The Relativistic Gas)."""
    return temperature_kev / (mass * MC2_KEV)


def kev_from_theta(theta: float, mass: float = 1.0) -> float:
    """kT in keV of a species of mass ``mass`` m_e at theta = kT/(m c^2): kT = theta * mass *
    m_e c^2 (inverse of :func:`theta_from_kev`)."""
    return theta * mass * MC2_KEV


def wavenumber_per_cm(k: float, density_cm3: float) -> float:
    """A wavenumber in omega_p/c, converted to 1/cm."""
    return k / skin_depth_cm(density_cm3)



def growth_time_ns(growth: float, density_cm3: float) -> float:
    """e-folding time 1/gamma of a growth rate gamma given in omega_p, in ns (inf if gamma <= 0)."""
    if not growth > 0:
        return math.inf
    return time_ns(1.0 / growth, density_cm3)


def normalization(density_cm3: float) -> dict:
    """The normalisation block written into every summary.json."""
    return {
        "density_cm3": float(density_cm3),
        "omega_p_rad_s": omega_p_rad_s(density_cm3),
        "skin_depth_cm": skin_depth_cm(density_cm3),
        "plasma_period_ns": plasma_period_ns(density_cm3),
        "time_unit_ns": time_ns(1.0, density_cm3),
        "length_unit_cm": skin_depth_cm(density_cm3),
    }


# ----------------------------------------------------------------------------------------------
# current densities and fields (the imposed current of [drive])
# ----------------------------------------------------------------------------------------------
#: elementary charge, C (CODATA via scipy.constants)
E_C = _sc.e
#: speed of light, m/s
C_M_S = _sc.c


def current_unit_statA_cm2(density_cm3: float) -> float:
    """The normalised current-density unit e n_ref c in statA/cm^2 (Gaussian CGS):
    J_unit = e [statC] n_ref [cm^-3] c [cm/s]."""
    if not density_cm3 > 0:
        raise ValueError("density_cm3 must be > 0")
    return E_STATC * density_cm3 * C_CM_S


def current_unit_A_m2(density_cm3: float) -> float:
    """The normalised current-density unit e n_ref c in A/m^2 (SI): J_unit = e [C] n_ref [m^-3]
    c [m/s], n_ref [m^-3] = 1e6 n_ref [cm^-3]."""
    if not density_cm3 > 0:
        raise ValueError("density_cm3 must be > 0")
    return E_C * density_cm3 * 1.0e6 * C_M_S


def current_from_statA_cm2(j: float, density_cm3: float) -> float:
    """A current density in statA/cm^2, converted to units of e n_ref c."""
    return j / current_unit_statA_cm2(density_cm3)


def current_from_A_m2(j: float, density_cm3: float) -> float:
    """A current density in A/m^2, converted to units of e n_ref c."""
    return j / current_unit_A_m2(density_cm3)


def current_statA_cm2(j: float, density_cm3: float) -> float:
    """A current density in units of e n_ref c, converted to statA/cm^2."""
    return j * current_unit_statA_cm2(density_cm3)


def current_A_m2(j: float, density_cm3: float) -> float:
    """A current density in units of e n_ref c, converted to A/m^2."""
    return j * current_unit_A_m2(density_cm3)


def efield_statv_cm(e: float, density_cm3: float) -> float:
    """An electric field in units of m_e c omega_p / e, converted to statV/cm (Gaussian CGS):
    E [statV/cm] = E m_e c omega_p / e, with omega_p from :func:`omega_p_rad_s`."""
    return e * M_E_G * C_CM_S * omega_p_rad_s(density_cm3) / E_STATC
