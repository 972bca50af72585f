"""Growth-window fits on signals whose answer is known analytically (their construction)."""
import math

import numpy as np
import pytest

from streamsim.analysis import growth
from synthetic_data import saturating_exponential

RATE = 0.35
FLOOR = 1e-6
A0 = 1e-7
ASAT = 1e-1


def _signal(seed, rate=RATE, t_end=80.0, dt=0.05):
    rng = np.random.default_rng(seed)
    t = np.arange(0.0, t_end, dt)
    clean = saturating_exponential(t, A0, rate, ASAT)
    noise = FLOOR * (1 + 0.3 * rng.standard_normal(t.size)) * np.exp(2j * np.pi * rng.random(t.size))
    return t, np.abs(clean + noise)


@pytest.mark.parametrize("seed", [0, 1, 2, 3])
def test_recovers_rate_and_window_edges(seed):
    t, s = _signal(seed)
    fit = growth.find_linear_phase(t, s)
    assert fit is not None
    # analytic: the signal is A0 exp(RATE t) between the floor and the plateau (its construction)
    assert fit.rate == pytest.approx(RATE, rel=0.01)
    t_floor = math.log(FLOOR / A0) / RATE      # exponential meets the noise floor
    t_sat = math.log(ASAT / A0) / RATE         # exponential meets the plateau
    assert t_floor <= fit.t0 <= t_floor + 3.0 / RATE
    assert t_sat - 3.0 / RATE <= fit.t1 <= t_sat + 1.0 / RATE
    assert fit.efolds >= 3.0
    # the error bar is honest about the bias from the bent ends (within ~3 sigma incl. syst.)
    assert abs(fit.rate - RATE) <= 3.0 * math.hypot(fit.rate_err, fit.systematic)


def test_noise_and_plateau_give_no_linear_phase():
    rng = np.random.default_rng(5)
    t = np.arange(0.0, 60.0, 0.05)
    noise = np.abs(FLOOR * (rng.standard_normal(t.size) + 1j * rng.standard_normal(t.size)))
    assert growth.find_linear_phase(t, noise) is None
    assert growth.find_linear_phase(t, np.full(t.size, 0.1)) is None
    # a decaying signal is not growth
    assert growth.find_linear_phase(t, np.exp(-0.3 * t)) is None
    # too short a rise: 2 e-folds between floor and plateau (< 3 required)
    short = np.minimum(1e-3 * np.exp(0.2 * t), 1e-3 * math.e ** 2) + noise
    assert growth.find_linear_phase(t, short) is None


def test_effective_sample_size_ar1():
    # Bretherton et al. 1999, J. Climate 12, 1990, eq. 31: n_eff = n (1 - rho)/(1 + rho) for AR(1)
    rng = np.random.default_rng(11)
    n, rho = 40000, 0.8
    e = rng.standard_normal(n)
    x = np.empty(n)
    x[0] = e[0]
    for i in range(1, n):
        x[i] = rho * x[i - 1] + e[i]
    assert growth.effective_sample_size(x) / n == pytest.approx((1 - rho) / (1 + rho), rel=0.05)
    assert growth.effective_sample_size(rng.standard_normal(n)) / n == pytest.approx(1.0, rel=0.05)


def test_field_energy_grows_at_twice_the_rate():
    t, s = _signal(7)
    fe = growth.fit_field_energy(t, s ** 2, theory_growth=RATE)
    # W_E ~ |E|^2: twice the amplitude rate (analytic)
    assert fe["measured"] == pytest.approx(2 * RATE, rel=0.01)
    assert fe["amplitude_rate"] == pytest.approx(RATE, rel=0.01)
    assert fe["ratio"] == pytest.approx(1.0, rel=0.01)


def test_modes_compare_with_theory_and_flag_driven_growth():
    t, s1 = _signal(1)
    _, s2 = _signal(2, rate=2 * RATE)   # a mode growing at twice the fastest linear rate
    rng = np.random.default_rng(3)
    s3 = np.abs(FLOOR * (rng.standard_normal(t.size) + 1j * rng.standard_normal(t.size)))
    amp = np.stack([s1, s2, s3], axis=1)
    rates = {1: RATE, 2: 0.1, 3: -0.2}
    rows = growth.fit_modes(t, amp, 2 * math.pi, rates, g_max=RATE)
    assert rows[0]["ratio"] == pytest.approx(1.0, rel=0.01)
    # faster than any linear root of the theory: not a linear phase (the fastest root bounds it)
    assert rows[1]["measured"] is None and "driven" in rows[1]
    assert rows[1]["status"].startswith(growth.NO_PHASE)
    assert rows[2]["measured"] is None and rows[2]["status"] == growth.NO_PHASE
    assert [r["k"] for r in rows] == pytest.approx([1.0, 2.0, 3.0])  # k_m = 2 pi m / L, L = 2 pi
