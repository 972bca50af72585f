"""What the validation problems share: the deck runner, the small invented decks, the fits, and
the Problem/Outcome records.

Measurement conventions:
- growth rates: :func:`streamsim.analysis.growth.find_linear_phase` on |E_m|(t); the error is
  the fit's standard error (corrected for correlated residuals) combined in quadrature with its
  half-window systematic spread;
- frequencies and damping rates: :func:`streamsim.analysis.fits.fit_damped_oscillation` on
  Im E_m(t), the component that carries a seeded standing wave; standard errors from the
  curve_fit covariance inflated for correlated residuals (Bretherton et al. 1999), the same rule
  as the growth fit;
- warm-plasma waves: the field of a run with the seeded wave minus the field of the same run
  without it. The quiet start is deterministic, so both runs hold the same particle noise, which
  cancels in the difference to first order; the seeded wave's own second-order terms fall on
  other wavenumbers (2k, 0). This lets a small, strictly linear wave be measured far below the
  thermal noise of the particle count.
"""
from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from ..checks import Check

#: the validation levels, in the order the CLI offers them
LEVEL_NAMES = ("quick", "full")

#: relative tolerance of a fitted growth rate against its root (see the ``why`` texts)
GROWTH_TOL = 0.03
GROWTH_WHY = ("common practice for a rate fitted over >= 4 e-folds of a quiet-start run: the "
              "decaying companion root and the onset of saturation bend ln|E| by ~1 % at the "
              "window ends; the CIC shape factor and leapfrog shift the rate by < 0.2 % here")

#: temperature of the warm validation plasma: v_th = 0.01 c, relativistic corrections ~ theta
THETA_WARM = 1.0e-4


# --------------------------------------------------------------------------------------------
# Running decks
# --------------------------------------------------------------------------------------------
class Runner:
    """Runs decks in memory (``pipeline.run(write=False)``) and caches them for the whole validation,
    so a problem may reuse another's run (same deck dict, same result)."""

    def __init__(self):
        self.cache: dict[str, object] = {}
        self.runs = 0
        self.particle_steps = 0

    def __call__(self, raw: dict):
        key = json.dumps(raw, sort_keys=True)
        if key not in self.cache:
            from streamsim.pipeline import run
            res = run(raw, write=False, analyze=False, quiet=True)
            self.cache[key] = res
            self.runs += 1
            self.particle_steps += int(res.summary.get("particles", 0)) * int(res.summary.get("steps", 0))
        return self.cache[key]


def _output(dt: float, modes: int, end: float) -> dict:
    """Every step recorded (fits want it); density snapshots and phase space only at the ends."""
    return {"diagnostics_interval": dt, "recorded_modes": modes, "phase_space_particles": 0,
            "fields_interval": end, "phase_space_interval": end}


def plasma_deck(*, cells, length, ppc, theta=0.0, dt=0.05, end=20.0, modes=(1,), amplitude=0.0,
                loading="quiet", seed=1, out_modes=None) -> dict:
    """Electrons on a neutralising background (invented validation plasma, n = n_ref)."""
    sp = {"name": "electrons", "charge": -1.0, "mass": 1.0, "density": 1.0,
          "particles_per_cell": ppc, "loading": loading}
    if theta > 0:
        sp.update(theta=theta, distribution="juttner")
    return {"title": "validation plasma", "random_seed": seed,
            "box": {"length": length, "cells": cells, "shape": "cic"},
            "time": {"dt": dt, "end": end}, "species": [sp],
            "perturbation": {"modes": list(modes) if amplitude > 0 else [],
                             "amplitude": amplitude},
            "output": _output(dt, out_modes or max(list(modes) + [1]), end)}


def pair_deck(*, drift_u, length, cells, ppc, dt, end, mode=1, amplitude=1e-4, theta=0.0,
              loading="quiet", seed=1) -> dict:
    """Symmetric e-/e+ beams at +-drift_u, each with half the reference density (invented)."""
    species = []
    for name, q, u in (("electrons", -1.0, drift_u), ("positrons", 1.0, -drift_u)):
        sp = {"name": name, "charge": q, "mass": 1.0, "density": 0.5, "drift_u": u,
              "particles_per_cell": ppc, "loading": loading}
        if theta > 0:
            sp.update(theta=theta, distribution="juttner")
        species.append(sp)
    return {"title": "validation pair beams", "random_seed": seed,
            "box": {"length": length, "cells": cells, "shape": "cic"},
            "time": {"dt": dt, "end": end}, "species": species,
            "perturbation": {"modes": [mode], "amplitude": amplitude, "species": ["electrons"]},
            "output": _output(dt, max(2, mode), end)}


def warm_difference(run, raw, modes):
    """Mode fields of a seeded run minus those of the same run unseeded (see module docstring)."""
    seeded = run(raw)
    quiet = dict(raw)
    quiet["perturbation"] = {"modes": [], "amplitude": 0.0}
    base = run(quiet)
    e = seeded.series.mode_amplitude - base.series.mode_amplitude
    return seeded.series.t, e[:, [m - 1 for m in modes]], seeded, base


# --------------------------------------------------------------------------------------------
# Measurements
# --------------------------------------------------------------------------------------------
def fit_wave(t, sig, omega_guess, rate_guess=0.0, damped=True):
    """The damped-cosine fit of the analysis (:func:`streamsim.analysis.fits.
    fit_damped_oscillation`) over all of (t, sig): a DampedFit, or None."""
    from streamsim.analysis.fits import fit_damped_oscillation
    return fit_damped_oscillation(t, sig, omega_guess, rate_guess, damped=damped)


def fit_growth(t, amplitude):
    """(rate, error, fit) from the linear phase of |E_m|(t) (growth.find_linear_phase)."""
    from streamsim.analysis.growth import find_linear_phase
    fit = find_linear_phase(t, amplitude)
    if fit is None:
        return None, None, None
    return fit.rate, math.hypot(fit.rate_err, fit.systematic), fit


def fit_power_law(x, y, yerr=None):
    """Slope and standard error of ln y against ln x (weighted least squares if yerr given)."""
    lx, ly = np.log(np.asarray(x, float)), np.log(np.asarray(y, float))
    if yerr is not None:
        w = 1.0 / np.maximum(np.asarray(yerr, float) / np.asarray(y, float), 1e-12) ** 2
    else:
        w = np.ones_like(lx)
    A = np.vstack([lx, np.ones_like(lx)]).T * np.sqrt(w)[:, None]
    b = ly * np.sqrt(w)
    coef, *_ = np.linalg.lstsq(A, b, rcond=None)
    res = b - A @ coef
    dof = max(len(lx) - 2, 1)
    cov = np.linalg.inv(A.T @ A) * (float(res @ res) / dof if yerr is None
                                    else max(float(res @ res) / dof, 1.0))
    return float(coef[0]), float(math.sqrt(cov[0, 0])), float(coef[1])


# --------------------------------------------------------------------------------------------
# Problem plumbing
# --------------------------------------------------------------------------------------------
@dataclass
class Outcome:
    checks: list[Check]
    data: dict = field(default_factory=dict)     # what the figure needs (plain lists/floats)
    seconds: float = 0.0
    error: str | None = None


@dataclass(frozen=True)
class Problem:
    key: str
    title: str
    explanation: str            # two sentences: what is run and what it is compared with
    equation: str               # the reference equation (Markdown/LaTeX-light)
    source: str                 # where the reference comes from
    measure: Callable[[dict, Runner], Outcome]
    params: dict = field(default_factory=dict)   # {level: the parameters measure() reads}
