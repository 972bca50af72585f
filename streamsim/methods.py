"""The method table: what each ``deck.method`` supplies to a run, one frozen entry per method
(like a table of solvers). :func:`streamsim.pipeline.run` runs ``METHODS[deck.method]`` and never
names a method itself.

An entry gives, for a (resolved) deck:

- ``simulation(deck, threads)``: the object stepped by the time loop (``advance``, the state the
  handlers read, ``state``/``restore`` for checkpoints);
- ``handler_entries``: its recording handlers (classes, or functions of the deck giving
  classes), built by :func:`streamsim.diagnostics.make_handlers` — what reaches the TimeSeries,
  the checkpoints and the memory estimate comes from these;
- ``state_bytes(deck)``: the memory of its own state (the handlers report theirs);
- ``memory_refusal(deck, item, estimate, available)``: the one-line refusal;
- ``health(deck, findings)``: the numerical-health findings that apply to it;
- ``run_data(sim, handlers, dispersion)``: the :class:`streamsim.rundata.RunData`;
- ``write_raw(folder, sim, data)``: its raw files beyond timeseries.h5 and fields.h5;
- ``summary_extras(sim, data, wall, steps_done, say)``: its own summary.json blocks;
- ``notes(deck)``: one-line notes before it starts;
- ``final_state(sim)``: (x, u) per species for :class:`streamsim.pipeline.Result` (empty for
  a continuum).

Adding a method: one module with its simulation and handlers, one entry here.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable

from . import memory
from .diagnostics import handler_classes, make_handlers

__all__ = ["Method", "METHODS"]


@dataclass(frozen=True)
class Method:
    name: str
    simulation: Callable[..., Any]
    handler_entries: Callable[[], tuple]
    state_bytes: Callable[[Any], dict]
    memory_refusal_line: Callable[..., Exception]
    health: Callable[[Any, list], list]
    run_data: Callable[..., Any]
    write_raw: Callable[..., None]
    summary_extras: Callable[..., dict]
    notes: Callable[[Any], list]
    final_state: Callable[[Any], tuple]

    def handler_classes(self, deck) -> list[type]:
        return handler_classes(deck, self.handler_entries())

    def handlers(self, sim) -> list:
        """The recording handlers of a run, each at its cadence for the deck."""
        return make_handlers(sim, self.handler_entries())

    def memory(self, deck) -> dict[str, int]:
        """Bytes the run holds, by item, before anything is allocated."""
        return memory.tally(deck, self.state_bytes(deck), self.handler_classes(deck))

    def memory_refusal(self, deck, item: str, estimate: dict, available: int) -> Exception:
        return self.memory_refusal_line(deck, item, estimate, available, self.handler_classes(deck))


# -- particle-in-cell ------------------------------------------------------------------------
def _pic_simulation(deck, threads):
    from .engine import Simulation
    return Simulation(deck, threads)


def _pic_handlers():
    from .diagnostics import PIC_HANDLERS
    return PIC_HANDLERS


def _pic_refusal(deck, item, estimate, available, classes):
    return memory.pic_refusal(deck, item, estimate[item], available, classes)


def _pic_run_data(sim, handlers, dispersion):
    from .diagnostics import FieldSnapshots, PeakSnapshot, PhaseSpaceSampler, collect_series
    from .rundata import ParticleSnapshot, RunData
    deck = sim.deck
    one = {type(h): h for h in handlers}
    end = ParticleSnapshot(t=float(sim.step * sim.dt),
                           x={n: x.copy() for n, x in zip(sim.names, sim.x)},
                           weight={n: float(w) for n, w in zip(sim.names, sim.weights)})
    return RunData(deck=deck, names=sim.names, length=deck.box.length, cells=deck.box.cells,
                   dt=sim.dt, series=collect_series(handlers),
                   snapshots=one[FieldSnapshots].snapshots(),
                   phase_space=one[PhaseSpaceSampler].phase_space(),
                   peak=one[PeakSnapshot].snapshot(), end=end, theory=dispersion)


def _pic_write_raw(folder, sim, data):
    from . import io
    io.write_particles(folder / io.FILES["particles"], {"peak": data.peak, "end": data.end})


PIC = Method(
    name="pic", simulation=_pic_simulation, handler_entries=_pic_handlers,
    state_bytes=memory.pic_state_bytes, memory_refusal_line=_pic_refusal,
    health=lambda deck, findings: list(findings), run_data=_pic_run_data,
    write_raw=_pic_write_raw, summary_extras=lambda sim, data, wall, steps, say: {},
    notes=lambda deck: [],
    final_state=lambda sim: (dict(zip(sim.names, sim.x)), dict(zip(sim.names, sim.u))))


# -- the continuum (Vlasov) method ------------------------------------------------------------
def _vlasov():
    from . import vlasov
    return vlasov


def _vlasov_write_raw(folder, sim, data):
    from . import io
    io.write_profiles(folder / io.CONTINUUM_FILE, {"peak": data.peak_density,
                                                   "end": data.end_density})


VLASOV = Method(
    name="vlasov",
    simulation=lambda deck, threads: _vlasov().VlasovSimulation(deck, threads),
    handler_entries=lambda: _vlasov().VLASOV_HANDLERS,
    state_bytes=lambda deck: _vlasov().state_bytes(deck),
    memory_refusal_line=lambda deck, item, est, avail, classes:
        _vlasov().memory_refusal(deck, item, est["total"], avail),
    health=lambda deck, findings: _vlasov().health_findings(deck, findings),
    run_data=lambda sim, handlers, dispersion: _vlasov().run_data(sim, handlers, dispersion),
    write_raw=_vlasov_write_raw,
    summary_extras=lambda sim, data, wall, steps, say:
        {"vlasov": _vlasov().summary_block(sim, data, wall, steps, say)},
    notes=lambda deck: _vlasov().notes(deck),
    final_state=lambda sim: ({}, {}))

#: the method of each ``deck.method``
METHODS: dict[str, Method] = {m.name: m for m in (PIC, VLASOV)}
