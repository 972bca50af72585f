"""One deck, one way through: resolve -> theory -> health -> time loop with cadenced handlers ->
io -> analysis -> figures -> summary.json (once, atomically).

``run(deck) -> Result`` is the whole job for one deck; the CLI, the scans and the validation call
it. The time loop only calls :meth:`Simulation.advance` and the handlers: the recording ones of
:mod:`streamsim.diagnostics` and the run-control ones here (energy watch, checkpoint, progress,
stop). Adding a handler touches one file.
"""
from __future__ import annotations

import os
import re
import signal
import socket
import sys
import time as _time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from . import io, units
from ._version import __version__
from .deck import Deck, DeckError, load_deck
from .diagnostics import Handler, standard_handlers, stride
from .drive_diagnostics import drive_handlers
from .engine import NumericalError, Simulation
from .health import check_deck
from .rundata import ParticleSnapshot, RunData

__all__ = ["run", "Result", "Interrupted", "HealthRefusal", "FolderInUse", "DifferentDeck",
           "NumericalError"]


class Interrupted(RuntimeError):
    """SIGINT/SIGTERM arrived; a checkpoint was written and the run can be resumed."""


class HealthRefusal(DeckError):
    """A numerical-health rule says the run would be meaningless (``force=True`` runs it anyway)."""


class DifferentDeck(DeckError):
    """The run folder holds a finished run of a different deck (``force=True`` overwrites it)."""


class FolderInUse(io.OutputError):
    """Another process is running into the same folder. Exit status 4 in the CLI."""


@dataclass
class Result:
    """What :func:`run` returns: named fields for notebooks and scripts.

    ``summary`` is summary.json as a dict; ``analysis`` the analysis blocks' results by name
    (each with its summary entries, tables, figures and terminal lines); ``dispersion`` the
    deck's linear theory (:class:`streamsim.theory.Dispersion`) or None."""
    deck: Deck
    folder: Path | None
    data: RunData                   # time series, snapshots, phase space, particle snapshots
    summary: dict                   # the same as summary.json
    x: dict[str, np.ndarray]        # final positions per species (c/omega_p)
    u: dict[str, np.ndarray]        # final momenta u^{N-1/2} per species
    warnings: list[str] = field(default_factory=list)
    analysis: dict = field(default_factory=dict)
    dispersion: object = None

    @property
    def series(self):
        return self.data.series

    @property
    def times(self):
        return self.data.series.t


# ----------------------------------------------------------------------------------------------
# run-control handlers
# ----------------------------------------------------------------------------------------------
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


class EnergyWatch(Handler):
    """Warns once when the relative energy error exceeds ``analysis.energy_tolerance``."""
    name = "energy_watch"

    def __init__(self, recorder, tolerance: float, say):
        self.recorder, self.tolerance, self.say = recorder, tolerance, say
        self.every = recorder.every
        self.warned = False

    def after(self, sim, n):
        if not self.warned and self.recorder.energy_err_max > self.tolerance:
            self.warned = True
            self.say(f"relative energy error {self.recorder.energy_err_max:.2e} exceeds "
                     f"analysis.energy_tolerance = {self.tolerance:g} at "
                     f"t = {sim.step * sim.dt:.4g}/omega_p")


class Checkpointer(Handler):
    """Saves the whole state every ``output.checkpoint_interval`` (0: only at the end and on a
    signal)."""
    name = "checkpoint"

    def __init__(self, every: int, save):
        self.every, self.save = every, save

    def after(self, sim, n):
        if self.every and sim.step % self.every == 0:
            self.save()


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

    def __init__(self, signals: _Signals, step0: int, budget: int | None):
        self.signals, self.step0, self.budget = signals, step0, budget
        self.requested = False

    def after(self, sim, n):
        if self.signals.caught is not None or (self.budget is not None
                                               and sim.step - self.step0 >= self.budget):
            self.requested = True


# ----------------------------------------------------------------------------------------------
# the run folder: lock, the deck it already holds
# ----------------------------------------------------------------------------------------------
LOCK_FILE = ".streamsim.lock"


class _FolderLock:
    """An exclusive advisory lock (fcntl.flock) on ``<folder>/.streamsim.lock`` holding the
    owner's pid and host; released when the run ends or its process dies."""

    def __init__(self, folder: Path):
        self.path = folder / LOCK_FILE
        self.fh = None

    def acquire(self) -> None:
        import fcntl
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            fh = open(self.path, "a+", encoding="utf-8")
        except OSError as ex:
            raise io.OutputError(f"cannot write {self.path}: {ex.strerror or ex}") from None
        try:
            fcntl.flock(fh, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            fh.seek(0)
            owner = fh.read().strip() or "another process"
            fh.close()
            raise FolderInUse(f"{self.path.parent} is in use by a running streamsim ({owner}); "
                              f"wait for it or choose another --out") from None
        fh.seek(0)
        fh.truncate()
        fh.write(f"pid {os.getpid()} on {socket.gethostname()}\n")
        fh.flush()
        self.fh = fh

    def release(self) -> None:
        if self.fh is not None:
            import fcntl
            fcntl.flock(self.fh, fcntl.LOCK_UN)
            self.fh.close()
            self.fh = None


def comparable(deck: Deck) -> dict:
    """The deck as plain data without what may change between a run and its resume."""
    d = deck.to_dict()
    d["output"] = {k: v for k, v in d["output"].items() if k not in ("folder", "threads")}
    return io.jsonable(d)


def first_difference(a, b, path="") -> str | None:
    """The first key path at which two plain-data decks differ, or None."""
    if isinstance(a, dict) and isinstance(b, dict):
        for k in sorted(set(a) | set(b)):
            found = first_difference(a.get(k), b.get(k), f"{path}.{k}" if path else k)
            if found:
                return found
        return None
    if isinstance(a, list) and isinstance(b, list) and len(a) == len(b):
        for i, (x, y) in enumerate(zip(a, b)):
            found = first_difference(x, y, f"{path}[{i}]")
            if found:
                return found
        return None
    return None if a == b else (path or "the deck")


def _check_existing_run(folder: Path, deck: Deck) -> None:
    """Refuse to run over a finished run of a different deck (first differing key named)."""
    import json
    summ, old = folder / io.FILES["summary"], folder / io.FILES["deck"]
    if not (summ.is_file() and old.is_file()):
        return
    try:
        if json.loads(summ.read_text(encoding="utf-8")).get("status") != "completed":
            return
        theirs = comparable(load_deck(old))
    except (DeckError, OSError, ValueError):
        return      # an unreadable old deck protects nothing
    diff = first_difference(theirs, comparable(deck))
    if diff:
        raise DifferentDeck("", f"{folder} holds a finished run of a different deck ({diff} "
                                f"differs); choose another --out, or --force to overwrite it")


# ----------------------------------------------------------------------------------------------
# warnings
# ----------------------------------------------------------------------------------------------
_SPECIES_PREFIX = re.compile(r"^species (\S+): ")


def merge_findings(findings) -> list[str]:
    """One line per health finding; a finding that holds alike for several species is one line
    naming them all ("species electrons, positrons: ...")."""
    lines: list[str] = []
    groups: dict[tuple, list[str]] = {}
    order: list[tuple] = []
    for f in findings:
        suffix = "" if f.level == "warning" else " (run forced)"
        m = _SPECIES_PREFIX.match(f.message)
        if m:
            key = (f.rule, f.level, f.message[m.end():], suffix)
            if key not in groups:
                groups[key] = []
                order.append(key)
            groups[key].append(m.group(1))
        else:
            order.append((f.rule, f.level, f.message, suffix, None))
    for key in order:
        if len(key) == 5:
            rule, _, msg, suffix, _ = key
            lines.append(f"{rule}: {msg}{suffix}")
        else:
            rule, _, msg, suffix = key
            lines.append(f"{rule}: species {', '.join(groups[key])}: {msg}{suffix}")
    return lines


# ----------------------------------------------------------------------------------------------
# run
# ----------------------------------------------------------------------------------------------
def _theory(deck: Deck):
    """(Dispersion or None, the theory.json object or None)."""
    from .theory import theory_for_deck
    try:
        disp = theory_for_deck(deck)
    except Exception as ex:  # noqa: BLE001 - the run goes on without theory, and says why
        return None, {"error": f"{ex.__class__.__name__}: {ex}"}
    return disp, disp.to_dict(deck.units.density_cm3)


def run(deck=None, out: str | Path | None = None, *, quiet: bool = True, resume: bool = False,
        write: bool = True, analyze: bool = True, threads: int | None = None,
        progress: bool | None = None, overrides: list[str] | None = None,
        stop_after_steps: int | None = None, force: bool = False, figures: bool = True,
        warn=None) -> Result:
    """Run one deck to its end and return a :class:`Result`.

    deck: a Deck, a path to a TOML file, a dict, or None for the built-in default.
    out: the run folder (default: the deck's ``output.folder``). write=False keeps everything in
    memory. resume=True continues from ``<out>/checkpoint.h5``. progress: a tqdm bar on stderr
    (default: only when stderr is a terminal and not quiet). stop_after_steps: stop (as if
    interrupted) after this many steps — for tests of checkpointing. force: run even when a
    health rule refuses the deck, or over a finished run of a different deck. figures: draw the
    analysis figures. warn: called with each warning line (default: printed to stderr unless
    quiet).
    Raises DeckError (HealthRefusal, DifferentDeck), NumericalError (after writing what was
    good), Interrupted, io.OutputError (FolderInUse).
    """
    deck = load_deck(deck, overrides)
    folder = Path(out if out is not None else deck.output.folder) if write else None
    warnings: list[str] = []

    def say(msg):
        warnings.append(msg)
        if warn is not None:
            warn(msg)
        elif not quiet:
            print(f"warning: {msg}", file=sys.stderr)

    dispersion, theory = _theory(deck)
    findings = check_deck(deck, theory)
    if deck.method == "vlasov":
        from . import vlasov
        findings = vlasov.health_findings(deck, findings)
    for f in findings:
        if f.level == "refusal" and not force:
            raise HealthRefusal(f.key, f"{f.message} (--force runs it anyway)",
                                *(() if f.value is None else (f.value,)))
    _check_memory(deck)
    lock = None
    if folder is not None:
        if not resume and not force:
            _check_existing_run(folder, deck)
        lock = _FolderLock(folder)
        lock.acquire()
    try:
        for line in merge_findings(findings):
            say(line)
        if deck.drive is not None and not quiet:
            print(_drive_line(deck), file=sys.stderr)
        if deck.method == "vlasov":
            for line in vlasov.notes(deck):
                say(line)
        return _run_locked(deck, folder, dispersion, theory, findings, warnings, say,
                           quiet=quiet, resume=resume, analyze=analyze, threads=threads,
                           progress=progress, stop_after_steps=stop_after_steps,
                           figures=figures)
    finally:
        if lock is not None:
            lock.release()


def _drive_line(deck: Deck) -> str:
    """The imposed current against the carrying limit, printed before a driven run."""
    from .drive import carrying_limit, max_abs_current
    lim = carrying_limit(deck.species)
    j = max_abs_current(deck.drive, deck.time.end)
    return (f"drive: max |J_ext| = {j:.4g} e n_ref c, carrying_limit = {lim:.4g} e n_ref c, "
            f"ratio = {j / lim:.4g}" + (" (charge-starved)" if j > lim else ""))


def _check_memory(deck: Deck) -> None:
    if deck.method == "vlasov":
        from . import vlasov
        vlasov.check_memory(deck)
        return
    from . import memory
    memory.check(deck)


def _simulation(deck: Deck, threads):
    """The simulation object of the deck's method, and its recording handlers."""
    if deck.method == "vlasov":
        from .vlasov import VlasovSimulation, vlasov_handlers
        sim = VlasovSimulation(deck, threads)
        return sim, vlasov_handlers(sim)
    sim = Simulation(deck, threads)
    return sim, standard_handlers(sim)


def _run_locked(deck, folder, dispersion, theory, findings, warnings, say, *, quiet, resume,
                analyze, threads, progress, stop_after_steps, figures) -> Result:
    sim, handlers = _simulation(deck, threads)
    handlers = handlers + (drive_handlers(sim) if deck.method == "pic" else [])
    by_name = {h.name: h for h in handlers}
    recorder = by_name["series"]
    state = {"finished": False}

    def save():
        sim_state = sim.state()
        meta = {"version": __version__, "deck": comparable(deck), "finished": state["finished"],
                "simulation": sim_state["meta"],
                "handlers": {h.name: h.meta() for h in handlers}}
        io.write_checkpoint(folder / io.FILES["checkpoint"], sim_state,
                            {h.name: h.state() for h in handlers}, meta)

    if resume:
        ck_path = folder / io.FILES["checkpoint"] if folder is not None else None
        if ck_path is None or not ck_path.exists():
            raise io.OutputError(f"nothing to resume: no {io.FILES['checkpoint']} in {folder}")
        _restore(sim, handlers, state, ck_path, deck, say)
    if folder is not None:
        io.write_text(folder / io.FILES["deck"], deck.to_toml())
        io.write_json(folder / io.FILES["theory"], theory)
        for s in deck.species:                  # a copy of each table beside the deck
            if s.table is not None:
                io.write_text(folder / f"table-{s.name}.csv", s.table.to_csv())

    step0 = sim.step
    bar = Progress(sim) if ((not quiet and sys.stderr.isatty()) if progress is None
                            else progress) else None
    wall0 = _time.perf_counter()
    status = "completed"
    try:
        with _Signals() as sig:
            stop = StopRequest(sig, step0, stop_after_steps)
            # a driven run watches its energy balance W - W0 = L int J_ext E0 dt instead
            control = [EnergyWatch(by_name.get("drive", recorder),
                                   deck.analysis.energy_tolerance, say)]
            if folder is not None:
                control.append(Checkpointer(stride(deck.output.checkpoint_interval, sim.dt)
                                            if deck.output.checkpoint_interval > 0 else 0, save))
            control += [h for h in (bar, stop) if h is not None]
            loop = handlers + control
            while sim.step < sim.steps:
                n = sim.step
                for h in handlers:
                    h.before(sim, n)
                try:
                    sim.advance()
                except NumericalError as ex:
                    if folder is not None:
                        _finish_run(sim, handlers, deck, folder, dispersion, theory, findings,
                                    warnings + [str(ex)], say, status="numerical_error",
                                    wall=_time.perf_counter() - wall0, steps_done=sim.step - step0,
                                    analyze=False, figures=False)
                    raise
                for h in loop:
                    h.after(sim, n)
                if stop.requested:
                    status = "interrupted"
                    break
    finally:
        if bar is not None:
            bar.close()
    wall = _time.perf_counter() - wall0
    if status == "interrupted":
        if folder is not None:
            save()
            _finish_run(sim, handlers, deck, folder, dispersion, theory, findings, warnings, say,
                        status="interrupted", wall=wall, steps_done=sim.step - step0,
                        analyze=False, figures=False)
        raise Interrupted(f"stopped at step {sim.step} of {sim.steps} "
                          f"(t = {sim.step * sim.dt:.6g}/omega_p)"
                          + (f"; resume with --resume {folder}" if folder is not None else ""))
    if not state["finished"]:
        for h in handlers:
            h.finish(sim)
        state["finished"] = True
    result = _finish_run(sim, handlers, deck, folder, dispersion, theory, findings, warnings,
                         say, status=status, wall=wall, steps_done=sim.step - step0,
                         analyze=analyze, figures=figures)
    if folder is not None:
        save()
    return result


def _restore(sim, handlers, state, path, deck, say) -> None:
    ck = io.read_checkpoint(path)
    meta = ck["meta"]
    theirs = meta.get("deck")
    if theirs is not None:
        diff = first_difference(theirs, comparable(deck))
        if diff:
            raise io.OutputError(f"checkpoint {path} was written by a different deck "
                                 f"({diff} differs); resume with the run's own deck.toml")
    try:
        sim.restore(ck["step"], ck["x"], ck["u"], ck["density"], meta.get("simulation", {}))
        for h in handlers:
            h.restore(ck["handlers"].get(h.name, {}))
            h.restore_meta(meta.get("handlers", {}).get(h.name, {}))
    except ValueError as ex:
        raise io.OutputError(f"checkpoint {path}: {ex}") from None
    state["finished"] = bool(meta.get("finished", False))
    written = meta.get("simulation", {}).get("threads")
    if written != sim.threads:
        say(f"checkpoint was written with {written} threads, resuming with {sim.threads}: "
            f"results stay correct but not bit-identical")


def _finish_run(sim, handlers, deck, folder, dispersion, theory, findings, warnings, say, *,
                status, wall, steps_done, analyze, figures) -> Result:
    """io -> analysis -> figures -> summary.json (once)."""
    by_name = {h.name: h for h in handlers}
    rec = by_name["series"]
    continuum = deck.method == "vlasov"
    if continuum:
        from . import vlasov
        data = vlasov.run_data(sim, by_name, dispersion)
        end = None
    else:
        series = rec.series()
        if "drive" in by_name:
            series.arrays.update(by_name["drive"].series_arrays())
        end = ParticleSnapshot(t=float(sim.step * sim.dt),
                               x={n: x.copy() for n, x in zip(sim.names, sim.x)},
                               weight={n: float(w) for n, w in zip(sim.names, sim.weights)})
        data = RunData(deck=deck, names=sim.names, length=deck.box.length,
                       cells=deck.box.cells, dt=sim.dt, series=series,
                       snapshots=by_name["fields"].snapshots(),
                       phase_space=by_name["phase"].phase_space(),
                       peak=by_name["peak"].snapshot(), end=end, theory=dispersion)
    summary = _run_summary(sim, deck, rec, findings, warnings, status=status, wall=wall,
                           steps_done=steps_done)
    if continuum:
        summary["vlasov"] = vlasov.summary_block(sim, data, wall, steps_done, say)
    if theory is not None:
        summary["theory"] = theory
    if "drive" in by_name:  # energy is not conserved when driven: report the balance instead
        err = by_name["drive"].energy_err_max
        summary["energy"].update(relative_error_max=err, warning=err > deck.analysis.energy_tolerance,
                                 measure="driven run: max |W - W0 - L int J_ext E0 dt| / "
                                         "max(|W0|, max |W - W0|)")
    if folder is not None:  # the raw data first: nothing is lost if the analysis fails
        snaps, phase = data.snapshots, data.phase_space
        io.write_series(folder / io.FILES["series"], sim.names, data.series,
                        {"dt": sim.dt, "length": deck.box.length, "cells": deck.box.cells})
        io.write_openpmd(folder / io.FILES["fields"], deck, snaps, phase, list(sim.charges),
                         sim.weights, [int(round(t / sim.dt)) for t in snaps.t],
                         [int(round(t / sim.dt)) for t in phase.t],
                         distributions=data.extra.get("distribution"))
        if continuum:
            io.write_profiles(folder / io.CONTINUUM_FILE, {"peak": data.peak_density,
                                                           "end": data.end_density})
        else:
            io.write_particles(folder / io.FILES["particles"], {"peak": data.peak, "end": end})
    results = {}
    if analyze:
        from . import analysis
        try:
            results = analysis.compute(data)
            summary.update(analysis.summary_entries(results, deck.analysis))
            for res in results.values():
                for w in res.warnings:
                    say(w)
        except Exception as ex:  # noqa: BLE001 - keep the run, report the failure
            results = {}
            summary["analysis_error"] = f"{ex.__class__.__name__}: {ex}"
            say(f"the analysis failed ({summary['analysis_error']}); the run's data are "
                f"complete, retry with `streamsim analyze`")
        if folder is not None and results:
            try:
                analysis.write_outputs(results, data, folder, figures=figures)
            except io.OutputError:
                raise
            except Exception as ex:  # noqa: BLE001 - a figure must not lose the numbers
                summary["figures_error"] = f"{ex.__class__.__name__}: {ex}"
                say(f"drawing the figures failed ({summary['figures_error']}); redraw with "
                    f"`streamsim plot {folder}`")
    summary["warnings"] = list(warnings)
    if folder is not None:
        io.write_json(folder / io.FILES["summary"], summary)
    return Result(deck=deck, folder=folder, data=data, summary=io.jsonable(summary),
                  x={} if continuum else dict(zip(sim.names, sim.x)),
                  u={} if continuum else dict(zip(sim.names, sim.u)),
                  warnings=warnings, analysis=results, dispersion=dispersion)


def _run_summary(sim, deck, rec, findings, warnings, *, status, wall, steps_done) -> dict:
    n_particles = sim.n_particles
    total_charge = float(sum(s.charge * s.density for s in deck.species))
    tol = deck.analysis.energy_tolerance
    scale = rec.momentum_scale
    return {
        "streamsim_version": __version__,
        "deck_title": deck.title,
        "method": deck.method,
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
        "energy": {"relative_error_max": rec.energy_err_max, "tolerance": tol,
                   "warning": rec.energy_err_max > tol},
        "momentum": {"drift_max": rec.momentum_drift_max,
                     "drift_max_relative": rec.momentum_drift_max / scale if scale else None},
        "warnings": warnings,
        "health": [{"level": f.level, "rule": f.rule, "key": f.key, "message": f.message}
                   for f in findings],
    }
