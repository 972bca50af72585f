"""The run-control handlers of the time loop: the energy watch, the progress bar and the stop
request (a signal or a step budget), and the signal catcher they share. They record nothing;
the recording handlers live in :mod:`streamsim.diagnostics` (the checkpoint writer in
:mod:`streamsim.checkpointer`)."""
from __future__ import annotations

import signal
import sys
import time as _time

from .checkpointer import Checkpointer
from .diagnostics import Handler

__all__ = ["Signals", "EnergyWatch", "Checkpointer", "Progress", "StopRequest"]


class Signals:
    """Turn SIGINT/SIGTERM into a flag the loop checks once per step (main thread only)."""

    def __init__(self):
        self.caught: int | None = None
        self._old = {}

    def __enter__(self):
        import threading
        if threading.current_thread() is threading.main_thread():
            for sig in (signal.SIGINT, signal.SIGTERM):
                self._old[sig] = signal.signal(sig, self._handler)
        return self

    def _handler(self, signum, frame):
        if self.caught is not None:     # second signal: give up at once
            raise KeyboardInterrupt
        self.caught = signum

    def __exit__(self, *exc):
        for sig, old in self._old.items():
            signal.signal(sig, old)
        return False


class EnergyWatch(Handler):
    """Warns once when the relative energy error of ``source`` (the recording handler of highest
    ``energy_rank``: the series, or a driven run's energy balance) exceeds
    ``analysis.energy_tolerance``."""
    name = "energy_watch"

    def __init__(self, source, tolerance: float, say):
        self.recorder, self.tolerance, self.say = source, tolerance, say
        self.every = source.every
        self.warned = False

    def after(self, sim, n):
        if not self.warned and self.recorder.energy_err_max > self.tolerance:
            self.warned = True
            self.say(f"relative energy error {self.recorder.energy_err_max:.2e} exceeds "
                     f"analysis.energy_tolerance = {self.tolerance:g} at "
                     f"t = {sim.step * sim.dt:.4g}/omega_p")


class Progress(Handler):
    """A tqdm bar on stderr, refreshed at most four times a second."""
    name = "progress"

    def __init__(self, sim):
        from tqdm import tqdm
        self.bar = tqdm(total=sim.steps, initial=sim.step, unit="step", file=sys.stderr,
                        dynamic_ncols=True, leave=False)
        self.n_particles = sim.n_particles
        self.wall0 = self.last = _time.perf_counter()
        self.step0 = sim.step

    def after(self, sim, n):
        now = _time.perf_counter()
        if now - self.last > 0.25 or sim.step == sim.steps:
            rate = (sim.step - self.step0) * self.n_particles / max(now - self.wall0, 1e-9)
            self.bar.set_postfix_str(f"t={sim.step * sim.dt:.1f}/wp, {rate:.2e} particle-steps/s",
                                     refresh=False)
            self.bar.update(sim.step - self.bar.n)
            self.last = now

    def close(self):
        self.bar.close()


class StopRequest(Handler):
    """Ends the loop after a signal or a step budget (the budget is for tests of checkpoints)."""
    name = "stop"

    def __init__(self, signals: Signals, step0: int, budget: int | None):
        self.signals, self.step0, self.budget = signals, step0, budget
        self.requested = False

    def after(self, sim, n):
        if self.signals.caught is not None or (self.budget is not None
                                               and sim.step - self.step0 >= self.budget):
            self.requested = True
