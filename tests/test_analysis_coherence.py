"""Form factor and coherence cutoff against analytic sums and transforms."""
import math

import numpy as np
import pytest
from scipy import special

from reference_impl import form_factor_direct
from streamsim.analysis import coherence


def test_fast_sum_matches_the_direct_sum():
    rng = np.random.default_rng(21)
    L = 17.0
    x = rng.random(5000) * L
    fast = coherence.form_factor(x, L, 700)
    direct = form_factor_direct(x, L, 700)   # the definition, summed directly with numpy
    assert np.max(np.abs(fast - direct)) < 1e-10


def test_evenly_spaced_particles_vanish_off_the_lattice_harmonics():
    L, N, M = 8.0, 1000, 2500
    x = (np.arange(N) + 0.5) * L / N
    P = np.abs(coherence.form_factor(x, L, M)) ** 2
    m = np.arange(M + 1)
    on = m % N == 0
    # geometric series: sum_j e^{2 pi i m j / N} = N if N | m, else 0 (analytic)
    assert np.all(np.abs(P[on] - 1.0) < 1e-3)
    assert P[~on].max() < 1e-3
    assert P[~on].max() < 1e-20


def test_gaussian_bunch():
    L, N, sigma = 20.0, 100000, 0.2
    q = (np.arange(N) + 0.5) / N
    x = L / 2 + sigma * math.sqrt(2) * special.erfinv(2 * q - 1)   # normal quantiles
    M = 200
    P = np.abs(coherence.form_factor(x, L, M)) ** 2
    k = 2 * math.pi * np.arange(M + 1) / L
    # Fourier transform of a Gaussian: |F|^2 = exp(-k^2 sigma^2) (analytic)
    assert np.max(np.abs(P - np.exp(-(k * sigma) ** 2))) < 1e-3


def test_random_positions_sit_on_the_one_over_n_floor():
    rng = np.random.default_rng(4)
    L, N, M = 30.0, 20000, 4000
    x = rng.random(N) * L
    P = np.abs(coherence.form_factor(x, L, M)[1:]) ** 2
    # random phasor sum: <|F|^2> = 1/N, |F|^2 exponentially distributed (Goodman 1985)
    assert P.mean() * N == pytest.approx(1.0, rel=0.07)      # 4.4 sigma of a mean of 4000
    assert np.mean(P > 3.0 / N) == pytest.approx(math.exp(-3.0), abs=0.015)
    r = coherence.species_coherence(x, L, M, drop=0.5, density_cm3=1e10)
    assert r["noise_floor"] == pytest.approx(1.0 / N)
    assert r["k_cutoff"] is None          # pure noise: never a cutoff


def test_cutoff_of_a_gaussian_spectrum():
    """The production criterion (log-binned envelope, coherence.envelope_cutoff) on an exact
    Gaussian spectrum; the older coherence_cutoff is only kept for comparison, so not tested."""
    sigma = 0.1
    k = np.linspace(0.05, 60.0, 2000)
    P = np.exp(-(k * sigma) ** 2)
    c = coherence.envelope_cutoff(k, P, floor=1e-6, drop=0.5, bootstrap=0)
    # exp(-k^2 sigma^2) = 1/2 at k = sqrt(ln 2)/sigma (analytic); averaging P over a log bin
    # (8 per decade) pulls the crossing low: measured -1.3 %, checked to 4 %
    assert c["k_cutoff"] == pytest.approx(math.sqrt(math.log(2)) / sigma, rel=0.04)
    assert not c["lower_bound"] and c["status"] == "ok"
    # the same spectrum drowned in the floor (half-peak below 20x the floor): no cutoff
    assert coherence.envelope_cutoff(k, P, floor=0.5 / 20 * 1.01, drop=0.5,
                                     bootstrap=0)["k_cutoff"] is None
    # still high at the last k: only a lower bound
    assert coherence.envelope_cutoff(k, np.ones_like(k), floor=1e-6, drop=0.5,
                                     bootstrap=0)["lower_bound"]


def test_emission_frequency():
    # NRL Plasma Formulary: f_pe = 8.98e3 n^(1/2) Hz; c k/2pi at k = omega_p/c is f_pe
    assert coherence.emission_cutoff_hz(1.0, 1.0, 1e10) == pytest.approx(8.98e8, rel=1e-3)
    assert coherence.emission_cutoff_hz(3.0, 10.0, 4e10) == pytest.approx(30 * 2 * 8.98e8, rel=1e-3)
