"""1. Plasma oscillation: a cold plasma rings at omega_p, as leapfrog integrates it."""
from __future__ import annotations

import math

from .. import references as ref
from ..checks import Check
from ._common import Outcome, Problem, fit_wave, plasma_deck

QUICK = {"osc_cells": 512, "osc_end": 100.0}
FULL = {"osc_cells": 1024, "osc_end": 200.0}

OSC_AMPLITUDE = 1e-3     # delta n/n: velocity amplitude 1e-3 c, relativistic shift ~1e-7


def oscillation_run(run, p, dt):
    """(t, Im E_1(t), DampedFit of a pure cosine) of the cold plasma at time step dt."""
    from streamsim.analysis.fits import wave_signal
    raw = plasma_deck(cells=p["osc_cells"], length=2 * math.pi, ppc=2, dt=dt,
                      end=p["osc_end"], amplitude=OSC_AMPLITUDE)
    res = run(raw)
    sig = wave_signal(res.series.mode_amplitude[:, 0])
    return res.series.t, sig, fit_wave(res.series.t, sig, ref.leapfrog_frequency(1.0, dt),
                                       damped=False)


def measure(p, run) -> Outcome:
    dt = 0.05
    t, sig, fit = oscillation_run(run, p, dt)
    w_ref = ref.leapfrog_frequency(1.0, dt)
    checks = [Check("plasma oscillation", f"omega/omega_p (cold, k = 1, dt = {dt})",
                    fit.omega if fit else None, fit.omega_err if fit else None, w_ref,
                    "omega = omega_p (cold plasma, Chen sec. 4.3) with leapfrog "
                    "sin(omega dt/2) = omega_p dt/2 (Birdsall & Langdon 1991 ch. 4)",
                    5e-5, "absolute",
                    why="the CIC shape factor and its aliases shift omega by about (k dx)^2/12 "
                        "= 1.3e-5 at k dx = 2 pi/512 (Birdsall & Langdon 1991 ch. 8); 5e-5 "
                        "leaves a factor 4 (common practice)")]
    return Outcome(checks, {"t": t[::4].tolist(), "signal": sig[::4].tolist(),
                            "omega": fit.omega if fit else None, "dt": dt})


PROBLEM = Problem(
    "plasma_oscillation", "Plasma oscillation",
    "A cold electron plasma is displaced in one long-wavelength mode and left to ring, "
    "and the fitted frequency of E_1(t) is compared with ω_p as leapfrog integrates it. "
    "Any error in charge, mass, deposit, field solve or push moves this frequency.",
    "sin(ω Δt/2) = ω_p Δt/2, i.e. ω = ω_p (1 + (ω_p Δt)²/24 + …)",
    "cold-plasma oscillation (Chen, Introduction to Plasma Physics, sec. 4.3); leapfrog "
    "dispersion (Birdsall & Langdon 1991, ch. 4)", measure, {"quick": QUICK, "full": FULL})
