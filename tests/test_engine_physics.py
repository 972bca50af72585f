"""Physics of the engine against outside references (each named beside its check)."""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import curve_fit, newton
from scipy.special import wofz

import streamsim
from conftest import pair_deck, plasma_deck


def _run(raw):
    return streamsim.run(raw, write=False, analyze=False, quiet=True)


def test_cold_plasma_oscillation_at_omega_p():
    """Cold plasma oscillation: omega = omega_p exactly for a cold plasma (analytic; any text,
    e.g. Chen, Introduction to Plasma Physics, sec. 4.3). Leapfrog adds (omega dt)^2/24 and the
    CIC shape factor sinc^2(k dx/2) shifts it by < 0.2% here."""
    res = _run(plasma_deck(cells=64, ppc=16, dt=0.05, end=40.0, amplitude=0.01))
    t = res.series.t
    e1 = res.series.mode_amplitude[:, 0]
    sig = e1.imag if np.abs(e1.imag).max() > np.abs(e1.real).max() else e1.real
    f = lambda t, a, w, p: a * np.cos(w * t + p)
    a0 = np.abs(sig).max()
    popt, _ = curve_fit(f, t, sig, p0=[a0, 1.0, 0.0])
    assert abs(abs(popt[1]) - 1.0) < 0.01


def _landau_root(k_lambda):
    """Independent root of 1 + (1 + zeta Z(zeta)) / (k lambda_D)^2 = 0, zeta = omega/(sqrt2 k v_th),
    Z(zeta) = i sqrt(pi) w(zeta) (Fried & Conte 1961; scipy.special.wofz)."""
    def eps(w):
        z = w / (math.sqrt(2) * k_lambda)
        return 1 + (1 + z * 1j * math.sqrt(math.pi) * wofz(z)) / k_lambda**2
    guess = math.sqrt(1 + 3 * k_lambda**2) - 0.1j
    return newton(eps, guess, tol=1e-12, maxiter=200)


def test_landau_reference_root_is_the_published_one():
    """Published: omega = 1.4157 - 0.1534 i omega_p at k lambda_D = 0.5 (widely tabulated
    Landau root of the Maxwellian dispersion relation; re-derived here with scipy's wofz)."""
    w = _landau_root(0.5)
    assert abs(w.real - 1.4157) < 5e-4 and abs(w.imag + 0.1534) < 5e-4


def test_landau_damping_k_lambda_half():
    """Landau damping at k lambda_D = 0.5: frequency within 2% of 1.4157 omega_p and damping
    within 10% of 0.1534 omega_p (root of the Maxwellian dispersion relation, checked above)."""
    ref = _landau_root(0.5)
    theta = 1.0e-4                       # v_th = 0.01 c: relativistic corrections ~1e-4
    vth = math.sqrt(theta)
    k = 0.5 / vth
    raw = plasma_deck(cells=32, length=2 * math.pi / k, ppc=4000, theta=theta, dt=0.02, end=25.0,
                      amplitude=0.02)
    res = _run(raw)
    t = res.series.t
    e1 = res.series.mode_amplitude[:, 0]
    sig = e1.imag if np.abs(e1.imag).max() > np.abs(e1.real).max() else e1.real
    sel = (t > 2.0) & (t < 22.0)
    f = lambda t, a, g, w, p: a * np.exp(-g * t) * np.cos(w * t + p)
    popt, _ = curve_fit(f, t[sel], sig[sel], p0=[np.abs(sig).max(), 0.15, 1.4, 0.0])
    assert abs(abs(popt[2]) - ref.real) / ref.real < 0.02
    assert abs(popt[1] - (-ref.imag)) / (-ref.imag) < 0.10


def _cold_symmetric_growth(k, v0, wb):
    """Symmetric cold beams: eps = 1 - wb^2/(w - kv)^2 - wb^2/(w + kv)^2 = 0 gives
    w^2 = k^2v^2 + wb^2 - wb sqrt(wb^2 + 4 k^2 v^2); growth = sqrt(-w^2) where negative
    (textbook, e.g. Birdsall & Langdon 1991, sec. 5-10)."""
    w2 = (k * v0) ** 2 + wb**2 - wb * math.sqrt(wb**2 + 4 * (k * v0) ** 2)
    return math.sqrt(-w2) if w2 < 0 else 0.0


def _fit_window(t, amp, lo_factor=30.0, hi_factor=0.1):
    """Straight fit of log amp between lo_factor x its start and hi_factor x its maximum."""
    a0, amax = amp[:5].mean(), amp.max()
    imax = int(np.argmax(amp))
    i0 = int(np.argmax(amp[:imax] > lo_factor * a0))
    i1 = int(np.argmax(amp[:imax] > hi_factor * amax))
    assert i1 - i0 > 20, "no clean linear phase"
    return np.polyfit(t[i0:i1], np.log(amp[i0:i1]), 1)[0]


@pytest.mark.parametrize("beta", [0.1, 0.6])
def test_cold_two_stream_fastest_box_mode(beta):
    """Cold symmetric two-stream: growth of the fastest box mode within 5% of the cold root at
    that mode's k (max growth omega_b/2 at k v0 = (sqrt3/2) omega_b, omega_b^2 = omega_pb^2/gamma0^3;
    textbook). beta = 0.6 checks the relativistic longitudinal mass gamma0^3."""
    raw = pair_deck(beta=beta, cells=128, ppc=32, nwaves=8, end=60.0 if beta > 0.3 else 40.0)
    res = _run(raw)
    g0 = 1 / math.sqrt(1 - beta * beta)
    wb = math.sqrt(0.5 / g0**3)
    k8 = 2 * math.pi * 8 / res.deck.box.length
    theory = _cold_symmetric_growth(k8, beta, wb)
    assert abs(theory - wb / 2) / (wb / 2) < 1e-9     # the box holds the fastest mode exactly
    measured = _fit_window(res.series.t, np.abs(res.series.mode_amplitude[:, 7]))
    assert abs(measured - theory) / theory < 0.05


def test_energy_conserved_thermal_plasma():
    """Thermal plasma with lambda_D/dx >= 0.5: |dW|/W < 1e-3 over 100/omega_p (common practice).
    Random loading with 3200 particles per cell (1600 per Debye length): numerical heating of
    momentum-conserving PIC falls as 1/N_D (Hockney 1971, J. Comput. Phys. 8, 19), and at this
    N_D it is well below the bound."""
    theta = 1.0e-4
    lam = math.sqrt(theta)
    cells = 64
    raw = plasma_deck(cells=cells, length=cells * lam / 0.5, ppc=3200, theta=theta, dt=0.1,
                      end=100.0, amplitude=0.0, modes=(), loading="random", diag=0.5)
    res = _run(raw)
    w = res.series.total_energy
    assert np.max(np.abs(w - w[0])) / w[0] < 1e-3


@pytest.mark.parametrize("shape", ["ngp", "cic", "tsc"])
@pytest.mark.parametrize("solver", ["spectral", "finite_difference"])
def test_momentum_conserved_to_roundoff(shape, solver):
    """With the gather using the deposit's weights and an odd Green's function the total force
    vanishes, so momentum is conserved to round-off (Birdsall & Langdon 1991, sec. 8-6).
    An asymmetric weak beam (beam-plasma instability), seeded by random-loading noise, drives
    a strongly nonlinear state."""
    raw = pair_deck(beta=0.2, cells=64, ppc=16, end=40.0, shape=shape, loading="random")
    raw["box"]["solver"] = solver
    raw["species"][0]["density"] = 0.9
    raw["species"][0]["drift_beta"] = 0.0
    raw["species"][1].update(density=0.1, charge=-1.0, drift_beta=0.3, name="beam")
    raw["perturbation"]["amplitude"] = 1e-3
    res = _run(raw)
    p = res.series.total_momentum
    scale = sum(res.data.deck["species"][i]["density"] * abs(res.deck.species[i].drift_u)
                for i in range(2)) * res.deck.box.length
    assert np.max(np.abs(p - p[0])) / scale < 1e-11
    # and the run really was nonlinear: the beam lost momentum to the plasma
    beam = res.series.momentum[:, 1]
    assert abs(beam[-1] - beam[0]) / abs(beam[0]) > 0.05


def test_relativistic_push_keeps_v_below_c():
    """v = u/sqrt(1+u^2) < c for any u (special relativity): a strongly driven run stays in
    the box with finite momenta."""
    raw = pair_deck(beta=0.99, cells=64, ppc=8, end=30.0)
    res = _run(raw)
    for u in res.u.values():
        assert np.isfinite(u).all()
