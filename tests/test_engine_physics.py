"""Physics of the engine against outside references (each named beside its check)."""
from __future__ import annotations

import math

import numpy as np
import pytest

import streamsim
from conftest import pair_deck, plasma_deck
from streamsim.analysis.fits import fit_damped_oscillation, wave_signal
from streamsim.validation import references as ref


def _run(raw):
    return streamsim.run(raw, write=False, analyze=False, quiet=True)


def test_cold_plasma_oscillation_at_omega_p():
    """Cold plasma oscillation: omega = omega_p exactly for a cold plasma (analytic; any text,
    e.g. Chen, Introduction to Plasma Physics, sec. 4.3), as leapfrog integrates it:
    sin(omega dt/2) = omega_p dt/2 (Birdsall & Langdon 1991, ch. 4). The CIC shape factor shifts
    it by about (k dx)^2/12 = 0.08 % here (Birdsall & Langdon 1991, ch. 8): 0.2 % allowed."""
    dt = 0.05
    res = _run(plasma_deck(cells=64, ppc=16, dt=dt, end=40.0, amplitude=0.01))
    sig = wave_signal(res.series.mode_amplitude[:, 0])
    fit = fit_damped_oscillation(res.series.t, sig, 1.0, damped=False)
    assert abs(fit.omega - ref.leapfrog_frequency(1.0, dt)) < 2e-3


# Landau damping through the engine is checked in tests/test_analysis_oscillation.py (the same
# run, fitted by the analysis layer) and, at three k lambda_D, by `streamsim validate`.


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
    Birdsall & Langdon 1991, from memory). beta = 0.6 checks the relativistic longitudinal mass gamma0^3."""
    raw = pair_deck(beta=beta, cells=128, ppc=32, nwaves=8, end=60.0 if beta > 0.3 else 40.0)
    res = _run(raw)
    g0 = 1 / math.sqrt(1 - beta * beta)
    wb = math.sqrt(0.5 / g0**3)
    k8 = 2 * math.pi * 8 / res.deck.box.length
    theory = ref.cold_symmetric_growth(k8, beta, wb)
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
    scale = sum(res.deck.species[i].density * abs(res.deck.species[i].drift_u)
                for i in range(2)) * res.deck.box.length
    assert np.max(np.abs(p - p[0])) / scale < 1e-11
    # and the run really was nonlinear: the beam lost momentum to the plasma
    beam = res.series.momentum[:, 1]
    assert abs(beam[-1] - beam[0]) / abs(beam[0]) > 0.05


def test_relativistic_push_keeps_v_below_c():
    """v = u/sqrt(1+u^2) < c for any u (special relativity): in a strongly driven run of
    beams at beta = 0.99 every particle moves each step by exactly dt v(u^{n+1/2}) (the leapfrog
    drift, Birdsall & Langdon 1991 sec. 2-4), so never more than c dt, and stays in [0, L)."""
    from streamsim.deck import load_deck
    from streamsim.engine import Simulation
    deck = load_deck(pair_deck(beta=0.99, cells=64, ppc=8, end=30.0))
    sim = Simulation(deck)
    L, dt = deck.box.length, deck.time.dt
    umax = 0.0
    for _ in range(300):
        x0 = [x.copy() for x in sim.x]
        sim.advance()
        for x_old, x, u in zip(x0, sim.x, sim.u):
            assert np.all((x >= 0) & (x < L))
            dx = (x - x_old + L / 2) % L - L / 2               # unwrapped displacement
            v = u / np.sqrt(1 + u * u)
            assert np.all(np.abs(dx) < dt)                       # |v| < c
            assert np.max(np.abs(dx - dt * v)) < 1e-9 * L
            umax = max(umax, float(np.max(np.abs(u))))
    assert umax > 5.0                                            # relativistic: u dt > c dt
