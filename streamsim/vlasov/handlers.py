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
    record_steps, stride
from ..rundata import DensityProfile

__all__ = ["PeakDensity", "DistributionSnapshots", "NormRecorder", "vlasov_handlers",
           "NORM_SERIES"]

#: the series names the norms are written under in timeseries.h5, (n, S) each
NORM_SERIES = ("vlasov_mass", "vlasov_l1", "vlasov_l2", "vlasov_f_min", "vlasov_edge_mass")


class PeakDensity(Handler):
    """Every species' density at the diagnostics time of the largest max delta n/n of any
    species (the continuum's stand-in for the PIC peak positions)."""
    name = "peak"

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

    def __init__(self, sim, every: int):
        super().__init__()
        self.every = every
        n = record_steps(sim.steps, every)
        self.arrays = {"t": np.zeros(n)}
        for s, f in enumerate(sim.f):
            self.arrays[f"f/{s}"] = np.zeros((n,) + f.shape)
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

    def __init__(self, sim, every: int):
        super().__init__()
        self.every = every
        S = len(sim.names)
        n = record_steps(sim.steps, every)
        self.arrays = {k: np.zeros((n, S)) for k in NORM_SERIES}

    def _take(self, sim):
        v = sim.norms()
        self._put({k: v[:, i] for i, k in enumerate(NORM_SERIES)})

    def before(self, sim, n):
        if self.due(n):
            self._take(sim)

    def finish(self, sim):
        self._take(sim)

    def series(self) -> dict[str, np.ndarray]:
        return {k: self._view(k) for k in NORM_SERIES}


def vlasov_handlers(sim) -> list[Handler]:
    """The recording handlers of a continuum run, at the deck's cadences; the series and field
    snapshots are the PIC run's own handlers."""
    o, dt = sim.deck.output, sim.dt
    diag = stride(o.diagnostics_interval, dt)
    fevery = stride(o.fields_interval, dt)
    return [PeakDensity(sim, diag), FieldSnapshots(sim, fevery),
            DistributionSnapshots(sim, fevery), SeriesRecorder(sim, diag), NormRecorder(sim, diag)]
