"""One deck, one way through: resolve -> theory -> health -> time loop with cadenced handlers ->
io -> analysis -> figures -> summary.json (once, atomically).

``run(deck) -> Result`` is the whole job for one deck; the CLI, the scans and the validation call
it. What differs between methods (the simulation, its recording handlers, its health rules, its
memory, its RunData, its raw files, its summary block) comes from the deck's entry of
:data:`streamsim.methods.METHODS`; the run-control handlers (energy watch, checkpoint, progress,
stop) from :mod:`streamsim.control`; the run folder's lock and deck comparison from
:mod:`streamsim.runfolder`. One :class:`RunContext` carries a run from start to summary.
"""
from __future__ import annotations

import sys
import time as _time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable

import numpy as np

from . import io, resume as _resume, units
from ._version import SUMMARY_SCHEMA_VERSION, __version__
from .control import EnergyWatch, Progress, Signals, StopRequest
from .checkpointer import Checkpointer
from .deck import Deck, DeckError, load_deck
from .diagnostics import stride
from .engine import NumericalError
from .health import Finding, check_deck, merge_findings
from .methods import METHODS, Method
from .rundata import RunData
from .runfolder import (LOCK_FILE, DifferentDeck, FolderInUse, FolderLock, check_existing_run,
                        comparable, first_difference)

__all__ = ["run", "Result", "RunContext", "Interrupted", "HealthRefusal", "FolderInUse",
           "DifferentDeck", "NumericalError", "comparable", "first_difference", "merge_findings",
           "LOCK_FILE"]

class Interrupted(RuntimeError):
    """SIGINT/SIGTERM arrived; a checkpoint was written and the run can be resumed."""


class HealthRefusal(DeckError):
    """A numerical-health rule says the run would be meaningless (``force=True`` runs it anyway)."""


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


@dataclass
class RunContext:
    """One run from start to summary: the deck, its method, where it writes, its theory and
    health findings, the warnings said so far, the caller's options, and — once built — the
    simulation and its recording handlers."""
    deck: Deck
    method: Method
    folder: Path | None
    dispersion: Any                 # streamsim.theory.Dispersion or None
    theory: dict | None             # theory.json
    findings: list[Finding]
    warnings: list[str]
    say: Callable[[str], None]
    quiet: bool = True
    resume: bool = False
    analyze: bool = True
    figures: bool = True
    threads: int | None = None
    progress: bool | None = None
    stop_after_steps: int | None = None
    sim: Any = None
    handlers: list = field(default_factory=list)
    finished: bool = False          # the handlers' finish() ran (the last time level recorded)
    saved_step: int | None = None   # the step of the last checkpoint written or read

    def save(self) -> None:
        """Write the checkpoint: the simulation's state and every handler's arrays and meta."""
        self.saved_step = self.sim.step
        sim_state = self.sim.state()
        meta = {"version": __version__, "deck": comparable(self.deck), "finished": self.finished,
                "simulation": sim_state["meta"],
                "handlers": {h.name: h.meta() for h in self.handlers}}
        io.write_checkpoint(self.folder / io.FILES["checkpoint"], sim_state,
                            {h.name: h.state() for h in self.handlers}, meta)

    def energy_source(self):
        """The recording handler whose energy error the watch and summary.json report."""
        return max(self.handlers, key=lambda h: h.energy_rank)


# ----------------------------------------------------------------------------------------------
# run
# ----------------------------------------------------------------------------------------------
def _theory(deck: Deck):
    """(Dispersion or None, the theory.json object)."""
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
    memory. resume=True continues from ``<out>/checkpoint.h5``, to the run's end or to a later
    ``time.end`` (an extension, :mod:`streamsim.resume`). progress: a tqdm bar on stderr
    (default: only when stderr is a terminal and not quiet). stop_after_steps: stop (as if
    interrupted) after this many steps — for tests of checkpointing. force: run even when a
    health rule refuses the deck, or over a finished run of a different deck. figures: draw the
    analysis figures. warn: called with each warning line (default: printed to stderr unless
    quiet).
    Raises DeckError (HealthRefusal, DifferentDeck), NumericalError (after writing what was
    good), Interrupted, io.OutputError (FolderInUse).
    """
    deck = load_deck(deck, overrides)
    method = METHODS[deck.method]
    folder = Path(out if out is not None else deck.output.folder) if write else None
    warnings: list[str] = []

    def say(msg):
        warnings.append(msg)
        if warn is not None:
            warn(msg)
        elif not quiet:
            print(f"warning: {msg}", file=sys.stderr)

    if resume and folder is not None:   # an extension keeps the run's cadences and step
        deck, notes = _resume.extended_deck(deck, _resume.checkpoint_deck(folder))
        for line in notes:
            say(line)
    dispersion, theory = _theory(deck)
    findings = method.health(deck, check_deck(deck, dispersion))
    for f in findings:
        if f.level == "refusal" and not force:
            raise HealthRefusal(f.key, f"{f.text} (--force runs it anyway)",
                                *(() if f.value is None else (f.value,)))
    from . import memory
    memory.check(deck)      # before any file is written
    ctx = RunContext(deck=deck, method=method, folder=folder, dispersion=dispersion,
                     theory=theory, findings=findings, warnings=warnings, say=say, quiet=quiet,
                     resume=resume, analyze=analyze, figures=figures, threads=threads,
                     progress=progress, stop_after_steps=stop_after_steps)
    lock = None
    if folder is not None:
        if not resume and not force:
            check_existing_run(folder, deck)
        lock = FolderLock(folder)
        lock.acquire()
    try:
        for line in merge_findings(findings):
            say(line)
        if not quiet:
            for cls in method.handler_classes(deck):
                for line in cls.start_lines(deck):
                    print(line, file=sys.stderr)
        for line in method.notes(deck):
            say(line)
        return _run_locked(ctx)
    finally:
        if lock is not None:
            lock.release()


def _run_locked(ctx: RunContext) -> Result:
    deck, folder = ctx.deck, ctx.folder
    sim = ctx.sim = ctx.method.simulation(deck, ctx.threads)
    handlers = ctx.handlers = ctx.method.handlers(sim)
    if ctx.resume:
        ck_path = folder / io.FILES["checkpoint"] if folder is not None else None
        if ck_path is None or not ck_path.exists():
            raise io.OutputError(f"nothing to resume: no {io.FILES['checkpoint']} in {folder}")
        _restore(ctx, ck_path)
    if folder is not None:
        io.write_text(folder / io.FILES["deck"], deck.to_toml())
        io.write_json(folder / io.FILES["theory"], ctx.theory)
        for s in deck.species:                  # a copy of each table beside the deck
            if s.table is not None:
                io.write_text(folder / f"table-{s.name}.csv", s.table.to_csv())

    step0 = sim.step
    bar = Progress(sim) if ((not ctx.quiet and sys.stderr.isatty()) if ctx.progress is None
                            else ctx.progress) else None
    wall0 = _time.perf_counter()
    status = "completed"
    try:
        with Signals() as sig:
            stop = StopRequest(sig, step0, ctx.stop_after_steps)
            # a driven run watches its energy balance W - W0 = L int J_ext E0 dt instead
            control = [EnergyWatch(ctx.energy_source(), deck.analysis.energy_tolerance, ctx.say)]
            if folder is not None:
                every = deck.output.checkpoint_interval
                control.append(Checkpointer(stride(every, sim.dt) if every else 0, ctx.save,
                                            wall_s=Checkpointer.WALL_S if every is None else None))
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
                        _finish_run(ctx, status="numerical_error",
                                    wall=_time.perf_counter() - wall0, steps_done=sim.step - step0,
                                    analyze=False, figures=False, extra_warnings=[str(ex)])
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
            ctx.save()
            _finish_run(ctx, status="interrupted", wall=wall, steps_done=sim.step - step0,
                        analyze=False, figures=False)
        raise Interrupted(f"stopped at step {sim.step} of {sim.steps} "
                          f"(t = {sim.step * sim.dt:.6g}/omega_p)"
                          + (f"; resume with --resume {folder}" if folder is not None else ""))
    if not ctx.finished:
        # the last checkpoint holds the records before the last level's: a resume to a later
        # end goes on from it as a straight run would (a resume to this end redoes them)
        if folder is not None and ctx.saved_step != sim.step:
            ctx.save()
        for h in handlers:
            h.finish(sim)
        ctx.finished = True
    return _finish_run(ctx, status=status, wall=wall, steps_done=sim.step - step0,
                       analyze=ctx.analyze, figures=ctx.figures)


def _restore(ctx: RunContext, path) -> None:
    sim, deck = ctx.sim, ctx.deck
    ck = io.read_checkpoint(path)
    meta = ck["meta"]
    theirs = meta.get("deck")
    if theirs is not None:
        diff = first_difference(_resume.with_later_end(theirs, deck.time.end), comparable(deck))
        if diff:
            raise io.OutputError(f"checkpoint {path} was written by a different deck "
                                 f"({diff} differs); resume with the run's own deck.toml "
                                 f"(a resume may change time.end only, to a later end)")
    if meta.get("finished") and ck["step"] < sim.steps:
        raise io.OutputError(f"checkpoint {path} was written after the run's last records (by "
                             f"an older streamsim), so the run resumes to its own end only; run "
                             f"the deck to the new end instead")
    try:
        sim.restore(ck["step"], ck["x"], ck["u"], ck["density"], meta.get("simulation", {}))
        for h in ctx.handlers:
            h.restore(ck["handlers"].get(h.name, {}))
            h.restore_meta(meta.get("handlers", {}).get(h.name, {}))
    except ValueError as ex:
        raise io.OutputError(f"checkpoint {path}: {ex}") from None
    ctx.finished = bool(meta.get("finished", False))
    ctx.saved_step = ck["step"]
    written = meta.get("simulation", {}).get("threads")
    if written != sim.threads:
        ctx.say(f"checkpoint was written with {written} threads, resuming with {sim.threads}: "
                f"results stay correct but not bit-identical")


def _finish_run(ctx: RunContext, *, status, wall, steps_done, analyze, figures,
                extra_warnings=()) -> Result:
    """io -> analysis -> figures -> summary.json (once)."""
    sim, deck, folder, method, say = ctx.sim, ctx.deck, ctx.folder, ctx.method, ctx.say
    warnings = ctx.warnings + list(extra_warnings) if extra_warnings else ctx.warnings
    data = method.run_data(sim, ctx.handlers, ctx.dispersion)
    painter = None
    if analyze and figures and folder is not None:  # figures start in other processes now
        from .plots import Painter
        painter = Painter(data, folder)
    summary = _run_summary(ctx, warnings, status=status, wall=wall, steps_done=steps_done)
    summary.update(method.summary_extras(sim, data, wall, steps_done, say))
    if ctx.theory is not None:
        summary["theory"] = ctx.theory
    for h in ctx.handlers:      # each recording handler's entries (energy, momentum, ...)
        for key, entry in h.run_summary(deck).items():
            summary[key] = {**summary.get(key, {}), **entry}
    if folder is not None:  # the raw data first: nothing is lost if the analysis fails
        snaps, phase = data.snapshots, data.phase_space
        io.write_series(folder / io.FILES["series"], sim.names, data.series,
                        {"dt": sim.dt, "length": deck.box.length, "cells": deck.box.cells})
        io.write_openpmd(folder / io.FILES["fields"], deck, snaps, phase, list(sim.charges),
                         sim.weights, [int(round(t / sim.dt)) for t in snaps.t],
                         [int(round(t / sim.dt)) for t in phase.t],
                         distributions=data.extra.get("distribution"))
        io.drop_legacy_fields(folder)
        method.write_raw(folder, sim, data)
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
        if painter is not None and not results:
            painter.close()
        if folder is not None and results:
            try:
                analysis.write_outputs(results, data, folder, figures=figures, painter=painter)
            except io.OutputError:
                raise
            except Exception as ex:  # noqa: BLE001 - a figure must not lose the numbers
                summary["figures_error"] = f"{ex.__class__.__name__}: {ex}"
                say(f"drawing the figures failed ({summary['figures_error']}); redraw with "
                    f"`streamsim plot {folder}`")
    summary["warnings"] = list(warnings)
    if folder is not None:
        io.write_json(folder / io.FILES["summary"], summary)
    x, u = method.final_state(sim)
    return Result(deck=deck, folder=folder, data=data, summary=io.jsonable(summary), x=x, u=u,
                  warnings=warnings, analysis=results, dispersion=ctx.dispersion)


def _run_summary(ctx: RunContext, warnings, *, status, wall, steps_done) -> dict:
    """The run's own summary.json entries; the recording handlers add theirs (energy, momentum)
    and the method its block."""
    sim, deck = ctx.sim, ctx.deck
    n_particles = sim.n_particles
    total_charge = float(sum(s.charge * s.density for s in deck.species))
    return {
        "streamsim_version": __version__,
        "schema_version": SUMMARY_SCHEMA_VERSION,
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
        "energy": {},
        "momentum": {},
        "warnings": warnings,
        "health": [f.entry() for f in ctx.findings],
    }
