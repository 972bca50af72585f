"""`streamsim validate`: run the standard problems, compare with outside references, report.

    from streamsim.validation import run_validation
    v = run_validation("quick")              # or "full"; problems=("landau",) for a subset
    print(v.table())                         # aligned text table
    v.write_report("runs/out/validation")    # report.md, results.csv, results.json, figures
    v.passed                                 # False if any check failed

The problems (one module each, with its quick/full parameters), their references and tolerances
are in :mod:`.problems`; the reference formulas, computed independently of streamsim.theory, in
:mod:`.references`.
"""
from __future__ import annotations

import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

from .checks import Check, table_text
from .problems import LEVELS, PROBLEM_KEYS, PROBLEMS, Outcome, Problem, Runner, run_problem

__all__ = ["run_validation", "Validation", "Check", "PROBLEMS", "PROBLEM_KEYS", "LEVELS"]


@dataclass
class Validation:
    level: str
    outcomes: dict[str, Outcome] = field(default_factory=dict)
    problems: tuple[Problem, ...] = ()
    seconds: float = 0.0
    runs: int = 0
    particle_steps: int = 0

    @property
    def checks(self) -> list[Check]:
        return [c for p in self.problems for c in self.outcomes[p.key].checks]

    @property
    def failed(self) -> list[Check]:
        return [c for c in self.checks if not c.passed]

    @property
    def passed(self) -> bool:
        return bool(self.checks) and not self.failed

    def table(self) -> str:
        return table_text(self.checks)

    def write_report(self, folder) -> Path:
        from .report import write_report
        return write_report(self, Path(folder))


def run_validation(level: str = "quick", problems=None,
                   progress: Callable[[str], None] | None = None) -> Validation:
    """Run the validation problems at ``level`` ("quick" or "full"); ``problems`` selects keys."""
    if level not in LEVELS:
        raise ValueError(f"unknown level {level!r}; choose quick or full")
    chosen = PROBLEMS if not problems else tuple(p for p in PROBLEMS if p.key in set(problems))
    unknown = set(problems or ()) - set(PROBLEM_KEYS)
    if unknown:
        raise ValueError(f"unknown problem(s) {', '.join(sorted(unknown))}; known: "
                         + ", ".join(PROBLEM_KEYS))
    runner = Runner()
    v = Validation(level=level, problems=chosen)
    t0 = time.perf_counter()
    for i, p in enumerate(chosen, 1):
        out = run_problem(p, level, runner)
        v.outcomes[p.key] = out
        if progress is not None:
            bad = sum(not c.passed for c in out.checks)
            progress(f"[{i}/{len(chosen)}] {p.title}: {len(out.checks) - bad}/{len(out.checks)} "
                     f"checks pass ({out.seconds:.1f} s)" + (f"; {out.error}" if out.error else ""))
    v.seconds = time.perf_counter() - t0
    v.runs, v.particle_steps = runner.runs, runner.particle_steps
    return v
