"""The run-control handler that writes checkpoints at a cadence (its own module, so that a change
of cadence stays here)."""
from __future__ import annotations

from .diagnostics import Handler

__all__ = ["Checkpointer"]


class Checkpointer(Handler):
    """Saves the whole state every ``output.checkpoint_interval`` (0: only at the end and on a
    signal); ``save`` is the run's checkpoint writer."""
    name = "checkpoint"

    def __init__(self, every: int, save):
        self.every, self.save = every, save

    def after(self, sim, n):
        if self.every and sim.step % self.every == 0:
            self.save()
