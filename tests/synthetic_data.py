"""A synthetic RunData with analytically known content, for exercising the analysis and the
figures without the engine (tests, demos).  Nothing here is physics output: the growth rates,
clump shapes and positions are whatever the caller asks for.

- mode m's |E_m| = floor + a_m e^{g_m t}, saturating smoothly at ``saturation``
  (|E| = A x / (1 + x^4)^(1/4), x = a_m e^{g_m t} / A), with a seeded random noise floor;
- each species' density: ``bunches`` equally spaced Gaussian clumps of rms width ``sigma`` over a
  uniform background, the clump amplitude growing with the fastest mode;
- particle snapshots: the same Gaussian bunches from deterministic quantiles (no shot noise).
"""
from __future__ import annotations

import math

import numpy as np
from scipy import special

from streamsim.rundata import DensitySnapshots, ParticleSnapshot, PhaseSpace, RunData, TimeSeries

__all__ = ["saturating_exponential", "gaussian_bunch_positions", "synthetic_run"]


def saturating_exponential(t, a0, rate, saturation):
    """A x / (1 + x^4)^(1/4), x = a0 e^{rate t} / A: a pure exponential well below A, A above."""
    x = a0 * np.exp(rate * np.asarray(t, float)) / saturation
    return saturation * x / (1.0 + x ** 4) ** 0.25


def gaussian_bunch_positions(n, length, bunches, sigma, fraction=1.0, offset=0.0):
    """n positions in [0, L): a fraction in ``bunches`` equal Gaussian bunches of rms ``sigma``
    centred at offset + (j + 1/2) L / bunches (deterministic normal quantiles, inverse erf), the
    rest evenly spaced."""
    nb = int(round(n * fraction))
    per = nb // bunches
    q = (np.arange(per) + 0.5) / per
    z = math.sqrt(2.0) * special.erfinv(2.0 * q - 1.0)
    parts = [offset + (j + 0.5) * length / bunches + sigma * z for j in range(bunches)]
    rest = n - per * bunches
    if rest > 0:
        parts.append((np.arange(rest) + 0.5) * length / rest)
    return np.mod(np.concatenate(parts), length)


def synthetic_run(*, names=("electrons", "positrons"), length=20.0, cells=128, modes=16,
                  t_end=60.0, dt_diag=0.1, rates=None, fastest=4, a0=1e-7, floor=1e-6,
                  saturation=1e-1, bunches=4, sigma=0.3, contrast_peak=3.0,
                  particles=40000, bunched_fraction=0.6, density_cm3=1.0e10, seed=1,
                  analysis=None) -> RunData:
    """Build the RunData described in the module docstring.  ``rates[m-1]`` is mode m's growth
    (default: a parabola peaking at mode ``fastest`` with 0.35, negative outside 1..2 fastest)."""
    rng = np.random.default_rng(seed)
    t = np.arange(0.0, t_end + 1e-9, dt_diag)
    m = np.arange(1, modes + 1)
    if rates is None:
        rates = 0.35 * (1.0 - ((m - fastest) / fastest) ** 2)
    rates = np.asarray(rates, float)
    amp = np.empty((t.size, modes), complex)
    for j in range(modes):
        g = rates[j]
        clean = saturating_exponential(t, a0, g, saturation) if g > 0 else a0 * np.exp(g * t)
        noise = floor * (rng.standard_normal(t.size) + 1j * rng.standard_normal(t.size)) / math.sqrt(2)
        amp[:, j] = clean + noise
    field_energy = 0.5 * length * 2.0 * np.sum(np.abs(amp) ** 2, axis=1)
    S = len(names)
    x = (np.arange(cells)) * length / cells
    grow = saturating_exponential(t, a0, rates.max(), saturation) / saturation  # 0 -> 1

    def profile(level, shift):
        d = np.zeros(cells)
        for j in range(bunches):
            c = shift + (j + 0.5) * length / bunches
            dd = (x - c + length / 2) % length - length / 2
            d += np.exp(-dd ** 2 / (2 * sigma ** 2))
        d = d - d.mean()
        d = d / d.max()
        return 1.0 + level * d

    offsets = [s * length / (2 * bunches) for s in range(S)]
    n_f = 13
    tf = np.linspace(0, t_end, n_f)
    gf = saturating_exponential(tf, a0, rates.max(), saturation) / saturation
    dens = np.empty((n_f, S, cells))
    for i in range(n_f):
        for s in range(S):
            dens[i, s] = (1.0 / S) * profile(contrast_peak * gf[i], offsets[s])
    cmax = np.empty((t.size, S + 1))
    crms = np.empty((t.size, S + 1))
    base = profile(1.0, 0.0) - 1.0
    for s in range(S):
        cmax[:, s] = contrast_peak * grow * base.max()
        crms[:, s] = contrast_peak * grow * base.std()
    cmax[:, S] = 0.5 * cmax[:, 0]
    crms[:, S] = 0.5 * crms[:, 0]
    kin = np.full((t.size, S), 1.0) - field_energy[:, None] / S
    mom = np.zeros((t.size, S))
    series = TimeSeries(t=t, kinetic=kin, field_energy=field_energy, momentum=mom,
                        mode_amplitude=amp, contrast_max=cmax, contrast_rms=crms)
    snaps = DensitySnapshots(t=tf, density=dens, efield=np.zeros((n_f, cells)))
    n_p = 4
    tp = np.linspace(0, t_end, n_p)
    ps = PhaseSpace(t=tp, x={nm: np.tile(np.linspace(0, length, 200, endpoint=False), (n_p, 1))
                             for nm in names},
                    u={nm: 0.1 * (-1) ** s * np.ones((n_p, 200)) for s, nm in enumerate(names)})

    def snap(tt):
        return ParticleSnapshot(
            t=float(tt),
            x={nm: gaussian_bunch_positions(particles, length, bunches, sigma, bunched_fraction,
                                            offsets[s]) for s, nm in enumerate(names)},
            weight={nm: 1.0 / (S * particles) for nm in names})

    k = 2 * math.pi * m / length
    from streamsim.deck import load_deck
    from streamsim.theory import BoxMode, Dispersion, FastestMode
    grows = rates > 0
    theory = Dispersion(
        model="synthetic (prescribed rates)", k=k, growth=np.maximum(rates, 0.0),
        omega_r=np.zeros_like(k),
        fastest=FastestMode(float(k[np.argmax(rates)]), float(rates.max()), 0.0),
        unstable_band=(float(k[grows].min()), float(k[grows].max())) if grows.any() else None,
        unstable_bands=[], box_modes=[BoxMode(int(mm), float(kk), float(g), 0.0)
                                      for mm, kk, g in zip(m, k, rates)],
        box_length=length, density_cm3=density_cm3)
    deck = load_deck({
        "title": "synthetic", "units": {"density_cm3": density_cm3},
        "box": {"length": length, "cells": cells}, "time": {"dt": 0.05, "end": float(t_end)},
        "species": [{"name": nm, "charge": (-1.0) ** (s + 1), "mass": 1.0, "density": 1.0 / S,
                     "particles_per_cell": 1} for s, nm in enumerate(names)],
        "output": {"recorded_modes": modes},
        "analysis": analysis or {"clump_threshold": 0.5, "coherence_drop": 0.5,
                                 "coherence_kmax_factor": 4.0, "bulk_gamma": 1.0,
                                 "energy_tolerance": 0.01}})
    return RunData(deck=deck, names=list(names), length=length, cells=cells, dt=0.05,
                   series=series, snapshots=snaps, phase_space=ps, peak=snap(t[-1] * 0.8),
                   end=snap(t[-1]), theory=theory)
