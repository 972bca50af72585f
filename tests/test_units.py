"""Physical units against the NRL Plasma Formulary (handbook values)."""
import math

import pytest

from streamsim import units


def test_omega_pe_matches_nrl_formulary():
    """NRL Plasma Formulary: omega_pe = 5.64e4 n_e^(1/2) rad/s (n_e in cm^-3)."""
    assert units.omega_p_rad_s(1e10) == pytest.approx(5.64e9, rel=1e-3)
    assert units.omega_p_rad_s(4e12) == pytest.approx(5.64e4 * math.sqrt(4e12), rel=1e-3)


def test_skin_depth_matches_nrl_formulary():
    """NRL Plasma Formulary: electron inertial length c/omega_pe = 5.31e5 n_e^(-1/2) cm."""
    assert units.skin_depth_cm(1e10) == pytest.approx(5.31e5 / 1e5, rel=1e-3)


def test_cgs_constants_from_codata():
    """CODATA (scipy.constants) in CGS: e = 4.803e-10 statC, m_e = 9.109e-28 g, c = 2.998e10 cm/s
    (NRL Plasma Formulary, physical constants)."""
    assert units.E_STATC == pytest.approx(4.8032e-10, rel=1e-4)
    assert units.M_E_G == pytest.approx(9.1094e-28, rel=1e-4)
    assert units.C_CM_S == pytest.approx(2.9979e10, rel=1e-4)


def test_time_scales_as_inverse_sqrt_density():
    """omega_p ∝ n^(1/2) (definition): a 4x denser plasma has half the time unit."""
    assert units.time_ns(1.0, 4e10) == pytest.approx(units.time_ns(1.0, 1e10) / 2, rel=1e-12)
    assert units.plasma_period_ns(1e10) == pytest.approx(2 * math.pi / 5.64e9 * 1e9, rel=1e-3)
