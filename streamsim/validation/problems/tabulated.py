"""11. Species from a table f(u): distributions with known answers written as tables.

Three distributions are handed to streamsim as tables (the deck's inline form {u, f}) and must
give the answers their closed forms give:

- a waterbag pair (flat in lab u between the boosted edges) against the algebraic waterbag
  dispersion relation, solved here with numpy's polynomial roots;
- a Maxwellian (v_th = 0.005 c) against the published Landau roots (the table's damped root by
  the rational continuation of :func:`streamsim.theory.table_damped_root`);
- a drifting Juttner pair against the kinetic root of the relativistic Vlasov susceptibility
  integrated with scipy quad (:func:`..references.symmetric_juttner_growth`), in the theory and in a
  short PIC run of the table deck.
"""
from __future__ import annotations

import math

import numpy as np

from .. import references as ref
from ..checks import Check
from ._common import Outcome, Problem, fit_growth, pair_deck

QUICK = {"tab_k": (0.7,), "tab_cells": 64, "tab_ppc": 256, "tab_rows": 4001}
FULL = {"tab_k": (0.6, 0.8, 1.0), "tab_cells": 128, "tab_ppc": 2048, "tab_rows": 10001}

WB_U, WB_SPREAD = 0.6, 0.2          # waterbag pair: drift u and drift-frame half-width
WB_K = (0.3, 0.8, 1.4)
JT_U, JT_THETA = 1.0, 0.1           # the drifting Juttner pair of the warm-beams problem
LANDAU_VT = 0.005                   # c
TAB_WARM_TOL = 0.05


def _inline(u, f) -> dict:
    return {"u": [float(x) for x in u], "f": [float(x) for x in f]}


def juttner_rows(drift_u: float, theta: float, rows: int):
    """A drifting Juttner (f ~ exp(-Gamma (gamma - beta u)/theta), Juttner 1911) written as
    rows uniform in rapidity out to exp(-40) of its peak; computed here, unnormalised."""
    g, b = math.sqrt(1 + drift_u**2), drift_u / math.sqrt(1 + drift_u**2)
    edge = math.acosh(1.0 + 40.0 * theta)
    eta = np.linspace(math.asinh(drift_u) - edge, math.asinh(drift_u) + edge, rows)
    u = np.sinh(eta)
    return u, np.exp(-(g * (np.sqrt(1 + u * u) - b * u) - 1.0) / theta)


def waterbag_growth(k: float, drift_u: float, spread: float, wp2_each: float) -> float:
    """Largest Im omega of the symmetric waterbag pair: 1 = Sum_s c_s / ((omega - k a_s)(omega -
    k b_s)), c_s = omega_ps^2 (v_b - v_a)/(u_b - u_a), a lab-flat f between the boosted edges
    (waterbag model, e.g. Berk, Nielsen & Roberts 1970, Phys. Fluids 13, 980; the relativistic
    weight from Int f' du/(omega - k v) with f flat in u). Roots of the quartic by numpy."""
    P = np.polynomial.Polynomial
    terms = []
    for d in (drift_u, -drift_u):
        gd, bd = math.sqrt(1 + d * d), d / math.sqrt(1 + d * d)
        e = math.sqrt(1 + spread * spread)
        ua, ub = gd * (-spread + bd * e), gd * (spread + bd * e)
        va, vb = ua / math.sqrt(1 + ua * ua), ub / math.sqrt(1 + ub * ub)
        terms.append((wp2_each * (vb - va) / (ub - ua), P([-k * va, 1.0]) * P([-k * vb, 1.0])))
    (c1, q1), (c2, q2) = terms
    poly = q1 * q2 - c1 * q2 - c2 * q1
    g = float(np.max(poly.roots().imag))
    return g if g > 1e-9 else 0.0


def table_pair_deck(p, k, g_ref):
    u, f = juttner_rows(JT_U, JT_THETA, p["tab_rows"])
    raw = pair_deck(drift_u=JT_U, length=2 * math.pi / k, cells=p["tab_cells"], ppc=p["tab_ppc"],
                    dt=0.05, end=min(400.0, 20.0 / g_ref) if g_ref else 100.0, amplitude=1e-4,
                    theta=JT_THETA)
    for sp, sign in zip(raw["species"], (1.0, -1.0)):
        for key in ("drift_u", "theta"):
            sp.pop(key, None)
        sp["distribution"] = "table"
        sp["table"] = _inline(sign * u[::int(sign)], f[::int(sign)])
    return raw


def measure(p, run) -> Outcome:
    from streamsim import theory
    from streamsim.deck import load_deck
    checks, pts = [], []
    # 1. waterbag pair as tables against the algebraic relation ----------------------------
    dev = 0.0
    for k in WB_K:
        g_ref = waterbag_growth(k, WB_U, WB_SPREAD, 0.5)
        sps = []
        for name, q, d in (("electrons", -1.0, WB_U), ("positrons", 1.0, -WB_U)):
            gd, bd = math.sqrt(1 + d * d), d / math.sqrt(1 + d * d)
            e = math.sqrt(1 + WB_SPREAD**2)
            u = np.linspace(gd * (-WB_SPREAD + bd * e), gd * (WB_SPREAD + bd * e), 16)
            sps.append({"name": name, "charge": q, "density": 0.5, "distribution": "table",
                        "table": _inline(u, np.ones(u.size))})
        deck = load_deck({"title": "waterbag table", "box": {"length": 2 * math.pi / k,
                                                              "cells": 32},
                          "species": sps})
        g, _ = theory.growth_curve(deck.species, [k])
        dev = max(dev, abs(float(g[0]) - g_ref) / max(g_ref, 1e-3))
        pts.append({"k": k, "waterbag_table": float(g[0]), "waterbag_reference": g_ref})
    checks.append(Check("tabulated f", "waterbag pair as tables: max |dg|/g over k",
                        dev, None, 0.0, "algebraic waterbag dispersion relation, numpy roots",
                        1e-8, "absolute",
                        why="a flat f is reproduced exactly by rows linear in v: only rounding"))
    # 2. Maxwellian table against the published Landau roots --------------------------------
    vt = LANDAU_VT
    u = np.linspace(-12 * vt, 12 * vt, p["tab_rows"])
    sp = {"name": "electrons", "charge": -1.0, "density": 1.0, "distribution": "table",
          "table": _inline(u, np.exp(-u * u / (2 * vt * vt)))}
    deck = load_deck({"title": "maxwellian table", "box": {"length": 100.0, "cells": 32},
                      "species": [sp]})
    for kl in (0.4, 0.5):
        pub = ref.PUBLISHED_LANDAU_ROOTS[kl]
        w, fit_err = theory.table_damped_root(kl / vt, deck.species, complex(pub.real, -0.1))
        checks.append(Check("tabulated f", f"Maxwellian table: damping rate at k lambda_D = {kl:g}",
                            None if w is None else w.imag, None, pub.imag,
                            "published Landau root (4 decimals, from memory)", 1.5e-4, "absolute",
                            why="the 4th decimal of the published root, plus relativistic "
                                "corrections ~ v_th^2 = 2.5e-5",
                            note=f"AAA fit of G: max relative error {fit_err:.1e}"))
    # 3. drifting Juttner pair as tables: theory and a short PIC run ------------------------
    theory_dev = 0.0
    for k in p["tab_k"]:
        g_ref = ref.symmetric_juttner_growth(k, 0.5, JT_U, JT_THETA, upper=0.3)
        raw = table_pair_deck(p, k, g_ref)
        deck = load_deck(raw)
        g_th, _ = theory.growth_curve(deck.species, [k])
        theory_dev = max(theory_dev, abs(float(g_th[0]) - (g_ref or 0.0)) / (g_ref or 1.0))
        res = run(raw)
        rate, err, _ = fit_growth(res.series.t, np.abs(res.series.mode_amplitude[:, 0]))
        pts.append({"k": k, "growth": rate, "error": err, "reference": g_ref})
        checks.append(Check("tabulated f", f"Juttner pair as tables: PIC growth at k = {k:g}",
                            rate, err, g_ref if g_ref else 0.0,
                            "kinetic root: relativistic Vlasov chi by scipy quad, Juttner f",
                            TAB_WARM_TOL, "relative",
                            why="as for the warm Juttner beams: a warm quiet start samples the "
                                "tails with a finite particle count, and ln|E| starts from the "
                                "seeded mode's kinetic transient: 5 % (common practice)"))
    checks.append(Check("tabulated f", "Juttner pair as tables: theory max |dg|/g",
                        theory_dev, None, 0.0, "independent quadrature above", 1e-5, "absolute",
                        why="rows linear in v between nodes: second-order interpolation error, "
                            "~1e-6 at these row counts"))
    ks = np.linspace(0.1, 1.15, 22)
    curve = [ref.symmetric_juttner_growth(x, 0.5, JT_U, JT_THETA, upper=0.3) or 0.0 for x in ks]
    kw = np.linspace(0.1, 1.6, 31)
    wb = [waterbag_growth(x, WB_U, WB_SPREAD, 0.5) for x in kw]
    return Outcome(checks, {"points": [q for q in pts if "growth" in q],
                            "waterbag": [q for q in pts if "waterbag_table" in q],
                            "k": ks.tolist(), "curve": curve, "waterbag_k": kw.tolist(),
                            "waterbag_curve": wb})


PROBLEM = Problem(
    "tabulated", "Species from a table f(u)",
    "Distributions with known answers are given to streamsim as tables: a waterbag pair "
    "(algebraic dispersion relation), a Maxwellian (published Landau roots, through the "
    "rational continuation of the table) and a drifting Jüttner pair (kinetic root by "
    "scipy quad; theory and a short PIC run of the table deck).",
    "1 − (1/k²) ∫ G′(v)/(v − ω/k) dv = 0,  G(v) = Σ_s ω_ps² f_s(u(v))",
    "relativistic 1D Vlasov dielectric (e.g. Krall & Trivelpiece 1973, ch. 8); Penrose 1960; "
    "waterbag: Berk, Nielsen & Roberts 1970", measure, {"quick": QUICK, "full": FULL})
