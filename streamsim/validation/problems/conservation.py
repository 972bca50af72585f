"""8. Energy and momentum through saturation (warm Juttner beams, cold two-stream beams)."""
from __future__ import annotations

import json
import math

import numpy as np

from ..checks import Check
from . import warm_beams
from ._common import Outcome, Problem, pair_deck
from .two_stream import TS_BETA

#: ``warm``: the warm-beam problem's parameters at the same level (its k = 0.6 deck, run twice
#: as long, is the warm case here)
QUICK = {"cons_ppc": 64, "warm": warm_beams.QUICK}
FULL = {"cons_ppc": 512, "warm": warm_beams.FULL}


def _momentum_scale(res) -> float:
    return sum(s.density * abs(s.drift_u) + 1e-300 for s in res.deck.species) * res.deck.box.length


def measure(p, run) -> Outcome:
    checks, curves = [], {}
    # warm beams through saturation: the fastest k of the warm problem, same deck (cached)
    raw_w, _ = warm_beams.juttner_deck(p["warm"], 0.6)
    raw_w = json.loads(json.dumps(raw_w))
    raw_w["time"]["end"] = 2.0 * raw_w["time"]["end"]
    # cold symmetric two-stream, 8 wavelengths, through trapping
    g0 = 1.0 / math.sqrt(1.0 - TS_BETA**2)
    wb = math.sqrt(0.5 / g0**3)
    kf = math.sqrt(3.0) / 2.0 * wb / TS_BETA
    raw_c = pair_deck(drift_u=g0 * TS_BETA, length=8 * 2 * math.pi / kf, cells=256,
                      ppc=p["cons_ppc"], dt=0.05, end=80.0, mode=8, amplitude=1e-3)
    for name, raw, tol, why in (
            ("warm Juttner beams", raw_w, 1e-3,
             "common practice for momentum-conserving PIC with dx < lambda_D: the grid heating "
             "falls as 1/N_D (Hockney 1971)"),
            ("cold two-stream", raw_c, 1e-2,
             "cold beams have lambda_D = 0, so momentum-conserving PIC heats them on the grid "
             "once trapping starts; the project's default analysis.energy_tolerance "
             "(common practice)")):
        res = run(raw)
        w = res.series.total_energy
        pm = res.series.total_momentum
        e_err = float(np.max(np.abs(w - w[0])) / abs(w[0]))
        p_err = float(np.max(np.abs(pm - pm[0])) / _momentum_scale(res))
        sat = float(np.max(res.series.field_energy) / abs(w[0]))
        checks.append(Check("conservation", f"max |dW|/W, {name} through saturation", e_err,
                            None, tol, "bound: common practice (see why)", 0.0, "upper", why=why,
                            note=f"peak field energy {sat:.3g} of the total"))
        checks.append(Check("conservation", f"max |dP|/sum|P|, {name}", p_err, None, 1e-10,
                            "exact to round-off: gather with the deposit's weights, odd Green's "
                            "function (Birdsall & Langdon 1991 sec. 8-6)", 0.0, "upper",
                            why="round-off, ~1e-16 per step, over <= 1e4 steps"))
        curves[name] = {"t": res.series.t[::5].tolist(),
                        "energy": (np.abs(w - w[0]) / abs(w[0]))[::5].tolist(),
                        "momentum": (np.abs(pm - pm[0]) / _momentum_scale(res))[::5].tolist()}
    return Outcome(checks, {"curves": curves})


PROBLEM = Problem(
    "conservation", "Energy and momentum",
    "Warm Jüttner beams and cold two-stream beams are run through saturation, and the "
    "total energy must stay within the bound stated for each. Total momentum must be "
    "conserved to round-off, as the momentum-conserving scheme guarantees.",
    "W = Σ w m(γ−1) + ∫E²/2 dx;  P = Σ w m u",
    "Birdsall & Langdon 1991, sec. 8-6; Hockney 1971", measure, {"quick": QUICK, "full": FULL})
