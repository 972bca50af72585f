"""4. Cold symmetric two-stream: growth across the unstable band against the cold root."""
from __future__ import annotations

import math

import numpy as np

from .. import references as ref
from ..checks import Check
from ._common import GROWTH_TOL, GROWTH_WHY, Outcome, Problem, fit_growth, pair_deck

QUICK = {"ts_x": (0.5, 0.866, 1.1, 1.3), "ts_cells": 64, "ts_ppc": 32}
FULL = {"ts_x": (0.3, 0.5, 0.7, 0.866, 1.0, 1.1, 1.2, 1.3, 1.38), "ts_cells": 128,
        "ts_ppc": 256}

TS_BETA = 0.1


def measure(p, run) -> Outcome:
    from streamsim import theory
    from streamsim.deck import load_deck
    g0 = 1.0 / math.sqrt(1.0 - TS_BETA**2)
    wb = math.sqrt(0.5 / g0**3)
    u0 = g0 * TS_BETA
    checks, pts = [], []
    theory_dev = 0.0
    for x in p["ts_x"]:
        k = x * wb / TS_BETA
        g_ref = ref.cold_symmetric_growth(k, TS_BETA, wb)
        raw = pair_deck(drift_u=u0, length=2 * math.pi / k, cells=p["ts_cells"], ppc=p["ts_ppc"],
                        dt=0.05, end=min(400.0, 16.0 / g_ref), amplitude=1e-4)
        res = run(raw)
        rate, err, fit = fit_growth(res.series.t, np.abs(res.series.mode_amplitude[:, 0]))
        pts.append({"x": x, "k": k, "growth": rate, "error": err, "reference": g_ref})
        checks.append(Check("cold two-stream", f"growth/omega_p at k v0/omega_b = {x:g}",
                            rate, err, g_ref, "cold symmetric-beam root (Birdsall & Langdon 1991 "
                            "sec. 5-10)", GROWTH_TOL, "relative", why=GROWTH_WHY))
        w = theory.cold_roots([k], load_deck(raw).species)[0]
        theory_dev = max(theory_dev, abs(float(np.max(w.imag)) - g_ref) / g_ref)
    checks.append(Check("cold two-stream", "streamsim.theory cold roots: max |dg|/g",
                        theory_dev, None, 0.0, "the closed-form root above", 1e-6, "absolute",
                        why="the same polynomial: only rounding separates them"))
    xs = np.linspace(0.01, 1.45, 150)
    return Outcome(checks, {"points": pts, "x": xs.tolist(), "omega_b": wb,
                            "curve": [ref.cold_symmetric_growth(x * wb / TS_BETA, TS_BETA, wb)
                                      for x in xs]})


PROBLEM = Problem(
    "two_stream", "Cold symmetric two-stream",
    "Counter-streaming cold e⁻/e⁺ beams at ±0.1 c in a box of one wavelength, one run per "
    "k across the unstable band; the fitted growth of |E_1| is compared with the cold "
    "root. The maximum is ω_b/2 at k v₀ = (√3/2) ω_b.",
    "ω² = k²v₀² + ω_b² − ω_b √(ω_b² + 4k²v₀²),  ω_b² = ω_pb²/γ₀³",
    "textbook cold-beam result, e.g. Birdsall & Langdon 1991, sec. 5-10",
    measure, {"quick": QUICK, "full": FULL})
