"""The emission series of a particle run: the form factor and the fine density at a cadence.

One recording handler (:class:`EmissionSnapshots`, the :class:`diagnostics.Handler` contract).
At each record it keeps, per species, what the emission analysis needs of the positions, never
the positions themselves (a copy of every position at every record would cost N x 8 bytes a
record):

- ``emission_F2`` (n, S, M): |F_s(k_m)|^2, m = 1..M, of all macro-particles, with M the
  coherence block's mode count (``analysis.coherence_kmax_factor`` x cells / 2);
- ``emission_density`` (n, S, nodes): the CIC density on the clump analysis's fine grid
  (``refinement`` x cells nodes), in the units of ``ParticleSnapshot`` densities;
- ``emission_t`` (n,) the times and ``emission_particles`` (S,) the macro-particle counts
  (the 1/N noise floor).

Cadence: every ``output.fields_interval`` (the density snapshots' cadence), made a whole multiple
coarser when that would give more than :data:`MAX_RECORDS` records over the run, so the cost
(one Gaussian-gridding NUFFT of every particle a record) and the memory stay bounded; a record
is also taken at the end. Registered in :data:`streamsim.diagnostics.PIC_HANDLERS`; its bytes
join the memory estimate as ``emission_snapshots``. The sums are computed by the analysis room's functions (a lazy import
at construction: the recording uses the same form factor the analysis would, by construction).
"""
from __future__ import annotations

import numpy as np

from .diagnostics import Sampler, record_steps, stride

__all__ = ["EmissionSnapshots", "MAX_RECORDS", "emission_stride"]

#: most emission records over a run (the cadence is made coarser beyond it)
MAX_RECORDS = 64


def emission_stride(steps: int, fields_every: int) -> int:
    """The emission cadence in steps: the field cadence, times the smallest whole factor that
    keeps the records over ``steps`` steps at or below MAX_RECORDS."""
    f = max(1, (steps // max(fields_every, 1)) // MAX_RECORDS)
    while record_steps(steps, fields_every * f) > MAX_RECORDS:
        f += 1
    return fields_every * f


def _layout(deck) -> tuple[int, int]:
    """(M form-factor modes, fine-grid nodes) for a resolved deck."""
    from .analysis.clumps import refinement
    from .analysis.coherence import form_factor_modes
    cells = deck.box.cells
    ppc = min((s.particles_per_cell for s in deck.species), default=1)
    return (form_factor_modes(cells, deck.analysis.coherence_kmax_factor),
            cells * refinement(ppc))


class EmissionSnapshots(Sampler):
    """|F_s(k)|^2 and the fine CIC density of every species at the emission cadence (module
    docstring); ``series_arrays()`` hands them to the run's time series (timeseries.h5).

    Rows: ``ROWS`` = 2 MAX_RECORDS + 2 whatever the end, so a run extended to a later end on
    resume restores into arrays of the same shape and still has room for its later records; it
    keeps the cadence it started with (``meta``). Records beyond the room are not taken."""
    name = "emission"
    memory_item = "emission_snapshots"
    cadence_key = "fields_interval"
    what = "the emission records"
    ROWS = 2 * MAX_RECORDS + 2

    @classmethod
    def every_for(cls, deck) -> int:
        return emission_stride(deck.time.steps, stride(deck.output.fields_interval, deck.time.dt))

    @classmethod
    def layout(cls, deck, every):
        modes, nodes = _layout(deck)
        S = len(deck.species)
        n = cls.ROWS
        return {"t": ((n,), float), "F2": ((n, S, modes), float),
                "density": ((n, S, nodes), float)}

    def __init__(self, sim, every: int):
        super().__init__(sim.deck, every)
        from .analysis.clumps import deposit_cic
        from .analysis.coherence import form_factor
        self._ff, self._cic = form_factor, deposit_cic
        self.length = sim.deck.box.length
        self.modes, self.nodes = _layout(sim.deck)
        self.weights = [float(w) for w in sim.weights]
        self.particles = np.array([x.size for x in sim.x], float)

    def _take(self, sim, t):
        if self.count >= self.arrays["t"].size:     # full (an extension beyond its room)
            return
        if self.count and t <= self.arrays["t"][self.count - 1]:   # the end already recorded
            return
        F2 = np.empty((len(sim.x), self.modes))
        dens = np.empty((len(sim.x), self.nodes))
        for s, x in enumerate(sim.x):
            F2[s] = np.abs(self._ff(x, self.length, self.modes)[1:]) ** 2
            dens[s] = self._cic(x, self.length, self.nodes, self.weights[s])
        self._put({"t": t, "F2": F2, "density": dens})

    def finish(self, sim):
        self._take(sim, sim.step * sim.dt)

    def meta(self):
        return {"every": int(self.every)}

    def restore_meta(self, meta):
        """A resumed run keeps the cadence it started with (an extension to a later end would
        otherwise pick a coarser one mid-run); the arrays have room for ROWS records."""
        if meta.get("every"):
            self.every = int(meta["every"])

    def series_arrays(self) -> dict[str, np.ndarray]:
        """The records as time-series arrays named ``emission_*``."""
        out = {f"emission_{k}": self._view(k) for k in self.arrays}
        out["emission_particles"] = self.particles.copy()
        return out
