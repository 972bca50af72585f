"""The validation problems: invented scenarios, outside references, honest tolerances.

Every problem runs small decks through :func:`streamsim.pipeline.run` (in memory), measures one
kind of quantity, and compares it with a reference computed in :mod:`..references` (never with
what streamsim itself computed). Where streamsim.theory gives the same number, a separate line
checks the theory module against the independent reference.

One module per problem, each with its measurement, its ``QUICK`` and ``FULL`` parameters and its
:class:`Problem` record (``PROBLEM``); this package holds the ordered registry. Two levels:
``quick`` (small particle counts; the whole set in well under 3 minutes on 2 cores) and ``full``
(production particle counts, more points per curve). The tolerances are the same at both
levels; they are set by the discretisation errors each problem can carry, stated beside each
check (``why``). The shared deck builders, fits and measurement conventions are in
:mod:`._common`.
"""
from __future__ import annotations

import time

from ..checks import Check
from . import (conservation, convergence, landau, langmuir, pic_vlasov, plasma_oscillation,
               relativistic, tabulated, two_stream, warm_beams, weak_beam)
from ._common import LEVEL_NAMES, Outcome, Problem, Runner

__all__ = ["PROBLEMS", "PROBLEM_KEYS", "LEVELS", "Outcome", "Problem", "Runner", "run_problem"]

#: the registry, in the order the problems run and are reported
PROBLEMS: tuple[Problem, ...] = tuple(m.PROBLEM for m in (
    plasma_oscillation, langmuir, landau, two_stream, weak_beam, relativistic, warm_beams,
    conservation, convergence, pic_vlasov, tabulated))

PROBLEM_KEYS = tuple(p.key for p in PROBLEMS)

#: {level: {problem key: the parameters its measurement reads}}
LEVELS = {level: {p.key: p.params[level] for p in PROBLEMS} for level in LEVEL_NAMES}


def run_problem(problem: Problem, level: str, runner: Runner) -> Outcome:
    """Run one problem; an exception becomes one failing line naming it (never a crash)."""
    t0 = time.perf_counter()
    try:
        out = problem.measure(problem.params[level], runner)
    except Exception as ex:  # noqa: BLE001 - a crashing problem is a failed check, reported
        out = Outcome([Check(problem.title, "problem ran to completion", None, None, 0.0,
                             "-", 0.0, "absolute", note=f"{ex.__class__.__name__}: {ex}")],
                      error=f"{ex.__class__.__name__}: {ex}")
    out.seconds = time.perf_counter() - t0
    return out
