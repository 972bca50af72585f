"""The run-control handler that writes checkpoints at a cadence (its own module, so that a change
of cadence stays here)."""
from __future__ import annotations

import time as _time

from .diagnostics import Handler

__all__ = ["Checkpointer"]


class Checkpointer(Handler):
    """Saves the whole state every ``output.checkpoint_interval`` of simulated time when the deck
    sets one (0: only at the end and on a signal), else every :attr:`WALL_S` seconds of
    wall-clock time, so that the default costs the same small share of any run however long its
    steps take. (The run also saves at its end and on a signal.) ``save`` is the run's checkpoint
    writer."""
    name = "checkpoint"
    #: the default cadence in wall-clock seconds (a kill -9 loses at most this much work)
    WALL_S = 300.0

    def __init__(self, every: int, save, wall_s: float | None = None, clock=_time.monotonic):
        self.every, self.save = every, save
        self.wall_s, self.clock = wall_s, clock
        self.last = clock()

    def after(self, sim, n):
        if self.every:
            if sim.step % self.every == 0:
                self.save()
        elif self.wall_s and sim.step < sim.steps and self.clock() - self.last >= self.wall_s:
            self.save()
            self.last = self.clock()
