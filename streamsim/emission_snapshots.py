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
is also taken at the end. The sums are computed by the analysis room's functions (a lazy import
at construction: the recording uses the same form factor the analysis would, by construction).
"""
from __future__ import annotations

import numpy as np

from .diagnostics import Sampler, record_steps, stride

__all__ = ["EmissionSnapshots", "MAX_RECORDS", "emission_stride", "bytes_needed"]

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


def bytes_needed(deck) -> int:
    """Bytes the emission records of a particle run of ``deck`` hold (0 for other methods)."""
    if getattr(deck, "method", "pic") != "pic":
        return 0
    steps = deck.time.steps
    every = emission_stride(steps, stride(deck.output.fields_interval, deck.time.dt))
    modes, nodes = _layout(deck)
    S = len(deck.species)
    return record_steps(steps, every) * (8 * S * (modes + nodes) + 8)


class EmissionSnapshots(Sampler):
    """|F_s(k)|^2 and the fine CIC density of every species at the emission cadence (module
    docstring); ``series_arrays()`` hands them to the run's time series (timeseries.h5)."""
    name = "emission"

    def __init__(self, sim, every: int):
        super().__init__()
        from .analysis.clumps import deposit_cic
        from .analysis.coherence import form_factor
        self._ff, self._cic = form_factor, deposit_cic
        deck = sim.deck
        self.every = emission_stride(sim.steps, every)
        self.length = deck.box.length
        self.modes, self.nodes = _layout(deck)
        S = len(sim.names)
        n = record_steps(sim.steps, self.every)
        self.weights = [float(w) for w in sim.weights]
        self.particles = np.array([x.size for x in sim.x], float)
        self.arrays = {"t": np.zeros(n), "F2": np.zeros((n, S, self.modes)),
                       "density": np.zeros((n, S, self.nodes))}

    def _take(self, sim, t):
        F2 = np.empty((len(sim.x), self.modes))
        dens = np.empty((len(sim.x), self.nodes))
        for s, x in enumerate(sim.x):
            F2[s] = np.abs(self._ff(x, self.length, self.modes)[1:]) ** 2
            dens[s] = self._cic(x, self.length, self.nodes, self.weights[s])
        self._put({"t": t, "F2": F2, "density": dens})

    def series_arrays(self) -> dict[str, np.ndarray]:
        """The records as time-series arrays named ``emission_*``."""
        out = {f"emission_{k}": self._view(k) for k in self.arrays}
        out["emission_particles"] = self.particles.copy()
        return out
