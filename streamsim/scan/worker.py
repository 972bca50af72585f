"""One scan run, as a worker runs it: in a process-pool worker or a Dask worker.

:func:`run_point` never raises for a problem of the run itself: it returns a record and leaves
its folder in one of three states that any later scan can read back:

- completed: ``point.json`` with ``"status": "completed"`` (written last, after summary.json
  and the analysis), and summary.json with ``"status": "completed"``;
- failed: ``error.json`` (the one-line error, its kind and the traceback) and ``point.json``
  with ``"status": "failed"``;
- interrupted (SIGINT/SIGTERM): the engine's checkpoint, no point.json; the next attempt
  continues from the checkpoint.

Running the same task twice (a Dask retry after a worker died) gives the same folder: its name
is the deck's hash, and every file is written atomically.
"""
from __future__ import annotations

import json
import os
import signal
import socket
import threading
import time
import traceback
from pathlib import Path

__all__ = ["run_point", "read_state", "POINT_FILE", "ERROR_FILE", "cores_available",
           "init_pool_worker"]

POINT_FILE = "point.json"
ERROR_FILE = "error.json"

#: one run at a time per process: numba's thread pool is shared by the process, so two Dask
#: worker threads must not run kernels at once; a worker with nthreads > 1 just queues
_RUN_LOCK = threading.Lock()
_HOST_CACHE: dict = {}


def cores_available() -> int:
    """Cores this process may use (the CPU affinity mask, which batch systems set)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def init_pool_worker(threads: int) -> None:
    """Process-pool initializer: cap the thread pools before numba/numpy start them, and leave
    SIGINT to the engine (which checkpoints the run it is in) instead of dying in the queue."""
    for var in ("NUMBA_NUM_THREADS", "OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ[var] = str(max(1, int(threads)))
    signal.signal(signal.SIGINT, signal.SIG_IGN)


def _processes_on_this_node() -> int:
    """Dask worker processes that share this node (from the scheduler, cached for a minute)."""
    from distributed import get_client, get_worker
    w = get_worker()
    now = time.monotonic()
    if _HOST_CACHE and now - _HOST_CACHE["t"] < 60.0:
        return _HOST_CACHE["n"]
    host = w.address.split("://")[-1].rsplit(":", 1)[0]
    try:
        info = get_client().scheduler_info(n_workers=-1)["workers"]
        n = sum(1 for a in info if a.split("://")[-1].rsplit(":", 1)[0] == host)
    except Exception:  # noqa: BLE001 - fall back to this worker's own slots
        n = 0
    n = max(1, n)
    _HOST_CACHE.update(t=now, n=n)
    return n


def threads_for_run(requested: int | None, where: str) -> int:
    """Numba threads for one run so that runs x threads never exceed the node's cores.

    where = "pool": ``requested`` was already computed by the scan (cores // workers).
    where = "dask": cores of this node // Dask worker processes on it, capped by ``requested``.
    """
    if where == "pool":
        return max(1, int(requested or 1))
    share = max(1, cores_available() // _processes_on_this_node())
    return max(1, min(share, int(requested))) if requested else share


def _read_json(path: Path) -> dict | None:
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return data if isinstance(data, dict) else None


def read_state(folder: str | Path) -> tuple[str, dict | None]:
    """("completed" | "failed" | "interrupted" | "pending", point.json data) of a run folder."""
    folder = Path(folder)
    point = _read_json(folder / POINT_FILE)
    if point is not None and point.get("status") == "completed":
        summ = _read_json(folder / "summary.json")
        if summ is not None and summ.get("status") == "completed":
            return "completed", point
        return "pending", None
    if point is not None and point.get("status") == "failed":
        return "failed", point
    summ = _read_json(folder / "summary.json")
    if summ is not None and summ.get("status") == "interrupted" and \
            (folder / "checkpoint.h5").is_file():
        return "interrupted", None
    return "pending", None


def _one_line(ex: BaseException) -> str:
    text = " ".join(str(ex).split())
    return text or ex.__class__.__name__


def run_point(task: dict) -> dict:
    """Run one scan task: {"run", "hash", "folder", "deck" (dict), "threads", "where",
    "figures"}. Returns {"run", "hash", "status", "error", "kind", "wall_s", "host", "threads"}
    and, for a completed run, "loop_s" (its time loop; the rest of wall_s is start-up, theory,
    io, analysis and figures)."""
    from .. import io
    from ..deck import DeckError, load_deck
    from ..pipeline import Interrupted, NumericalError, run

    folder = Path(task["folder"])
    threads = threads_for_run(task.get("threads"), task.get("where", "pool"))
    rec = {"run": task["run"], "hash": task["hash"], "host": socket.gethostname(),
           "pid": os.getpid(), "threads": threads}
    with _RUN_LOCK:
        state, _ = read_state(folder)
        if state == "completed":          # a retry of a task that had already finished
            return dict(rec, status="completed", error=None, kind=None, wall_s=0.0)
        folder.mkdir(parents=True, exist_ok=True)
        for name in (POINT_FILE, ERROR_FILE):   # an earlier failure is being retried
            try:
                (folder / name).unlink()
            except FileNotFoundError:
                pass
        t0 = time.time()
        kind = error = None
        try:
            deck = load_deck(task["deck"])
            try:
                run(deck, out=folder, quiet=True, threads=threads,
                    figures=bool(task.get("figures")), resume=state == "interrupted")
            except io.OutputError:
                if state != "interrupted":
                    raise
                run(deck, out=folder, quiet=True, threads=threads,
                    figures=bool(task.get("figures")))
        except Interrupted as ex:
            return dict(rec, status="interrupted", error=_one_line(ex), kind="interrupted",
                        wall_s=time.time() - t0)
        except Exception as ex:  # noqa: BLE001 - recorded, the scan goes on
            tb = traceback.format_exc()
            if isinstance(ex, DeckError):
                kind, error = "deck", str(ex)
            elif isinstance(ex, NumericalError):
                kind, error = "numerical", _one_line(ex)
            elif isinstance(ex, io.OutputError):
                kind, error = "output", _one_line(ex)
            elif isinstance(ex, MemoryError):
                kind, error = "memory", "out of memory"
            else:
                kind, error = "exception", f"{ex.__class__.__name__}: {_one_line(ex)}"
        wall = time.time() - t0
        stamp = {"hash": task["hash"], "run": task["run"], "finished": time.time(),
                 "wall_s": wall, "host": rec["host"], "pid": rec["pid"], "threads": threads}
        if error is not None:
            write_failure(folder, task["hash"], task["run"], kind, error, tb, extra=stamp)
            return dict(rec, status="failed", error=error, kind=kind, wall_s=wall)
        io.write_json(folder / POINT_FILE, dict(stamp, status="completed"))
        return dict(rec, status="completed", error=None, kind=None, wall_s=wall,
                    loop_s=_loop_seconds(folder))


def _loop_seconds(folder: Path) -> float | None:
    """The time loop's wall time of a finished run (its summary.json ``wall_s``)."""
    summ = _read_json(folder / "summary.json")
    try:
        return float(summ["wall_s"])
    except (TypeError, KeyError, ValueError):
        return None


def write_failure(folder: Path, hash_: str, run: int, kind: str, error: str,
                  tb: str | None = None, extra: dict | None = None) -> None:
    from .. import io
    folder = Path(folder)
    io.write_json(folder / ERROR_FILE, {"kind": kind, "error": error, "traceback": tb})
    io.write_json(folder / POINT_FILE, dict(extra or {}, hash=hash_, run=run, status="failed",
                                            kind=kind, error=error))
