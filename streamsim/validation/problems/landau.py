"""3. Landau damping of a small wave against the least-damped Maxwellian root."""
from __future__ import annotations

import math

import numpy as np

from .. import references as ref
from ..checks import Check
from ._common import THETA_WARM, Outcome, Problem, fit_wave, plasma_deck, warm_difference

#: k lambda_D: (particles per cell, end time)
QUICK = {"landau": {0.3: (4096, 32.0), 0.4: (2048, 25.0), 0.5: (1024, 20.0)},
         "landau_dt": 0.1}
FULL = {"landau": {0.3: (16384, 40.0), 0.4: (8192, 30.0), 0.5: (4096, 25.0)},
        "landau_dt": 0.05}

LANDAU_AMPLITUDE = {0.3: 1e-4, 0.4: 3e-4, 0.5: 1e-3}
LANDAU_TOL_OMEGA = 5e-3
LANDAU_TOL_GAMMA = 0.05


def measure(p, run) -> Outcome:
    from streamsim import theory
    from streamsim.analysis.fits import wave_signal
    from streamsim.deck import load_deck
    vth = math.sqrt(THETA_WARM)
    checks, curves = [], []
    theory_dev = 0.0
    for kl, (ppc, end) in sorted(p["landau"].items()):
        root = ref.maxwellian_root(kl)
        pub = ref.PUBLISHED_LANDAU_ROOTS[kl]
        checks.append(Check("Landau damping", f"reference root at k lambda_D = {kl}: |wofz - table|",
                            abs(root.real - pub.real) + abs(root.imag - pub.imag), None, 0.0,
                            "published root (widely tabulated; quoted from memory) vs "
                            "scipy.special.wofz root", 1e-4, "absolute",
                            why="the table gives 4 decimals: rounding is <= 5e-5 per part"))
        k = kl / vth
        raw = plasma_deck(cells=64, length=2 * math.pi / k, ppc=ppc, theta=THETA_WARM,
                          dt=p["landau_dt"], end=end, amplitude=LANDAU_AMPLITUDE[kl])
        t, e, seeded, _ = warm_difference(run, raw, (1,))
        sig = wave_signal(e[:, 0])
        sel = t > 3.0     # after the ballistic transient of the initial density step
        fit = fit_wave(t[sel], sig[sel], root.real, root.imag)
        checks.append(Check("Landau damping", f"omega_r/omega_p at k lambda_D = {kl}",
                            fit.omega if fit else None, fit.omega_err if fit else None,
                            root.real, "Maxwellian root, Fried & Conte Z via scipy.special.wofz",
                            LANDAU_TOL_OMEGA, "relative",
                            why="CIC shape factor (k dx)^2/24 = 0.04 %, leapfrog "
                                "(omega dt)^2/24 <= 0.06 %, relativistic theta = 1e-4: 0.5 % "
                                "leaves room for the fit (common practice)"))
        checks.append(Check("Landau damping", f"damping rate/omega_p at k lambda_D = {kl}",
                            fit.damping if fit else None, fit.rate_err if fit else None,
                            -root.imag, "Maxwellian root, Fried & Conte Z via scipy.special.wofz",
                            LANDAU_TOL_GAMMA, "relative",
                            why="the damping follows the resonant slope f'(v_phi): a 0.1 % shift "
                                "of omega moves it by ~(v_phi/v_th)^2 x 0.1 % = 1.5 % at "
                                "k lambda_D = 0.3; the rest is the finite sampling of the "
                                "resonant particles (common practice: 5 %)"))
        # the project's theory module against the same independent root
        deck = load_deck(raw)
        roots = theory.maxwellian_roots(k, deck.species)
        if len(roots):
            best = roots[np.argmin(np.abs(roots - root))]
            theory_dev = max(theory_dev, abs(best - root) / abs(root))
        else:
            theory_dev = math.inf
        env = np.abs(e[:, 0])
        curves.append({"k_lambda": kl, "t": t[::2].tolist(), "signal": sig[::2].tolist(),
                       "envelope": env[::2].tolist(), "fit_gamma": fit.damping if fit else None,
                       "ref_gamma": -root.imag, "ref_omega": root.real})
    checks.append(Check("Landau damping", "streamsim.theory Maxwellian roots: max |dw|/|w|",
                        theory_dev, None, 0.0, "scipy.special.wofz roots above", 1e-6,
                        "absolute", why="the same equation solved twice: only root-finder "
                                        "tolerance separates them"))
    return Outcome(checks, {"curves": curves})


PROBLEM = Problem(
    "landau", "Landau damping",
    "One small wave at kλ_D = 0.3, 0.4 or 0.5 rings in a warm quiet-start plasma (the "
    "unseeded twin run subtracted to cancel the particle noise), and its frequency and "
    "damping rate are fitted. They are compared with the least-damped root of the "
    "Maxwellian dielectric function, re-derived here with the Faddeeva function and "
    "checked against the tabulated roots.",
    "1 + [1 + ζ Z(ζ)]/(kλ_D)² = 0,  ζ = ω/(√2 k v_th),  Z(ζ) = i√π w(ζ)",
    "Landau 1946; Fried & Conte 1961; w = scipy.special.wofz", measure,
    {"quick": QUICK, "full": FULL})
