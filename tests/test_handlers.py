"""A recorded series is one handler: it preallocates its arrays from its own layout, reports those
bytes to the memory check before anything is allocated, reaches the TimeSeries and
timeseries.h5, and checkpoints and restores through the shared base — with no edit of the
pipeline. Byte counts are checked against hand counts (float64 = 8 B, complex128 = 16 B)."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import streamsim
from conftest import pair_deck
from streamsim import diagnostics, io, memory
from streamsim.deck import load_deck
from streamsim.diagnostics import Sampler, record_steps
from streamsim.methods import METHODS

RUNS = Path(__file__).resolve().parent.parent / "runs"


def _allocated(h) -> int:
    """Bytes a handler holds after construction, read off its arrays."""
    if hasattr(h, "arrays"):
        return sum(a.nbytes for a in h.arrays.values())
    if hasattr(h, "x"):                    # the peak snapshot: one copy of the positions
        return sum(x.nbytes for x in h.x)
    return h.density.nbytes                # the continuum's peak density


@pytest.mark.parametrize("deck, overrides", [
    (None, ["time.end=2.0"]),
    (RUNS / "drive-charge-starved.toml", ["time.end=2.0"]),
    (RUNS / "warm-pair-beams-vlasov.toml", ["time.end=2.0", "vlasov.momentum_cells=32",
                                             "box.cells=32"]),
])
def test_every_handler_reports_the_bytes_it_allocates(deck, overrides):
    deck = load_deck(deck, overrides)
    method = METHODS[deck.method]
    sim = method.simulation(deck, 1)
    handlers = method.handlers(sim)
    assert [type(h) for h in handlers] == method.handler_classes(deck)
    for h in handlers:
        assert type(h).nbytes(deck) == _allocated(h) > 0, h.name


def test_the_memory_estimate_of_a_driven_run_counts_the_drive_arrays():
    deck = load_deck(RUNS / "drive-charge-starved.toml")
    S, steps = 2, 600                                       # 30 / 0.05
    n = steps // 2 + 1                                      # every 0.1 = 2 steps, step 0 included
    assert (deck.output.diagnostics_interval, deck.output.fields_interval) == (0.1, 1.5)
    nf = steps // 30 + 1                                    # every 1.5 = 30 steps
    bins = 140                                              # 0.1 dex from 1e-8 to 1e6
    drive = 8 * (4 * n + 4 * n * S + nf + nf * S * bins)    # E0, J, J_ext, work; 4 gammas; hist
    est = memory.estimate(deck)
    assert est["drive"] == drive
    assert est["particles"] == 2 * 64 * 128 * 3 * 8         # x, u + the peak copy of x
    assert est["total"] == sum(v for k, v in est.items() if k != "total")


class ToyRecorder(Sampler):
    """An invented recorded series: the field energy and the first particle's momentum, at the
    field cadence."""
    name = "toy"
    memory_item = "toy"
    cadence_key = "fields_interval"
    what = "the toy series"

    @classmethod
    def layout(cls, deck, every):
        n = record_steps(deck.time.steps, every)
        return {"toy_t": ((n,), float), "toy_u": ((n, len(deck.species)), float)}

    def __init__(self, sim, every):
        super().__init__(sim.deck, every)

    def before(self, sim, n):
        if self.due(n):
            self._take(sim, n * sim.dt)

    def finish(self, sim):
        if self.arrays["toy_t"].size > self.count:
            self._take(sim, sim.step * sim.dt)

    def _take(self, sim, t):
        self._put({"toy_t": t, "toy_u": [u[0] for u in sim.u]})

    def series_arrays(self):
        return {"toy_t": self._view("toy_t"), "toy_u": self._view("toy_u")}


def test_a_new_recorded_series_is_one_handler(tmp_path, monkeypatch):
    monkeypatch.setattr(diagnostics, "PIC_HANDLERS", diagnostics.PIC_HANDLERS + (ToyRecorder,))
    raw = pair_deck(cells=64, ppc=8, end=20.0)
    raw["output"]["checkpoint_interval"] = 2.0
    raw["output"]["fields_interval"] = 1.0
    deck = load_deck(raw)
    steps = deck.time.steps
    every = round(1.0 / deck.time.dt)
    n = steps // every + 1 + (1 if steps % every else 0)
    assert memory.estimate(deck)["toy"] == 8 * n * (1 + 2)      # the memory check sees it

    straight = streamsim.run(raw, out=tmp_path / "a", analyze=False)
    s = straight.series
    assert s.toy_t.shape == (n,) and s.toy_u.shape == (n, 2)
    assert np.allclose(s.toy_t, np.arange(n) * every * deck.time.dt)
    assert np.array_equal(io.read_run(tmp_path / "a").series.toy_u, s.toy_u)   # timeseries.h5
    with pytest.raises(streamsim.pipeline.Interrupted):
        streamsim.run(raw, out=tmp_path / "b", analyze=False, stop_after_steps=137)
    resumed = streamsim.run(raw, out=tmp_path / "b", analyze=False, resume=True)
    assert np.array_equal(resumed.series.toy_u, s.toy_u)                        # checkpoints
    assert np.array_equal(resumed.series.toy_t, s.toy_t)
