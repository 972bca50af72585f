"""Running a scan: a local process pool, an existing Dask scheduler, or a Dask LocalCluster.

Scan folder layout::

    manifest.json     the scan as read (axes, values) and every run: hash, folder, values
    runs/<hash16>/    one run folder per resolved deck (the usual run files, plus point.json and,
                      for a failure, error.json); runs/invalid-<hash16>/ for a deck that did not
                      validate
    scan.csv, scan.h5 one row per run (rewritten atomically as runs finish)
    figures/          growth time and nu_c vs each axis, and a map for two axes

Threads: runs x numba threads per run never exceed the cores of a node. In the local pool,
threads per run = cores // workers. On Dask, each task asks the scheduler how many worker
processes share its node and takes cores // processes (``--threads`` caps it); runs in one
worker process never overlap.
"""
from __future__ import annotations

import logging
import os
import signal
import sys
import threading
import time
from dataclasses import dataclass, field
from pathlib import Path

from .spec import Point, Scan, load_scan
from .tables import collect_rows, run_folder, write_tables
from .worker import cores_available, init_pool_worker, read_state, run_point, write_failure

__all__ = ["ScanResult", "run_scan", "default_out", "ScanSetupError", "SchedulerError"]


class _Interrupts:
    """SIGINT while a scan runs: KeyboardInterrupt as Python raises it, and remembered, so that
    an interrupt swallowed by a finalizer that happened to run at that moment ("Exception
    ignored in ...: KeyboardInterrupt") is raised again at the next :meth:`check` instead of
    being lost. Only the main thread installs it, and only over Python's default handler."""

    def __init__(self):
        self.caught = False
        self._old = None

    def __enter__(self):
        if threading.current_thread() is threading.main_thread() and \
                signal.getsignal(signal.SIGINT) is signal.default_int_handler:
            self._old = signal.signal(signal.SIGINT, self._handle)
        return self

    def _handle(self, signum, frame):
        self.caught = True
        raise KeyboardInterrupt

    def check(self) -> None:
        if self.caught:
            raise KeyboardInterrupt

    def __exit__(self, *exc):
        if self._old is not None:
            signal.signal(signal.SIGINT, self._old)
        return False


MANIFEST = "manifest.json"
#: a pool whose worker processes die is rebuilt at most this many times
POOL_REBUILDS = 3
#: the tables are rewritten at most this often while the scan runs (and always at the end)
TABLE_EVERY_S = 2.0


class ScanSetupError(ValueError):
    """Bad arguments for a scan (workers, threads, output folder); one line."""


class SchedulerError(OSError):
    """The Dask scheduler could not be reached or was lost; one line."""


@dataclass
class ScanResult:
    out: Path
    rows: list[dict]
    ran: int = 0                    # runs attempted in this invocation
    skipped: int = 0                # runs already done (completed, or failed without --retry-failed)
    completed: int = 0              # rows completed after this invocation
    failed: int = 0
    pending: int = 0
    interrupted: bool = False
    lost: int = 0                   # runs whose Dask futures were cancelled (scheduler lost)
    tables: tuple = ()
    figures: list = field(default_factory=list)
    warnings: list = field(default_factory=list)
    executor: str = ""
    run_wall_s: float = 0.0         # the runs completed in this invocation: their whole time
    run_loop_s: float = 0.0         # and the part in their time loops
    run_figures: bool = False       # the runs drew their own figures

    @property
    def outside_loop_s(self) -> float:
        """Time the completed runs of this invocation spent outside their time loops
        (start-up, theory, io, analysis, figures, checkpoints at the end)."""
        return max(0.0, self.run_wall_s - self.run_loop_s)

    def timing_line(self) -> str:
        """One line: the runs' time and the part of it outside their time loops."""
        if self.run_wall_s <= 0:
            return ""
        return (f"  time: runs {self.run_wall_s:.1f} s in all, of which "
                f"{self.outside_loop_s:.1f} s ({self.outside_loop_s / self.run_wall_s:.0%}) "
                f"outside their time loops (start-up, theory, io, analysis"
                f"{', figures' if self.run_figures else ''})")


def default_out(scan: Scan) -> Path:
    stem = scan.path.stem if scan.path is not None else "scan"
    return Path("runs") / "out" / stem


def _manifest(scan: Scan, out: Path) -> dict:
    return {"scan": scan.to_dict(), "runs": [
        {"run": p.run, "point": p.point, "replica": p.replica, "hash": p.hash,
         "folder": str(Path("runs") / p.folder_name), "values": list(p.values),
         "random_seed": p.seed, "deck_error": p.error} for p in scan.points]}


def _task(p: Point, out: Path, threads, where: str, figures: bool) -> dict:
    folder = run_folder(out, p).resolve()
    deck = p.deck.to_dict()
    deck["output"]["folder"] = str(folder)
    return {"run": p.run, "hash": p.hash, "folder": str(folder), "deck": deck,
            "threads": threads, "where": where, "figures": figures}


# ----------------------------------------------------------------------------------------------
def run_scan(scan: Scan | str | Path, out: str | Path | None = None, *, workers: int | None = None,
             threads: int | None = None, scheduler: str | None = None,
             local_cluster: bool = False, resume: bool = False, retry_failed: bool = False,
             progress: bool | None = None, quiet: bool = True, figures: bool = True,
             overrides: list[str] | None = None, run_figures: bool | None = None) -> ScanResult:
    """Run every missing run of a scan and write its tables and figures.

    scan: a :class:`Scan` or a scan-file path. out: the scan folder (default runs/out/<stem>).
    workers: local processes or LocalCluster workers (default: one per core, at most one per
    run). threads: numba threads per run (default: cores // workers). scheduler: the address of
    a running Dask scheduler; local_cluster: start a dask.distributed LocalCluster on loopback.
    resume: continue a scan folder; retry_failed: also rerun the failed runs. figures: the scan's
    own figures; run_figures: also each run's figures (None: the scan file's ``run_figures``,
    false unless set there).
    Raises ScanError (scan file), ScanSetupError (arguments), SchedulerError (Dask);
    KeyboardInterrupt is turned into ``interrupted=True`` after the running runs checkpointed.
    """
    if not isinstance(scan, Scan):
        scan = load_scan(scan, overrides)
    # each run's own figures: asked for by the caller, else by the scan file (the manifest keeps
    # the scan file's value, so that a --resume with or without the flag is the same scan)
    draw = scan.run_figures if run_figures is None else bool(run_figures)
    out = Path(out) if out is not None else default_out(scan)
    cores = cores_available()
    if workers is not None and workers < 1:
        raise ScanSetupError(f"--workers {workers}: must be >= 1")
    if threads is not None and threads < 1:
        raise ScanSetupError(f"--threads {threads}: must be >= 1")
    if scheduler and local_cluster:
        raise ScanSetupError("give --scheduler or --local-cluster, not both")
    if not scheduler:
        n = workers or 1
        if n > cores:
            raise ScanSetupError(f"--workers {n} exceeds the {cores} cores of this machine")
        if threads is not None and n * threads > cores:
            raise ScanSetupError(f"--workers {n} x --threads {threads} = {n * threads} exceeds "
                                 f"the {cores} cores of this machine")
    manifest = out / MANIFEST
    runs_dir = out / "runs"
    started = runs_dir.is_dir() and any(not e.name.startswith("invalid-")
                                        for e in runs_dir.iterdir())
    if manifest.exists() and started and not resume:
        raise ScanSetupError(f"{out} already holds a scan ({MANIFEST}); pass --resume to continue "
                             "it (and --retry-failed to rerun its failures), or choose another "
                             "--out")
    if out.exists() and not out.is_dir():
        raise ScanSetupError(f"--out {out}: exists and is not a folder")
    from .. import io
    io.write_json(manifest, _manifest(scan, out))

    # -- which runs are left to do ----------------------------------------------------------
    todo: list[Point] = []
    skipped = 0
    queued: set[str] = set()
    for p in scan.points:
        folder = run_folder(out, p)
        if p.deck is not None and p.folder_name in queued:
            continue            # the same normalised run at another density: run once
        queued.add(p.folder_name)
        if p.deck is None:
            write_failure(folder, p.hash, p.run, "deck", p.error or "invalid deck",
                          extra={"raw_deck": p.raw})
            continue
        state, _ = read_state(folder)
        if state == "completed" or (state == "failed" and not retry_failed):
            skipped += 1
        else:
            todo.append(p)
    result = ScanResult(out=out, rows=[], skipped=skipped, warnings=list(scan.warnings),
                        run_figures=draw)
    n_local = workers or max(1, min(cores, len(todo)))

    tracker = _Tracker(scan, out, len(todo), progress, quiet)
    try:
        with _Interrupts() as interrupts:
            if todo:
                if scheduler or local_cluster:
                    result.executor = _run_dask(todo, out, scan, tracker, interrupts,
                                                scheduler=scheduler, n_workers=n_local,
                                                threads=threads, run_figures=draw)
                else:
                    per_run = threads or max(1, cores // n_local)
                    result.executor = _run_pool(todo, out, scan, tracker, interrupts, n_local,
                                                per_run, draw)
    except KeyboardInterrupt:
        result.interrupted = True
    finally:
        tracker.close()
    result.ran = tracker.done
    result.run_wall_s, result.run_loop_s = tracker.wall_s, tracker.loop_s
    result.lost = tracker.lost
    result.rows = collect_rows(scan, out)
    result.tables = write_tables(scan, out, result.rows)
    result.completed = sum(r["status"] == "completed" for r in result.rows)
    result.failed = sum(r["status"] == "failed" for r in result.rows)
    result.pending = len(result.rows) - result.completed - result.failed
    if figures and result.completed:
        try:
            from .figures import make_figures
            result.figures = make_figures(scan, result.rows, out / "figures")
        except io.OutputError:
            raise
        except Exception as ex:  # noqa: BLE001 - the tables are written; say why no figures
            result.warnings.append(f"the scan figures failed ({ex.__class__.__name__}: {ex})")
    return result


class _Tracker:
    """Progress bar over runs and the periodic rewrite of the tables."""

    def __init__(self, scan, out, total, progress, quiet):
        self.scan, self.out = scan, out
        self.done = 0
        self.failed = 0
        self.lost = 0
        self.wall_s = self.loop_s = 0.0     # completed runs: whole run_point, time loop
        self.last_write = time.monotonic()
        show = (not quiet and sys.stderr.isatty()) if progress is None else progress
        self.bar = None
        if show and total:
            from tqdm import tqdm
            self.bar = tqdm(total=total, unit="run", file=sys.stderr, dynamic_ncols=True,
                            desc="scan")

    def record(self, rec: dict) -> None:
        if rec.get("status") in ("completed", "failed"):
            self.done += 1
            self.failed += rec["status"] == "failed"
            if rec["status"] == "completed" and rec.get("loop_s") is not None:
                self.wall_s += float(rec.get("wall_s") or 0.0)
                self.loop_s += float(rec["loop_s"])
            if self.bar is not None:
                self.bar.update(1)
                if self.failed:
                    self.bar.set_postfix_str(f"{self.failed} failed", refresh=False)
        now = time.monotonic()
        if now - self.last_write > TABLE_EVERY_S:
            self.last_write = now
            write_tables(self.scan, self.out, collect_rows(self.scan, self.out))

    def close(self):
        if self.bar is not None:
            self.bar.close()
            self.bar = None


# ----------------------------------------------------------------------------------------------
# local process pool
# ----------------------------------------------------------------------------------------------
def _pool_worker_setup(threads: int, parent: int) -> None:
    """Initializer of a pool process: thread caps, its own process group (so that a terminal's
    Ctrl-C reaches only the scan, which relays one SIGINT to each run), and exit when the scan
    process is gone."""
    init_pool_worker(threads)
    try:
        os.setpgrp()
    except OSError:
        pass

    def watch():
        for _ in range(10_000_000):          # bounded: about 115 days at one check a second
            if os.getppid() != parent:
                os._exit(1)
            time.sleep(1.0)

    threading.Thread(target=watch, daemon=True, name="streamsim-parent-watch").start()


def _run_pool(todo, out, scan, tracker, interrupts, n_workers, threads,
              run_figures: bool = False) -> str:
    import multiprocessing as mp
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
    from concurrent.futures.process import BrokenProcessPool

    ctx = mp.get_context("spawn")
    tasks = {p.run: _task(p, out, threads, "pool", run_figures) for p in todo}
    left = dict(tasks)
    for attempt in range(POOL_REBUILDS + 1):
        if not left:
            break
        ex = ProcessPoolExecutor(max_workers=min(n_workers, len(left)), mp_context=ctx,
                                 initializer=_pool_worker_setup, initargs=(threads, os.getpid()))
        broken = False
        try:
            futs = {ex.submit(run_point, t): run for run, t in left.items()}
            try:
                pending = set(futs)
                while pending:
                    # short waits, so that a remembered interrupt is acted on within 0.25 s
                    done, pending = wait(pending, timeout=0.25, return_when=FIRST_COMPLETED)
                    for fut in done:
                        run = futs[fut]
                        try:
                            rec = fut.result()
                        except BrokenProcessPool:
                            broken = True
                            continue
                        if rec.get("status") != "interrupted":
                            left.pop(run, None)
                        tracker.record(rec)
                    interrupts.check()
            except KeyboardInterrupt:
                for pid in list(getattr(ex, "_processes", {}) or {}):
                    try:
                        os.kill(pid, signal.SIGINT)   # the run checkpoints and returns
                    except (ProcessLookupError, PermissionError):
                        pass
                ex.shutdown(wait=True, cancel_futures=True)
                raise
        finally:
            ex.shutdown(wait=True, cancel_futures=True)
        if not broken:
            break
    else:
        _give_up(left, tracker)
    return f"local process pool, {n_workers} worker(s) x {threads} numba thread(s)"


def _give_up(left: dict, tracker) -> None:
    for run, t in left.items():
        state, _ = read_state(t["folder"])
        if state not in ("completed", "failed"):
            write_failure(Path(t["folder"]), t["hash"], run, "worker",
                          f"the worker process died {POOL_REBUILDS + 1} times while this run was "
                          "queued or running (out of memory?)")
            tracker.record({"status": "failed"})


# ----------------------------------------------------------------------------------------------
# Dask
# ----------------------------------------------------------------------------------------------
def _worker_version():
    import streamsim
    return streamsim.__version__


def _run_dask(todo, out, scan, tracker, interrupts, *, scheduler, n_workers, threads,
              run_figures: bool = False) -> str:
    try:
        import distributed
        from distributed import Client, LocalCluster
    except ImportError:
        raise SchedulerError("dask.distributed is not installed (pip install "
                             "'dask[distributed]')") from None
    from .. import __version__
    cluster = None
    logging.getLogger("distributed").setLevel(logging.ERROR)
    try:
        if scheduler:
            try:
                client = Client(scheduler, timeout="30s")
            except (OSError, TimeoutError, ValueError) as ex:
                raise SchedulerError(f"cannot reach the Dask scheduler {scheduler} "
                                     f"({ex.__class__.__name__}: {ex})") from None
            where = f"Dask scheduler {scheduler}"
        else:
            cluster = LocalCluster(n_workers=n_workers, threads_per_worker=1, processes=True,
                                   host="127.0.0.1", dashboard_address=None,
                                   silence_logs=logging.ERROR)
            client = Client(cluster)
            where = f"Dask LocalCluster, {n_workers} worker process(es) on 127.0.0.1"
        try:
            versions = client.run(_worker_version)
        except Exception:  # noqa: BLE001 - workers may join later (adaptive clusters)
            versions = {}
        odd = sorted({v for v in versions.values() if v != __version__})
        if odd:
            tracker.scan.warnings.append(f"Dask workers run streamsim {', '.join(map(str, odd))}, "
                                         f"this client {__version__}")
        futs = {}
        for p in todo:
            t = _task(p, out, threads, "dask", run_figures)
            f = client.submit(run_point, t, key=f"streamsim-run-{p.hash[:32]}", pure=False)
            futs[f] = t
        try:
            for fut in distributed.as_completed(list(futs)):
                t = futs[fut]
                try:
                    rec = fut.result()
                except KeyboardInterrupt:
                    raise
                except Exception as ex:  # noqa: BLE001 - KilledWorker and friends
                    name = ex.__class__.__name__
                    if "Cancelled" in name:      # the scheduler went away: the run is left to do
                        tracker.lost += 1
                        continue
                    msg = (f"the Dask workers running it died too often ({name}: {ex})"
                           if name == "KilledWorker" else f"{name}: {' '.join(str(ex).split())}")
                    write_failure(Path(t["folder"]), t["hash"], t["run"], "worker", msg)
                    rec = {"status": "failed", "error": msg}
                tracker.record(rec)
                interrupts.check()
        except KeyboardInterrupt:
            client.cancel(list(futs))
            raise
        finally:
            client.close()
    finally:
        if cluster is not None:
            cluster.close()
    return where
