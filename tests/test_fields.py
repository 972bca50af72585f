"""Field solves against analytic solutions and independent real-space stencils."""
import numpy as np
import pytest

from streamsim import fields


def test_spectral_gauss_law_analytic():
    """dE/dx = rho with rho = cos(kx) gives E = sin(kx)/k (Gauss's law, analytic)."""
    n, length = 64, 3.0
    x = np.arange(n) * length / n
    k = 2 * np.pi * 5 / length
    e = fields.solve(np.cos(k * x), fields.green_function(n, length, "spectral"))
    np.testing.assert_allclose(e, np.sin(k * x) / k, atol=1e-13)


def test_uniform_charge_is_neutralised():
    """The k = 0 part of rho gives no field (uniform neutralising background)."""
    e = fields.solve(np.full(32, 0.7), fields.green_function(32, 1.0, "spectral"))
    assert np.abs(e).max() < 1e-14


def test_finite_difference_matches_the_three_point_stencil():
    """(phi_{i+1} - 2 phi_i + phi_{i-1})/dx^2 = -rho_i, E_i = -(phi_{i+1} - phi_{i-1})/(2 dx):
    solved here as a dense periodic linear system (Birdsall & Langdon 1991, sec. 2-5)."""
    rng = np.random.default_rng(4)
    n, length = 24, 2.0
    dx = length / n
    rho = rng.normal(size=n)
    rho -= rho.mean()
    lap = (np.roll(np.eye(n), 1, axis=1) - 2 * np.eye(n) + np.roll(np.eye(n), -1, axis=1)) / dx**2
    lap[0, :] += 1.0                     # pin the constant null space: mean(phi) = 0
    phi = np.linalg.solve(lap, -rho)
    e_ref = -(np.roll(phi, -1) - np.roll(phi, 1)) / (2 * dx)
    e = fields.solve(rho, fields.green_function(n, length, "finite_difference"))
    np.testing.assert_allclose(e, e_ref, atol=1e-11)


@pytest.mark.parametrize("passes", [1, 2, 4])
def test_binomial_filter_matches_real_space_stencils(passes):
    """p passes of (1,2,1)/4 then the compensator (-p/4, 1 + p/2, -p/4), applied in real space
    (Birdsall & Langdon 1991, appendix C), equal the filter inside the solve."""
    rng = np.random.default_rng(9)
    n, length = 40, 5.0
    rho = rng.normal(size=n)
    r = rho.copy()
    for _ in range(passes):
        r = 0.25 * np.roll(r, 1) + 0.5 * r + 0.25 * np.roll(r, -1)
    r = -passes / 4 * np.roll(r, 1) + (1 + passes / 2) * r - passes / 4 * np.roll(r, -1)
    e_ref = fields.solve(r, fields.green_function(n, length, "spectral"))
    e = fields.solve(rho, fields.green_function(n, length, "spectral", smoothing_passes=passes))
    np.testing.assert_allclose(e, e_ref, atol=1e-12)


def test_field_energy_and_mode_amplitude():
    """E = A cos(k x): W = A^2 L / 4 and |E_m| = A/2 (Fourier series, analytic)."""
    n, length, a = 128, 4.0, 0.3
    x = np.arange(n) * length / n
    e = a * np.cos(2 * np.pi * 3 * x / length)
    assert fields.field_energy(e, length / n) == pytest.approx(a * a * length / 4, rel=1e-12)
    amp = np.abs(fields.mode_amplitudes(e, 5))
    assert amp[2] == pytest.approx(a / 2, rel=1e-12) and np.delete(amp, 2).max() < 1e-14
