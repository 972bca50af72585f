"""What is recorded during a run, and at which cadence: the cadenced handlers of the time loop.

A handler is a small object with a cadence (``every``, in steps; 0 = never) and up to three calls:

- ``before(sim, n)``: at the top of step n, where the state holds x^n, u^{n-1/2}, the densities
  n^n and E^n;
- ``after(sim, n)``: once step n is done; ``sim.prev_density`` / ``sim.prev_efield`` are n^n and
  E^n, ``sim.old_sums`` / ``sim.new_sums`` the kinetic-energy and momentum sums over u^{n-1/2}
  and u^{n+1/2};
- ``finish(sim)``: the last time level t_N (no particle moves).

Handlers that hold data say so with ``state()`` / ``restore()`` (arrays, exact in a checkpoint)
and ``meta()`` / ``restore_meta()`` (JSON). Arrays are preallocated, so a run's memory for
diagnostics is fixed at the start (a run extended to a later end restores them into arrays
sized for the new end, :func:`restore_rows`). Adding a recorded quantity is one handler (here,
or in its own module) and one line in :func:`standard_handlers`.
"""
from __future__ import annotations

import math

import numpy as np

from . import fields
from .rundata import DensitySnapshots, ParticleSnapshot, PhaseSpace, TimeSeries

__all__ = ["Handler", "Sampler", "SeriesRecorder", "FieldSnapshots", "PhaseSpaceSampler", "PeakSnapshot",
           "stride", "record_steps", "restore_rows", "contrast", "standard_handlers"]


def stride(interval: float, dt: float) -> int:
    """Steps between two records for a cadence ``interval`` in 1/omega_p (>= 1)."""
    return max(1, int(round(interval / dt)))


def record_steps(steps: int, every: int) -> int:
    """How many records a run of ``steps`` steps makes at a stride (step 0 and the last included)."""
    n = steps // every + 1
    if steps % every:
        n += 1
    return n


def restore_rows(dst: np.ndarray, src: np.ndarray | None, where: str) -> None:
    """Copy the checkpointed records ``src`` into the preallocated ``dst``: the same shape, or
    fewer rows when the run is extended to a later end (``dst`` is then sized for the new end
    and its remaining rows are still to be filled). Raises ValueError for anything else."""
    if (src is None or src.ndim != dst.ndim or src.shape[1:] != dst.shape[1:]
            or (src.ndim and src.shape[0] > dst.shape[0])):
        raise ValueError(f"checkpoint does not match this deck (diagnostic {where})")
    if src.ndim:
        dst[:src.shape[0]] = src
    else:
        dst[...] = src


def contrast(density: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """max and rms over the grid of delta n/n = n(x)/<n> - 1, per row of ``density`` (S, N) and
    for the sum of all rows (the pair total) as the last entry."""
    rows = np.vstack([density, density.sum(axis=0, keepdims=True)])
    mean = rows.mean(axis=1, keepdims=True)
    dn = rows / mean - 1.0
    return dn.max(axis=1), np.sqrt(np.mean(dn * dn, axis=1))


class Handler:
    """Base of the cadenced handlers; subclasses override what they use."""
    name = "handler"
    every = 0

    def due(self, n: int) -> bool:
        return bool(self.every) and n % self.every == 0

    def before(self, sim, n: int) -> None:
        pass

    def after(self, sim, n: int) -> None:
        pass

    def finish(self, sim) -> None:
        pass

    def state(self) -> dict[str, np.ndarray]:
        return {}

    def restore(self, arrays: dict[str, np.ndarray]) -> None:
        pass

    def meta(self) -> dict:
        return {}

    def restore_meta(self, meta: dict) -> None:
        pass


class _Arrays(Handler):
    """A handler that fills preallocated arrays row by row."""

    def __init__(self):
        self.arrays: dict[str, np.ndarray] = {}
        self.count = 0

    def _put(self, values: dict) -> None:
        i = self.count
        for k, v in values.items():
            self.arrays[k][i] = v
        self.count = i + 1

    def state(self):
        return {**self.arrays, "count": np.array(self.count)}

    def restore(self, arrays):
        for k, dst in self.arrays.items():
            restore_rows(dst, arrays.get(k), f"{self.name}/{k}")
        self.count = int(arrays["count"])

    def _view(self, key):
        return self.arrays[key][:self.count].copy()


class Sampler(_Arrays):
    """An array handler that takes one sample of the state at the top of every ``every``-th
    step and, when the last step was not on the cadence, one more at the end. Subclasses give
    ``_take(sim, t)``."""

    def _take(self, sim, t) -> None:
        raise NotImplementedError

    def before(self, sim, n):
        if self.due(n):
            self._take(sim, n * sim.dt)

    def finish(self, sim):
        if self.arrays["t"].size > self.count:
            self._take(sim, sim.step * sim.dt)


class SeriesRecorder(_Arrays):
    """Energies, momenta, complex E_k of modes 1..M, the complex density modes n_s,m of every
    species (``density_modes`` (n, S, M), the growth analysis's eigenmode projection) and max/rms
    delta n/n at t_n, every
    ``output.diagnostics_interval``; also the running energy error and momentum drift.

    Kinetic energy and momentum at t_n are the averages of the sums over u^{n-1/2} and
    u^{n+1/2} (second order at t_n)."""
    name = "series"

    def __init__(self, sim, every: int):
        super().__init__()
        self.every = every
        S, M = len(sim.names), sim.deck.output.modes
        n = record_steps(sim.steps, every)
        self.arrays = {"t": np.zeros(n), "kinetic": np.zeros((n, S)), "field_energy": np.zeros(n),
                       "momentum": np.zeros((n, S)), "mode_amplitude": np.zeros((n, M), complex),
                       "contrast_max": np.zeros((n, S + 1)), "contrast_rms": np.zeros((n, S + 1)),
                       "density_modes": np.zeros((n, S, M), complex)}
        self.w_m = np.array(sim.weights) * sim.masses
        self.modes = M
        self.dx = sim.deck.box.dx
        self.energy0 = None
        self.energy_err_max = 0.0
        self.momentum0 = None
        self.momentum_scale = None
        self.momentum_drift_max = 0.0

    def after(self, sim, n):
        if self.due(n):
            self._record(n * sim.dt, sim.prev_density, sim.prev_efield, sim.old_sums,
                         sim.new_sums, sim.u)

    def finish(self, sim):
        self._record(sim.step * sim.dt, sim.density, sim.efield, sim.sums_half,
                     sim.final_sums(), sim.u)

    def _record(self, t, density, efield, old_sums, new_sums, us):
        cmax, crms = contrast(density)
        kinetic = 0.5 * (old_sums[:, 0] + new_sums[:, 0]) * self.w_m
        momentum = 0.5 * (old_sums[:, 1] + new_sums[:, 1]) * self.w_m
        we = fields.field_energy(efield, self.dx)
        self._put({"t": t, "kinetic": kinetic, "field_energy": we, "momentum": momentum,
                   "mode_amplitude": fields.mode_amplitudes(efield, self.modes),
                   "contrast_max": cmax, "contrast_rms": crms,
                   "density_modes": np.array([fields.mode_amplitudes(d, self.modes)
                                              for d in density])})
        total = kinetic.sum() + we
        if self.energy0 is None:
            self.energy0 = float(total)
            self.momentum0 = float(momentum.sum())
            self.momentum_scale = float(np.sum(np.abs(self.w_m) * np.array(
                [np.abs(u).mean() + 1e-300 for u in us])))
        if self.energy0:
            self.energy_err_max = max(self.energy_err_max,
                                      abs(total - self.energy0) / abs(self.energy0))
        self.momentum_drift_max = max(self.momentum_drift_max,
                                      abs(float(momentum.sum()) - self.momentum0))

    def series(self) -> TimeSeries:
        return TimeSeries(**{k: self._view(k) for k in self.arrays})

    def meta(self):
        return {"energy0": self.energy0, "energy_err_max": self.energy_err_max,
                "momentum0": self.momentum0, "momentum_scale": self.momentum_scale,
                "momentum_drift_max": self.momentum_drift_max}

    def restore_meta(self, meta):
        for k, v in meta.items():
            setattr(self, k, v)


class FieldSnapshots(Sampler):
    """Densities per species and E on the grid every ``output.fields_interval``."""
    name = "fields"

    def __init__(self, sim, every: int):
        super().__init__()
        self.every = every
        S, N = len(sim.names), sim.deck.box.cells
        n = record_steps(sim.steps, every)
        self.arrays = {"t": np.zeros(n), "density": np.zeros((n, S, N)), "efield": np.zeros((n, N))}

    def _take(self, sim, t):
        self._put({"t": t, "density": sim.density, "efield": sim.efield})

    def snapshots(self) -> DensitySnapshots:
        return DensitySnapshots(t=self._view("t"), density=self._view("density"),
                                efield=self._view("efield"))


class PhaseSpaceSampler(Sampler):
    """(x, u) of a fixed random subsample of each species every ``output.phase_space_interval``."""
    name = "phase"

    def __init__(self, sim, every: int):
        super().__init__()
        self.every = every
        self.names = sim.names
        self.sub = sim.subsample
        n = record_steps(sim.steps, every)
        self.arrays = {"t": np.zeros(n)}
        for name, idx in zip(self.names, self.sub):
            self.arrays[f"x/{name}"] = np.zeros((n, idx.size))
            self.arrays[f"u/{name}"] = np.zeros((n, idx.size))

    def _take(self, sim, t):
        row = {"t": t}
        for name, x, u, idx in zip(self.names, sim.x, sim.u, self.sub):
            row[f"x/{name}"] = x[idx]
            row[f"u/{name}"] = u[idx]
        self._put(row)

    def phase_space(self) -> PhaseSpace:
        return PhaseSpace(t=self._view("t"), x={s: self._view(f"x/{s}") for s in self.names},
                          u={s: self._view(f"u/{s}") for s in self.names})


class PeakSnapshot(Handler):
    """Every particle's position at the diagnostics time of the largest max delta n/n of any
    species (for the clumps and the form factor at the contrast maximum).

    Below delta n/n = ``EXACT_ABOVE`` (linear growth, where a snapshot is rarely the one kept)
    the snapshot is retaken only when the contrast beats it by ``RETAKE``, which skips most full
    copies of the positions; above it every new maximum is taken, so the snapshot is at the
    maximum itself."""
    name = "peak"
    EXACT_ABOVE = 0.1
    RETAKE = 2.0

    def __init__(self, sim, every: int):
        self.every = every
        self.names = sim.names
        self.weights = sim.weights
        self.x = [np.empty_like(x) for x in sim.x]
        self.value = -math.inf
        self.t = None

    def _track(self, sim, t):
        value = float(contrast(sim.density)[0][:-1].max())
        if self.t is None or value > self.value * (1.0 if value >= self.EXACT_ABOVE
                                                   else self.RETAKE):
            self.value = value
            self.t = t
            for dst, src in zip(self.x, sim.x):
                np.copyto(dst, src)

    def before(self, sim, n):
        if self.due(n):
            self._track(sim, n * sim.dt)

    def finish(self, sim):
        self._track(sim, sim.step * sim.dt)

    def snapshot(self) -> ParticleSnapshot | None:
        if self.t is None:
            return None
        return ParticleSnapshot(t=float(self.t), x={n: x.copy() for n, x in zip(self.names, self.x)},
                                weight={n: float(w) for n, w in zip(self.names, self.weights)})

    def state(self):
        return {f"x/{i}": x for i, x in enumerate(self.x)} if self.t is not None else {}

    def restore(self, arrays):
        for i in range(len(self.x)):
            if f"x/{i}" in arrays:
                self.x[i] = np.array(arrays[f"x/{i}"])

    def meta(self):
        return {"t": self.t, "value": self.value if math.isfinite(self.value) else None}

    def restore_meta(self, meta):
        self.t = meta.get("t")
        v = meta.get("value")
        self.value = -math.inf if v is None else float(v)


def standard_handlers(sim) -> list[Handler]:
    """The recording handlers every run has, at the deck's cadences (in this order)."""
    o, dt = sim.deck.output, sim.dt
    diag = stride(o.diagnostics_interval, dt)
    return [PeakSnapshot(sim, diag), FieldSnapshots(sim, stride(o.fields_interval, dt)),
            PhaseSpaceSampler(sim, stride(o.phase_space_interval, dt)),
            SeriesRecorder(sim, diag)]
