"""What is recorded during a run, and at which cadence: the cadenced handlers of the time loop.

A handler is a small object with a cadence (``every``, in steps; 0 = never) and up to three calls:

- ``before(sim, n)``: at the top of step n, where the state holds x^n, u^{n-1/2}, the densities
  n^n and E^n;
- ``after(sim, n)``: once step n is done; ``sim.prev_density`` / ``sim.prev_efield`` are n^n and
  E^n, ``sim.old_sums`` / ``sim.new_sums`` the kinetic-energy and momentum sums over u^{n-1/2}
  and u^{n+1/2};
- ``finish(sim)``: the last time level t_N (no particle moves).

Handlers that hold data say so with ``state()`` / ``restore()`` (arrays, exact in a checkpoint)
and ``meta()`` / ``restore_meta()`` (JSON). Arrays are preallocated from the handler's
``layout(deck, every)``, so a run's memory for diagnostics is fixed at the start and known from
the deck alone (``nbytes(deck)``, which :mod:`streamsim.memory` sums before anything is
allocated). What a handler gives ``series_arrays()`` reaches the run's ``TimeSeries`` (and so
timeseries.h5 and the analysis); what it gives ``run_summary(deck)`` joins summary.json. A run
extended to a later end restores the arrays into arrays sized for the new end (:func:`restore_rows`).
Adding a recorded quantity is one handler (here, or in its own module) and one entry in its
method's list of handler classes (:data:`PIC_HANDLERS`, or the Vlasov one).
"""
from __future__ import annotations

import math

import numpy as np

from . import fields
from .rundata import DensitySnapshots, ParticleSnapshot, PhaseSpace, TimeSeries

__all__ = ["Handler", "Sampler", "SeriesRecorder", "FieldSnapshots", "PhaseSpaceSampler", "PeakSnapshot",
           "stride", "record_steps", "restore_rows", "contrast", "make_handlers",
           "PIC_HANDLERS", "layout_bytes", "collect_series", "handler_classes"]


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


def layout_bytes(layout: dict) -> int:
    """Bytes of a layout {name: (shape, dtype)}."""
    return int(sum(math.prod(shape) * np.dtype(dtype).itemsize
                   for shape, dtype in layout.values()))


def allocate(layout: dict) -> dict[str, np.ndarray]:
    """Zeroed arrays of a layout {name: (shape, dtype)}."""
    return {k: np.zeros(shape, dtype) for k, (shape, dtype) in layout.items()}


class Handler:
    """Base of the cadenced handlers; subclasses override what they use.

    Class attributes for the memory check: ``memory_item`` (the estimate's line it joins),
    ``cadence_key`` (the ``output.*`` cadence that sets its size) and ``what`` (its name in a
    refusal)."""
    name = "handler"
    every = 0
    memory_item = "diagnostics"
    cadence_key = "diagnostics_interval"
    what = "the diagnostics"
    #: which handler's energy error the energy watch and summary.json ``energy`` report: the
    #: one of highest rank (the series: conservation; a driven run's drive: the balance)
    energy_rank = 0

    @classmethod
    def every_for(cls, deck) -> int:
        """The handler's cadence in steps for a (resolved) deck."""
        return stride(getattr(deck.output, cls.cadence_key), deck.time.dt)

    @classmethod
    def layout(cls, deck, every: int) -> dict:
        """The arrays it preallocates, {name: (shape, dtype)} (none by default)."""
        return {}

    @classmethod
    def nbytes(cls, deck) -> int:
        """Bytes it will preallocate for a (resolved) deck, before any simulation exists."""
        return layout_bytes(cls.layout(deck, cls.every_for(deck)))

    @classmethod
    def start_lines(cls, deck) -> list[str]:
        """Lines printed before the run starts (not quiet)."""
        return []

    def series_arrays(self) -> dict[str, np.ndarray]:
        """Arrays for the run's TimeSeries (timeseries.h5), first axis time."""
        return {}

    def run_summary(self, deck) -> dict:
        """Entries for summary.json (merged one level deep, in handler order)."""
        return {}

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
    """A handler that fills preallocated arrays (its ``layout``) row by row."""

    def __init__(self, deck=None, every: int = 0):
        self.every = every
        self.arrays: dict[str, np.ndarray] = allocate(self.layout(deck, every)) \
            if deck is not None else {}
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
    memory_item = "time_series"
    what = "the time series"
    energy_rank = 1

    @classmethod
    def layout(cls, deck, every):
        S, M = len(deck.species), deck.output.recorded_modes
        n = record_steps(deck.time.steps, every)
        return {"t": ((n,), float), "kinetic": ((n, S), float), "field_energy": ((n,), float),
                "momentum": ((n, S), float), "mode_amplitude": ((n, M), complex),
                "contrast_max": ((n, S + 1), float), "contrast_rms": ((n, S + 1), float),
                "density_modes": ((n, S, M), complex)}

    def __init__(self, sim, every: int):
        super().__init__(sim.deck, every)
        S, M = len(sim.names), sim.deck.output.recorded_modes
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

    def series_arrays(self):
        return {k: self._view(k) for k in self.arrays}

    def run_summary(self, deck):
        tol = deck.analysis.energy_tolerance
        scale = self.momentum_scale
        return {"energy": {"relative_error_max": self.energy_err_max, "tolerance": tol,
                           "warning": self.energy_err_max > tol},
                "momentum": {"error_max": self.momentum_drift_max,
                             "error_max_relative": self.momentum_drift_max / scale
                             if scale else None}}

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
    memory_item = "field_snapshots"
    cadence_key = "fields_interval"
    what = "the field snapshots"

    @classmethod
    def layout(cls, deck, every):
        S, N = len(deck.species), deck.box.cells
        n = record_steps(deck.time.steps, every)
        return {"t": ((n,), float), "density": ((n, S, N), float), "efield": ((n, N), float)}

    def __init__(self, sim, every: int):
        super().__init__(sim.deck, every)

    def _take(self, sim, t):
        self._put({"t": t, "density": sim.density, "efield": sim.efield})

    def snapshots(self) -> DensitySnapshots:
        return DensitySnapshots(t=self._view("t"), density=self._view("density"),
                                efield=self._view("efield"))


class PhaseSpaceSampler(Sampler):
    """(x, u) of a fixed random subsample of each species every ``output.phase_space_interval``."""
    name = "phase"
    memory_item = "phase_space"
    cadence_key = "phase_space_interval"
    what = "the phase-space samples"

    @classmethod
    def layout(cls, deck, every):
        n = record_steps(deck.time.steps, every)
        out = {"t": ((n,), float)}
        for s in deck.species:   # the subsample the simulation draws: min(k, particles)
            size = min(deck.output.phase_space_particles, s.particles_per_cell * deck.box.cells)
            out[f"x/{s.name}"] = ((n, size), float)
            out[f"u/{s.name}"] = ((n, size), float)
        return out

    def __init__(self, sim, every: int):
        super().__init__(sim.deck, every)
        self.names = sim.names
        self.sub = sim.subsample
        for name, idx in zip(self.names, self.sub):
            if self.arrays[f"x/{name}"].shape[1] != idx.size:
                raise ValueError(f"phase-space subsample of {name}: {idx.size} particles, the "
                                 f"layout says {self.arrays[f'x/{name}'].shape[1]}")

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
    memory_item = "particles"
    what = "the particles"
    EXACT_ABOVE = 0.1
    RETAKE = 2.0

    @classmethod
    def layout(cls, deck, every):
        """One copy of every species' positions."""
        return {f"x/{i}": ((s.particles_per_cell * deck.box.cells,), float)
                for i, s in enumerate(deck.species)}

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


def _emission_recorder(deck):
    from .emission_snapshots import EmissionSnapshots   # one handler in its own module
    return [EmissionSnapshots]


def _drive_recorder(deck):
    if deck.drive is None:
        return []
    from .drive_diagnostics import DriveRecorder
    return [DriveRecorder]


#: the recording handlers of a PIC run, in the order they are called: classes, or functions of
#: the deck giving a list of classes (a handler that only some decks have). Add a recorded
#: series here.
PIC_HANDLERS = (PeakSnapshot, FieldSnapshots, PhaseSpaceSampler, SeriesRecorder, _drive_recorder,
                _emission_recorder)


def handler_classes(deck, entries=PIC_HANDLERS) -> list[type]:
    """The handler classes a deck's run has, from a method's list of entries."""
    out = []
    for e in entries:
        out += [e] if isinstance(e, type) else list(e(deck))
    return out


def make_handlers(sim, entries=PIC_HANDLERS) -> list[Handler]:
    """The handlers of ``entries`` for a simulation, each at its own cadence for the deck."""
    return [cls(sim, cls.every_for(sim.deck)) for cls in handler_classes(sim.deck, entries)]


def collect_series(handlers) -> TimeSeries:
    """The run's TimeSeries: every handler's ``series_arrays()``, in handler order."""
    arrays: dict[str, np.ndarray] = {}
    for h in handlers:
        arrays.update(h.series_arrays())
    return TimeSeries(**arrays)

