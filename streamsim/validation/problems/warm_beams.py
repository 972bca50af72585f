"""7. Warm drifting-Juttner pair beams: growth against the kinetic (relativistic Vlasov) root."""
from __future__ import annotations

import math

import numpy as np

from .. import references as ref
from ..checks import Check
from ._common import Outcome, Problem, fit_growth, pair_deck

QUICK = {"wj_k": (0.6, 0.8), "wj_cells": 64, "wj_ppc": 256}
FULL = {"wj_k": (0.6, 0.7, 0.8, 0.9, 1.0), "wj_cells": 128, "wj_ppc": 2048}

WJ_U = 1.0
WJ_THETA = 0.1
WJ_TOL = 0.05


def juttner_deck(p, k):
    g = ref.symmetric_juttner_growth(k, 0.5, WJ_U, WJ_THETA, upper=0.3)
    raw = pair_deck(drift_u=WJ_U, length=2 * math.pi / k, cells=p["wj_cells"], ppc=p["wj_ppc"],
                    dt=0.05, end=min(400.0, 20.0 / g) if g else 100.0, amplitude=1e-4,
                    theta=WJ_THETA)
    return raw, g


def measure(p, run) -> Outcome:
    from streamsim import theory
    from streamsim.deck import load_deck
    checks, pts = [], []
    theory_dev = 0.0
    for k in p["wj_k"]:
        raw, g_ref = juttner_deck(p, k)
        res = run(raw)
        rate, err, fit = fit_growth(res.series.t, np.abs(res.series.mode_amplitude[:, 0]))
        wb_cold = math.sqrt(0.5 / (1 + WJ_U**2) ** 1.5)
        g_cold = ref.cold_symmetric_growth(k, WJ_U / math.sqrt(1 + WJ_U**2), wb_cold)
        pts.append({"k": k, "growth": rate, "error": err, "reference": g_ref, "cold": g_cold})
        checks.append(Check("warm Juttner beams", f"growth/omega_p at k = {k:g} omega_p/c",
                            rate, err, g_ref if g_ref else 0.0,
                            "kinetic root: relativistic Vlasov chi by scipy quad, Juttner f",
                            WJ_TOL, "relative",
                            why="a warm quiet start samples the tails with a finite particle "
                                "count, and ln|E| starts from the seeded mode's kinetic "
                                "transient: 5 % (common practice); the cold root differs from "
                                "the kinetic one by more than that at each k (see note), so "
                                "the check sees the kinetic physics",
                            note=f"the cold root at this k would be {g_cold:.4g}"))
        w = theory.juttner_growing_root(k, load_deck(raw).species)
        theory_dev = max(theory_dev, abs((w.imag if w is not None else 0.0) - (g_ref or 0.0))
                         / (g_ref or 1.0))
    checks.append(Check("warm Juttner beams", "streamsim.theory Juttner roots: max |dg|/g",
                        theory_dev, None, 0.0, "independent quadrature above", 1e-5, "absolute",
                        why="two quadratures of one integral: quadrature tolerance only"))
    ks = np.linspace(0.1, 1.15, 43)
    curve = [ref.symmetric_juttner_growth(x, 0.5, WJ_U, WJ_THETA, upper=0.3) or 0.0 for x in ks]
    wb_cold = math.sqrt(0.5 / (1 + WJ_U**2) ** 1.5)
    cold = [ref.cold_symmetric_growth(x, WJ_U / math.sqrt(1 + WJ_U**2), wb_cold) for x in ks]
    return Outcome(checks, {"points": pts, "k": ks.tolist(), "curve": curve, "cold": cold})


PROBLEM = Problem(
    "warm_beams", "Warm drifting-Jüttner pair beams",
    "Symmetric e⁻/e⁺ beams with u₀ = ±1 and θ = 0.1 (drifting 1D Maxwell–Jüttner) grow "
    "at several k, and the fitted rates are compared with the kinetic root. The root "
    "comes from the relativistic Vlasov susceptibility integrated here with "
    "scipy.integrate.quad, independently of streamsim.theory.",
    "1 + Σ_s (ω_ps²/k) ∫ f_s′(u) /(ω − k v(u)) du = 0,  f_s ∝ exp(−Γ(γ − βu)/θ)",
    "relativistic 1D Vlasov dielectric (e.g. Krall & Trivelpiece 1973, ch. 8); Jüttner "
    "1911", measure, {"quick": QUICK, "full": FULL})
