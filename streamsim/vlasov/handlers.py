"""The cadenced handlers of a continuum run (the interface of :mod:`streamsim.diagnostics`).

A continuum run records what a PIC run records — the series and the field snapshots, by the
same handlers — and, in place of particle positions: the densities at the diagnostics time of
maximum contrast (:class:`PeakDensity`), f_s(x, u) at the field cadence
(:class:`DistributionSnapshots`), and the norms of f at the diagnostics cadence
(:class:`NormRecorder`: mass, L1, L2, min f, the mass at the momentum grid's edges).
"""
from __future__ import annotations

import math

import numpy as np

from ..diagnostics import FieldSnapshots, Handler, Sampler, SeriesRecorder, _Arrays, contrast, \
    record_steps
from ..rundata import DensityProfile

__all__ = ["PeakDensity", "DistributionSnapshots", "NormRecorder",
           "NORM_SERIES", "VLASOV_HANDLERS"]

#: the series names the norms are written under in timeseries.h5, (n, S) each
NORM_SERIES = ("vlasov_mass", "vlasov_l1", "vlasov_l2", "vlasov_f_min", "vlasov_edge_mass")


class PeakDensity(Handler):
    """Every species' density at the diagnostics time of the largest max delta n/n of any
    species (the continuum's stand-in for the PIC peak positions)."""
    name = "peak"
    memory_item = "peak_density"
    what = "the density at maximum contrast"

    @classmethod
    def layout(cls, deck, every):
        return {"density": ((len(deck.species), deck.box.cells), float)}

    def __init__(self, sim, every: int):
        self.every = every
        self.density = np.zeros_like(sim.density)
        self.value = -math.inf
        self.t = None

    def _track(self, sim, t):
        value = float(contrast(sim.density)[0][:-1].max())
        if self.t is None or value > self.value:
            self.value, self.t = value, t
            np.copyto(self.density, sim.density)

    def before(self, sim, n):
        if self.due(n):
            self._track(sim, n * sim.dt)

    def finish(self, sim):
        self._track(sim, sim.step * sim.dt)

    def snapshot(self):
        return None

    def profile(self) -> DensityProfile | None:
        if self.t is None:
            return None
        return DensityProfile(t=float(self.t), density=self.density.copy())

    def state(self):
        return {"density": self.density} if self.t is not None else {}

    def restore(self, arrays):
        if "density" in arrays and arrays["density"].shape == self.density.shape:
            self.density[...] = arrays["density"]

    def meta(self):
        return {"t": self.t, "value": self.value if math.isfinite(self.value) else None}

    def restore_meta(self, meta):
        self.t = meta.get("t")
        v = meta.get("value")
        self.value = -math.inf if v is None else float(v)


class DistributionSnapshots(Sampler):
    """f_s(x, u) of every species every ``output.fields_interval`` (the times of the field
    snapshots)."""
    name = "distribution"
    memory_item = "distribution"
    cadence_key = "fields_interval"
    what = "the f snapshots"

    @classmethod
    def layout(cls, deck, every):
        n = record_steps(deck.time.steps, every)
        out = {"t": ((n,), float)}
        for s in range(len(deck.species)):
            out[f"f/{s}"] = ((n, deck.vlasov.momentum_cells, deck.box.cells), float)
        return out

    def __init__(self, sim, every: int):
        super().__init__(sim.deck, every)
        for s, f in enumerate(sim.f):
            if self.arrays[f"f/{s}"].shape[1:] != f.shape:
                raise ValueError(f"f of species {s} has the shape {f.shape}, the layout says "
                                 f"{self.arrays[f'f/{s}'].shape[1:]}")
        self.grids = sim.grids

    def _take(self, sim, t):
        self._put({"t": t, **{f"f/{s}": f for s, f in enumerate(sim.f)}})

    def snapshots(self) -> dict:
        """{"t": (n_f,), "f": [per species (n_f, momentum_cells, cells)], "grids": [MomentumGrid]}"""
        return {"t": self._view("t"),
                "f": [self._view(f"f/{s}") for s in range(len(self.grids))],
                "grids": list(self.grids)}


class NormRecorder(_Arrays):
    """Mass, L1 and L2 norms, min f and the mass at the u edges of every species, at the
    diagnostics times of the series (before step n and at the end, as the series records)."""
    name = "vlasov_norms"
    memory_item = "time_series"
    what = "the time series"

    @classmethod
    def layout(cls, deck, every):
        n = record_steps(deck.time.steps, every)
        return {k: ((n, len(deck.species)), float) for k in NORM_SERIES}

    def __init__(self, sim, every: int):
        super().__init__(sim.deck, every)

    def _take(self, sim):
        v = sim.norms()
        self._put({k: v[:, i] for i, k in enumerate(NORM_SERIES)})

    def before(self, sim, n):
        if self.due(n):
            self._take(sim)

    def finish(self, sim):
        self._take(sim)

    def series_arrays(self) -> dict[str, np.ndarray]:
        return {k: self._view(k) for k in NORM_SERIES}


#: the recording handlers of a continuum run, in the order they are called; the series and field
#: snapshots are the PIC run's own handlers. Add a recorded series here.
VLASOV_HANDLERS = (PeakDensity, FieldSnapshots, DistributionSnapshots, SeriesRecorder,
                   NormRecorder)

