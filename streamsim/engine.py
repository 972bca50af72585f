"""The time loop: state, step, cadence of diagnostics, outputs and checkpoints.

``run(deck) -> Result`` is the whole job for one deck; it is what the CLI and the scans call.
No formulas live here: the push and deposit are in :mod:`kernels`, the solve in :mod:`fields`,
what is recorded in :mod:`diagnostics`, the files in :mod:`io`.

Time levels: at the top of step n the state holds x^n, u^{n-1/2}, the densities n_s^n and E^n.
The diagnostics of time t_n = n dt use kinetic energy and momentum averaged over u^{n-1/2} and
u^{n+1/2} (second-order accurate at t_n).
"""
from __future__ import annotations

import math
import signal
import sys
import time as _time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from . import fields, io, kernels, loading, units
from ._version import __version__
from .deck import Deck, DeckError, load_deck
from .health import check_deck
from .diagnostics import Cadence, Recorder, contrast
from .rundata import ParticleSnapshot, RunData


class NumericalError(RuntimeError):
    """The run met NaN/Inf; the message says when and where. Exit status 3 in the CLI."""


class Interrupted(RuntimeError):
    """SIGINT/SIGTERM arrived; a checkpoint was written and the run can be resumed."""


@dataclass
class Result:
    """What :func:`run` returns: named fields for notebooks and scripts."""
    deck: Deck
    folder: Path | None
    data: RunData                   # time series, snapshots, phase space, particle snapshots
    summary: dict                   # the same as summary.json
    x: dict[str, np.ndarray]        # final positions per species (c/omega_p)
    u: dict[str, np.ndarray]        # final momenta u^{N-1/2} per species
    warnings: list[str] = field(default_factory=list)

    @property
    def series(self):
        return self.data.series

    @property
    def times(self):
        return self.data.series.t


def _threads(requested: int) -> int:
    import numba
    avail = numba.config.NUMBA_NUM_THREADS
    n = requested or avail
    n = max(1, min(n, avail))
    numba.set_num_threads(n)
    return n


class _Signals:
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


class Simulation:
    """One deck's particles and fields, stepped by :meth:`advance`."""

    def __init__(self, deck: Deck, threads: int | None = None):
        self.deck = deck
        self.threads = _threads(deck.output.threads if threads is None else threads)
        self.nchunks = self.threads
        b = deck.box
        self.shape = kernels.SHAPES[b.shape]
        self.green = fields.green_function(b.cells, b.length, b.solver, b.filter_passes)
        self.names = [s.name for s in deck.species]
        self.charges = np.array([s.charge for s in deck.species])
        self.qm = np.array([s.charge / s.mass for s in deck.species])
        self.masses = np.array([s.mass for s in deck.species])
        self.steps = deck.time.steps
        self.dt = deck.time.dt
        self.cadence = Cadence.from_deck(deck)
        rng = np.random.default_rng(deck.random_seed)
        self.x, self.u, self.weights = [], [], []
        for s in deck.species:
            x, u, w = loading.load_species(s, deck, rng)
            self.x.append(x)
            self.u.append(u)
            self.weights.append(w)
        k = deck.output.phase_space_particles
        self.sub = [np.sort(rng.choice(x.size, size=min(k, x.size), replace=False)) for x in self.x]
        self.rng_state = rng.bit_generator.state
        self.recorder = Recorder(deck, self.steps, self.cadence, [s.size for s in self.sub])
        self.partial = np.zeros((self.nchunks, b.cells))
        self.sums = np.zeros((len(self.names), self.nchunks, kernels.NSUMS))
        self.step = 0
        self.peak_value = -math.inf
        self.peak_x = [np.empty_like(x) for x in self.x]
        self.peak_t = None
        self.energy0 = None
        self.energy_err_max = 0.0
        self.momentum_drift_max = 0.0
        self.findings = []
        self.finished = False   # finish() has recorded the last time level
        self._deposit_all()
        # u^0 -> u^{-1/2}: a backward half kick with E^0
        for s in range(len(self.names)):
            kernels.kick(self.u[s], self.x[s], self.efield, -0.5 * self.qm[s] * self.dt,
                         b.length, self.shape)
        self.old_sums = self._half_step_sums()

    def _half_step_sums(self) -> np.ndarray:
        """(S, 2): sum (gamma - 1) and sum u over u^{n-1/2} of each species, computed directly
        (at the start; during the run the previous push's n+1/2 sums carry over)."""
        b = self.deck.box
        out = np.zeros((len(self.names), 2))
        for s in range(len(self.names)):
            kernels.moment_sums(self.x[s], self.u[s], self.efield, 0.0, b.length, self.shape,
                                self.nchunks, self.sums[s])
            tot = self.sums[s].sum(axis=0)
            out[s] = tot[kernels.SUM_KE_OLD], tot[kernels.SUM_U_OLD]
        return out

    # -- fields --------------------------------------------------------------------------
    def _deposit_all(self) -> None:
        b = self.deck.box
        self.density = np.zeros((len(self.names), b.cells))
        for s, x in enumerate(self.x):
            bad = kernels.deposit(x, b.cells, b.length, self.shape, self.nchunks, self.partial)
            if bad:
                self._fail_particles()
            self.density[s] = self.partial.sum(axis=0) * (self.weights[s] / b.dx)
        self._solve()

    def _solve(self) -> None:
        rho = self.charges @ self.density
        self.efield = fields.solve(rho, self.green)

    # -- one step ------------------------------------------------------------------------
    def advance(self) -> None:
        """x^n, u^{n-1/2}, E^n -> x^{n+1}, u^{n+1/2}, E^{n+1}; records what the cadence asks."""
        n = self.step
        cad = self.cadence
        b = self.deck.box
        t = n * self.dt
        diag = n % cad.diag == 0
        if diag:
            cmax, crms = contrast(self.density)
            self._track_peak(t, cmax)
        if n % cad.fields == 0:
            self.recorder.snapshot(t, self.density, self.efield)
        if n % cad.phase == 0:
            self._phase(t)
        new_density = np.empty_like(self.density)
        for s in range(len(self.names)):
            kernels.push_deposit(self.x[s], self.u[s], self.efield, self.qm[s] * self.dt, self.dt,
                                 b.length, self.shape, self.nchunks, self.partial, self.sums[s])
            new_density[s] = self.partial.sum(axis=0) * (self.weights[s] / b.dx)
        if self.sums[:, :, kernels.SUM_BAD].any():
            self._fail_particles()
        tot = self.sums.sum(axis=1)
        new_sums = np.stack([tot[:, kernels.SUM_KE_NEW], tot[:, kernels.SUM_U_NEW]], axis=1)
        if diag:
            self._record_series(t, cmax, crms, self.old_sums, new_sums)
        self.old_sums = new_sums
        self.density = new_density
        self._solve()
        if not np.isfinite(self.efield).all():
            i = int(np.flatnonzero(~np.isfinite(self.efield))[0])
            raise NumericalError(f"the field became non-finite at step {n + 1} "
                                 f"(t = {(n + 1) * self.dt:.6g}/omega_p), grid node {i} "
                                 f"(x = {i * b.dx:.6g} c/omega_p)")
        self.step = n + 1

    def finish(self) -> None:
        """Record the diagnostics of the last time level t_N (without moving particles)."""
        n = self.step
        t = n * self.dt
        b = self.deck.box
        cmax, crms = contrast(self.density)
        self._track_peak(t, cmax)
        for s in range(len(self.names)):
            kernels.moment_sums(self.x[s], self.u[s], self.efield, self.qm[s] * self.dt, b.length,
                                self.shape, self.nchunks, self.sums[s])
        tot = self.sums.sum(axis=1)
        new_sums = np.stack([tot[:, kernels.SUM_KE_NEW], tot[:, kernels.SUM_U_NEW]], axis=1)
        self._record_series(t, cmax, crms, self.old_sums, new_sums)
        if self.recorder.arrays["snap_t"].size > self.recorder.counts["fields"]:
            self.recorder.snapshot(t, self.density, self.efield)
        if self.recorder.arrays["ps_t"].size > self.recorder.counts["phase"]:
            self._phase(t)
        self.finished = True

    # -- pieces --------------------------------------------------------------------------
    def _record_series(self, t, cmax, crms, old_sums, new_sums) -> None:
        """Energies and momenta at t_n from the sums over u^{n-1/2} and u^{n+1/2} ((S, 2) each:
        sum (gamma - 1), sum u), averaged: second order at t_n."""
        w_m = np.array(self.weights) * self.masses
        kinetic = 0.5 * (old_sums[:, 0] + new_sums[:, 0]) * w_m
        momentum = 0.5 * (old_sums[:, 1] + new_sums[:, 1]) * w_m
        we = fields.field_energy(self.efield, self.deck.box.dx)
        modes = fields.mode_amplitudes(self.efield, self.deck.output.modes)
        self.recorder.series(t, kinetic, we, momentum, modes, cmax, crms)
        total = kinetic.sum() + we
        if self.energy0 is None:
            self.energy0 = total
            self.momentum0 = momentum.sum()
            self.momentum_scale = float(np.sum(np.abs(w_m) * np.array(
                [np.abs(u).mean() + 1e-300 for u in self.u])))
        if self.energy0:
            self.energy_err_max = max(self.energy_err_max, abs(total - self.energy0) / abs(self.energy0))
        self.momentum_drift_max = max(self.momentum_drift_max, abs(momentum.sum() - self.momentum0))

    #: below this delta n/n (linear growth, where a snapshot is rarely the one kept) the peak
    #: snapshot is retaken only when the contrast beats it by PEAK_RETAKE, which skips most full
    #: copies of the positions; above it every new maximum is taken, so the snapshot is at the
    #: maximum itself
    PEAK_EXACT_ABOVE = 0.1
    PEAK_RETAKE = 2.0

    def _track_peak(self, t, cmax) -> None:
        value = float(cmax[:-1].max())
        if self.peak_t is None or value > self.peak_value * (
                1.0 if value >= self.PEAK_EXACT_ABOVE else self.PEAK_RETAKE):
            self.peak_value = value
            self.peak_t = t
            for dst, src in zip(self.peak_x, self.x):
                np.copyto(dst, src)

    def _phase(self, t) -> None:
        self.recorder.phase(t, [x[i] for x, i in zip(self.x, self.sub)],
                            [u[i] for u, i in zip(self.u, self.sub)])

    def _fail_particles(self) -> None:
        for s, (x, u) in enumerate(zip(self.x, self.u)):
            bad = np.flatnonzero(~((x >= 0) & (x < self.deck.box.length)) | ~np.isfinite(u))
            if bad.size:
                j = int(bad[0])
                raise NumericalError(
                    f"{bad.size} particle(s) of species '{self.names[s]}' became non-finite at "
                    f"step {self.step + 1} (t = {(self.step + 1) * self.dt:.6g}/omega_p); the first "
                    f"is particle {j} (x = {x[j]!r}, u = {u[j]!r})")
        raise NumericalError(f"non-finite particles at step {self.step + 1}")

    def snapshot(self, which: str) -> ParticleSnapshot | None:
        if which == "peak":
            if self.peak_t is None:
                return None
            xs, t = self.peak_x, self.peak_t
        else:
            xs, t = self.x, self.step * self.dt
        return ParticleSnapshot(t=float(t), x={n: x.copy() for n, x in zip(self.names, xs)},
                                weight={n: float(w) for n, w in zip(self.names, self.weights)})

    # -- checkpoints ---------------------------------------------------------------------
    def checkpoint_extra(self) -> dict:
        return {"energy0": self.energy0, "energy_err_max": self.energy_err_max,
                "momentum0": getattr(self, "momentum0", None),
                "momentum_scale": getattr(self, "momentum_scale", None),
                "momentum_drift_max": self.momentum_drift_max, "peak_t": self.peak_t,
                "threads": self.threads, "rng_state": io.jsonable(self.rng_state),
                "version": __version__, "finished": self.finished,
                "old_sums": self.old_sums.tolist(),
                "deck": _comparable(self.deck)}

    def save(self, path) -> None:
        arrays, counts = self.recorder.state()
        peak = self.snapshot("peak")
        io.write_checkpoint(path, self.step, self.x, self.u, arrays, counts,
                            self.checkpoint_extra(), peak, self.peak_value, self.density)

    def restore(self, path) -> None:
        ck = io.read_checkpoint(path, self.names)
        theirs = ck["extra"].get("deck")
        if theirs is not None:
            diff = _first_difference(theirs, _comparable(self.deck))
            if diff:
                raise io.OutputError(f"checkpoint {path} was written by a different deck "
                                     f"({diff} differs); resume with the run's own deck.toml")
        if len(ck["x"]) != len(self.x) or any(a.shape != b.shape for a, b in zip(ck["x"], self.x)):
            raise io.OutputError(f"checkpoint {path} does not belong to this deck (particle counts differ)")
        self.x, self.u = ck["x"], ck["u"]
        self.step = ck["step"]
        self.recorder.restore(ck["arrays"], ck["counts"])
        e = ck["extra"]
        self.energy0 = e["energy0"]
        self.energy_err_max = e["energy_err_max"]
        if e["momentum0"] is not None:
            self.momentum0 = e["momentum0"]
            self.momentum_scale = e["momentum_scale"]
        self.momentum_drift_max = e["momentum_drift_max"]
        self.peak_value = ck["peak_value"]
        self.peak_t = e["peak_t"]
        self.finished = bool(e.get("finished", False))
        restore_sums = e.get("old_sums")
        if ck["peak"] is not None:
            self.peak_x = [np.array(a) for a in ck["peak"][1]]
        if e.get("threads") != self.threads:
            self.resume_note = (f"checkpoint was written with {e.get('threads')} threads, resuming "
                                f"with {self.threads}: results stay correct but not bit-identical")
        if ck["density"] is not None and ck["density"].shape == self.density.shape:
            self.density = ck["density"]
            self._solve()
        else:
            self._deposit_all()
        self.old_sums = (np.array(restore_sums, dtype=float) if restore_sums is not None
                         else self._half_step_sums())


def _comparable(deck: Deck) -> dict:
    """The deck as plain data without what may change between a run and its resume."""
    d = deck.to_dict()
    d["output"] = {k: v for k, v in d["output"].items() if k not in ("folder", "threads")}
    return io.jsonable(d)


def _first_difference(a, b, path="") -> str | None:
    if isinstance(a, dict) and isinstance(b, dict):
        for k in sorted(set(a) | set(b)):
            found = _first_difference(a.get(k), b.get(k), f"{path}.{k}" if path else k)
            if found:
                return found
        return None
    if isinstance(a, list) and isinstance(b, list) and len(a) == len(b):
        for i, (x, y) in enumerate(zip(a, b)):
            found = _first_difference(x, y, f"{path}[{i}]")
            if found:
                return found
        return None
    return None if a == b else (path or "the deck")


# ----------------------------------------------------------------------------------------------
# run
# ----------------------------------------------------------------------------------------------
def _theory_block(deck: Deck) -> dict | None:
    try:
        from .theory import theory_for_deck
    except ImportError:
        return None
    try:
        return theory_for_deck(deck).to_dict(deck.units.density_cm3)
    except Exception as ex:  # noqa: BLE001 - the run goes on without theory, and says why
        return {"error": f"{ex.__class__.__name__}: {ex}"}


class HealthRefusal(DeckError):
    """A numerical-health rule says the run would be meaningless (``force=True`` runs it anyway)."""


def run(deck=None, out: str | Path | None = None, *, quiet: bool = True, resume: bool = False,
        write: bool = True, analyze: bool = True, threads: int | None = None,
        progress: bool | None = None, overrides: list[str] | None = None,
        stop_after_steps: int | None = None, force: bool = False) -> Result:
    """Run one deck to its end and return a :class:`Result`.

    deck: a Deck, a path to a TOML file, a dict, or None for the built-in default.
    out: the run folder (default: the deck's ``output.folder``). write=False keeps everything in
    memory. resume=True continues from ``<out>/checkpoint.h5``. progress: a tqdm bar on stderr
    (default: only when stderr is a terminal and not quiet). stop_after_steps: stop (as if
    interrupted) after this many steps — for tests of checkpointing. force: run even when a
    health rule refuses the deck.
    Raises DeckError (HealthRefusal), NumericalError (after writing what was good), Interrupted,
    io.OutputError.
    """
    deck = load_deck(deck, overrides)
    folder = Path(out if out is not None else deck.output.folder) if write else None
    warnings: list[str] = []

    def say(msg):
        warnings.append(msg)
        if not quiet:
            print(f"warning: {msg}", file=sys.stderr)

    theory = _theory_block(deck)
    findings = check_deck(deck, theory)
    for f in findings:
        if f.level == "refusal" and not force:
            raise HealthRefusal(f.key, f"{f.message} (--force runs it anyway)",
                                *(() if f.value is None else (f.value,)))
    for f in findings:
        say(str(f) if f.level == "warning" else f"{f} (run forced)")
    sim = Simulation(deck, threads)
    sim.findings = findings
    if resume:
        if folder is None or not (folder / io.FILES["checkpoint"]).exists():
            raise io.OutputError(f"nothing to resume: no {io.FILES['checkpoint']} in {folder}")
        sim.restore(folder / io.FILES["checkpoint"])
        if getattr(sim, "resume_note", None):
            say(sim.resume_note)
    if folder is not None:
        io.write_text(folder / io.FILES["deck"], deck.to_toml())
        if theory is not None:
            io.write_json(folder / io.FILES["theory"], theory)

    n_particles = sum(x.size for x in sim.x)
    show = (not quiet and sys.stderr.isatty()) if progress is None else progress
    bar = None
    if show:
        from tqdm import tqdm
        bar = tqdm(total=sim.steps, initial=sim.step, unit="step", file=sys.stderr,
                   dynamic_ncols=True, leave=False)
    warned_energy = False
    wall0 = _time.perf_counter()
    step0 = sim.step
    last_ui = wall0
    ck_every = sim.cadence.checkpoint
    status = "completed"
    try:
        with _Signals() as sig:
            while sim.step < sim.steps:
                try:
                    sim.advance()
                except NumericalError as ex:
                    if folder is not None:
                        _write_outputs(sim, folder, theory, status="numerical_error",
                                       wall=_time.perf_counter() - wall0, steps_done=sim.step - step0,
                                       warnings=warnings + [str(ex)], analyze=False)
                    raise
                if not warned_energy and sim.energy_err_max > deck.analysis.energy_tolerance:
                    warned_energy = True
                    say(f"relative energy error {sim.energy_err_max:.2e} exceeds "
                        f"analysis.energy_tolerance = {deck.analysis.energy_tolerance:g} at "
                        f"t = {sim.step * sim.dt:.4g}/omega_p")
                if folder is not None and ck_every and sim.step % ck_every == 0:
                    sim.save(folder / io.FILES["checkpoint"])
                if bar is not None:
                    now = _time.perf_counter()
                    if now - last_ui > 0.25 or sim.step == sim.steps:
                        rate = (sim.step - step0) * n_particles / max(now - wall0, 1e-9)
                        bar.set_postfix_str(f"t={sim.step * sim.dt:.1f}/wp, {rate:.2e} particle-steps/s",
                                            refresh=False)
                        bar.update(sim.step - bar.n)
                        last_ui = now
                if sig.caught is not None or (stop_after_steps is not None
                                              and sim.step - step0 >= stop_after_steps):
                    status = "interrupted"
                    break
    finally:
        if bar is not None:
            bar.close()
    wall = _time.perf_counter() - wall0
    if status == "interrupted":
        if folder is not None:
            sim.save(folder / io.FILES["checkpoint"])
            _write_outputs(sim, folder, theory, status="interrupted", wall=wall,
                           steps_done=sim.step - step0, warnings=warnings, analyze=False)
        raise Interrupted(f"stopped at step {sim.step} of {sim.steps} "
                          f"(t = {sim.step * sim.dt:.6g}/omega_p)"
                          + (f"; resume with --resume {folder}" if folder is not None else ""))
    if not sim.finished:
        sim.finish()
    summary, data = _write_outputs(sim, folder, theory, status=status, wall=wall,
                                   steps_done=sim.step - step0, warnings=warnings, analyze=analyze,
                                   quiet=quiet)
    if folder is not None:
        sim.save(folder / io.FILES["checkpoint"])
    return Result(deck=deck, folder=folder, data=data, summary=summary,
                  x=dict(zip(sim.names, sim.x)), u=dict(zip(sim.names, sim.u)), warnings=warnings)


def _write_outputs(sim: Simulation, folder: Path | None, theory, *, status, wall, steps_done,
                   warnings, analyze=True, quiet=True):
    deck = sim.deck
    rec = sim.recorder
    series = rec.timeseries()
    snaps = rec.density_snapshots()
    phase = rec.phase_space()
    peak = sim.snapshot("peak")
    end = sim.snapshot("end")
    data = RunData(deck=deck.to_dict(), names=sim.names, length=deck.box.length,
                   cells=deck.box.cells, dt=sim.dt, series=series, snapshots=snaps,
                   phase_space=phase, peak=peak, end=end, theory=theory)
    n_particles = int(sum(x.size for x in sim.x))
    total_charge = float(sum(s.charge * s.density for s in deck.species))
    summary = {
        "streamsim_version": __version__,
        "deck_title": deck.title,
        "status": status,
        "normalization": units.normalization(deck.units.density_cm3),
        "steps": int(sim.step),
        "dt": sim.dt,
        "t_end": sim.step * sim.dt,
        "particles": n_particles,
        "threads": sim.threads,
        "wall_s": wall,
        "particle_steps_per_s": steps_done * n_particles / wall if wall > 0 else None,
        "background_charge_density": -total_charge,
        "energy": {"relative_error_max": sim.energy_err_max,
                   "tolerance": deck.analysis.energy_tolerance,
                   "warning": sim.energy_err_max > deck.analysis.energy_tolerance},
        "momentum": {"drift_max": sim.momentum_drift_max,
                     "drift_max_relative": sim.momentum_drift_max / sim.momentum_scale
                     if getattr(sim, "momentum_scale", 0) else None},
        "warnings": warnings,
        "health": [{"level": f.level, "rule": f.rule, "key": f.key, "message": f.message}
                   for f in sim.findings],
    }
    if theory is not None:
        summary["theory"] = theory
    if folder is not None:  # the raw data first: nothing is lost if the analysis fails
        fsteps = [int(round(t / sim.dt)) for t in snaps.t]
        psteps = [int(round(t / sim.dt)) for t in phase.t]
        io.write_series(folder / io.FILES["series"], sim.names, series,
                        {"dt": sim.dt, "length": deck.box.length, "cells": deck.box.cells})
        io.write_openpmd(folder / io.FILES["fields"], deck, snaps, phase, list(sim.charges),
                         sim.weights, fsteps, psteps)
        io.write_particles(folder / io.FILES["particles"], {"peak": peak, "end": end})
        io.write_json(folder / io.FILES["summary"], summary)
    if analyze:
        try:
            from .analysis import analyze as _analyze
        except ImportError:
            _analyze = None
        if _analyze is not None:
            try:
                summary.update(_analyze(data, folder=folder, write=folder is not None))
            except io.OutputError:
                raise
            except Exception as ex:  # noqa: BLE001 - keep the run, report the failure
                summary["analysis_error"] = f"{ex.__class__.__name__}: {ex}"
                warnings.append(f"the analysis failed ({summary['analysis_error']}); the run's data "
                                f"are complete, retry with `streamsim analyze`")
        if folder is not None:
            io.write_json(folder / io.FILES["summary"], summary)
    return summary, data
