"""Density contrast, clump labelling and spectra against analytic profiles."""
import math

import numpy as np
import pytest
from scipy import special

from streamsim.analysis import clumps, contrast


def test_first_crossing_is_interpolated():
    t = np.arange(0.0, 20.0, 0.7)
    # y = t/10 reaches 1 at t = 10 exactly (linear, so interpolation is exact)
    assert contrast.first_crossing(t, t / 10.0, 1.0) == pytest.approx(10.0, abs=1e-12)
    assert contrast.first_crossing(t, 0.5 + 0 * t, 1.0) is None


def test_t_unity_in_ns_uses_the_plasma_frequency():
    t = np.linspace(0, 50, 501)
    y = np.exp(0.2 * (t - 30.0))            # crosses 1 at t = 30
    r = contrast.species_contrast(t, y, 0.3 * y, 1.0e10)
    assert r["t_unity"] == pytest.approx(30.0, abs=0.05)
    # NRL Plasma Formulary: omega_pe = 5.64e4 n^(1/2) rad/s -> 1/omega_p = 1.773e-9 s at 1e10 cm^-3
    assert r["t_unity_ns"] == pytest.approx(30.0 / 5.64e9 * 1e9, rel=2e-3)
    assert r["max"] == pytest.approx(math.exp(4.0))


def _gaussian_profile(cells, length, centres, amp, sigma):
    x = np.arange(cells) * length / cells
    n = np.ones(cells)
    for c in centres:
        d = (x - c + length / 2) % length - length / 2
        n += amp * np.exp(-d ** 2 / (2 * sigma ** 2))
    return n


def test_gaussian_clump_width_mass_position():
    L, cells, sigma, amp, thr = 40.0, 4000, 0.25, 3.0, 0.5
    n = _gaussian_profile(cells, L, [10.0, 30.0], amp, sigma)
    mean = n.mean()
    found = clumps.find_clumps(n, L, thr)
    assert len(found) == 2
    # FWHM of a Gaussian: 2 sqrt(2 ln 2) sigma (analytic); the excess over the *mean* is the
    # Gaussian lowered by (mean - 1), so use the half-height of that excess
    excess_peak = 1 + amp - mean
    half = 0.5 * excess_peak + (mean - 1)            # in units of the Gaussian
    fwhm = 2 * sigma * math.sqrt(2 * math.log(amp / half))
    for c, centre in zip(found, [10.0, 30.0]):
        assert c["width"] == pytest.approx(fwhm, rel=2e-3)
        assert c["position"] == pytest.approx(centre, abs=1e-6)
        # excess mass over the region delta n/n > thr: integral of the Gaussian between the
        # threshold points minus the mean offset (erf, analytic)
        x_t = sigma * math.sqrt(2 * math.log(amp / ((1 + thr) * mean - 1)))
        gauss = amp * sigma * math.sqrt(2 * math.pi) * special.erf(x_t / (sigma * math.sqrt(2)))
        expect = gauss - 2 * x_t * (mean - 1)
        assert c["excess"] == pytest.approx(expect, rel=5e-3)
        assert c["peak"] == pytest.approx((1 + amp) / mean - 1, rel=1e-3)


def test_clump_across_the_periodic_boundary_counts_once():
    L, cells = 10.0, 500
    n = _gaussian_profile(cells, L, [0.0], 2.0, 0.3)
    found = clumps.find_clumps(n, L, 0.5)
    assert len(found) == 1
    pos = found[0]["position"]
    assert min(pos, L - pos) < 1e-6
    lab, count = clumps.label_periodic(np.array([1, 1, 0, 0, 1, 0, 1], bool))
    assert count == 2 and lab[0] == lab[-1] and lab[4] != lab[0]


def test_density_power_spectrum_of_a_cosine():
    L, cells, m, a = 12.0, 256, 5, 0.2
    x = np.arange(cells) * L / cells
    n = 2.0 * (1 + a * np.cos(2 * math.pi * m * x / L))
    k, P = clumps.density_power_spectrum(n, L)
    # Fourier series: a cos has coefficient a/2 at +-m, so |c_m|^2 = a^2/4 (analytic)
    assert P[m] == pytest.approx(a * a / 4, rel=1e-10)
    assert np.delete(P, m).max() < 1e-25
    assert k[m] == pytest.approx(2 * math.pi * m / L)


def test_size_histogram_counts_every_clump():
    edges, counts = clumps.size_histogram([0.1, 0.15, 0.4], 0.05, 10.0)
    assert counts.sum() == 3 and edges[0] == 0.0 and edges[-1] >= 0.4
