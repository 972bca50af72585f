"""Figures of a run: matplotlib helpers shared by the analysis blocks' figure functions, and the
generic loop that draws every block's figures into ``<folder>/figures/``.

Each block draws its figures from its own tables and summary entries (and the run's raw series),
never from a recomputation, so a figure always shows the numbers in summary.json.
"""
from __future__ import annotations

from pathlib import Path

__all__ = ["plt", "message_figure", "draw_figures", "Painter"]

#: a figure process that sends nothing for this long is given up (its figures are drawn here)
FIGURE_TIMEOUT_S = 300.0


def _pyplot():
    """matplotlib.pyplot on the Agg backend, imported on first use (it costs about half a
    second, which a run that draws nothing, or draws in other processes, does not pay)."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    return plt


def __getattr__(name):  # ``from streamsim.plots import plt`` imports pyplot then
    if name == "plt":
        plt = _pyplot()
        globals()["plt"] = plt
        return plt
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def message_figure(text: str, size=(6, 3)):
    """A figure that only says why there is nothing to draw."""
    fig, ax = _pyplot().subplots(figsize=size)
    ax.text(0.5, 0.5, text, ha="center", va="center")
    ax.set_axis_off()
    return fig


def draw_figures(results, data, folder) -> list[Path]:
    """Draw every figure of every block result into <folder>/figures/ (atomic PNGs), in this
    process, one after the other."""
    from .io import save_figure
    out = Path(folder) / "figures"
    paths = []
    for res in results.values():
        for f in res.figures:
            try:
                fig = f.draw(res, data)
                paths.append(save_figure(fig, out / f.file))
            finally:
                _pyplot().close("all")
    return paths


def _figure_list(results):
    return [(name, i) for name, res in results.items() for i in range(len(res.figures))]


def figure_processes(n_figures: int) -> int:
    """How many forked processes draw ``n_figures`` figures: one per idle core the process may
    use (at least one, at most 4 and at most one per figure); 0 (draw here) where fork is not the start method of
    the platform, inside a daemonic process (which may not have children), outside the main
    thread, or when ``STREAMSIM_FIGURE_PROCESSES`` says 0."""
    import multiprocessing as mp
    import os
    import sys
    env = os.environ.get("STREAMSIM_FIGURE_PROCESSES")
    if env is not None:
        try:
            return max(0, min(int(env), n_figures))
        except ValueError:
            pass
    import threading
    if not sys.platform.startswith("linux") or mp.current_process().daemon or \
            threading.current_thread() is not threading.main_thread():
        return 0   # (a Dask worker runs its tasks in threads: no fork there)
    try:
        cores = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        cores = os.cpu_count() or 1
    try:  # cores left idle (the run itself counts about one in the load average)
        idle = int(cores + 1 - os.getloadavg()[0])
    except OSError:
        idle = cores
    # a second drawer costs about 0.2 s of CPU (its own font and text caches): only on idle cores
    return max(0, min(cores, 4, n_figures, max(1, idle)))


def _draw_share(results, data, folder, conn, counter) -> None:
    """Draw figures taken from the shared counter until none is left; send back (index, path
    or exception) for each, then None."""
    from .io import save_figure
    todo = _figure_list(results)
    out = Path(folder) / "figures"
    while True:
        with counter.get_lock():
            k = counter.value
            counter.value += 1
        if k >= len(todo):
            break
        name, i = todo[k]
        res = results[name]
        f = res.figures[i]
        try:
            fig = f.draw(res, data)
            conn.send((k, save_figure(fig, out / f.file)))
        except Exception as ex:  # noqa: BLE001 - the parent re-raises it
            try:
                conn.send((k, ex))
            except Exception:  # noqa: BLE001 - an exception that does not pickle
                conn.send((k, RuntimeError(f"{ex.__class__.__name__}: {ex}")))
        finally:
            _pyplot().close("all")
    conn.send(None)


def _painter_main(data, folder, inbox, conns, counter, results=None):
    """The forked figure process: import matplotlib, wait for the block results on ``inbox``
    (unless it was forked with them), then fork one sibling per further connection of
    ``conns`` (matplotlib already imported, so it is paid once) and draw with them."""
    import os
    import signal
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # the parent handles Ctrl-C and ends us
    siblings = []
    try:
        _pyplot()  # imported while the parent computes the analysis
        from . import io as _io  # noqa: F401 - save_figure's module, before the fork
        if results is None:
            import pickle
            try:
                results = pickle.loads(inbox.recv_bytes())
            except EOFError:  # the parent has nothing to draw
                return
        inbox.close()
        mine = conns[0]
        for k, conn in enumerate(conns[1:], start=1):
            pid = os.fork()
            if pid == 0:
                code = 0
                try:
                    _draw_share(results, data, folder, conn, counter)
                except BaseException:  # noqa: BLE001 - the parent draws what is missing
                    code = 1
                finally:
                    os._exit(code)
            siblings.append(pid)
        for conn in conns[1:]:
            conn.close()
        _draw_share(results, data, folder, mine, counter)
    except (BrokenPipeError, OSError):  # the parent is gone
        pass
    finally:
        inbox.close()
        for conn in conns:
            conn.close()
        for pid in siblings:
            try:
                os.waitpid(pid, 0)
            except OSError:
                pass


class Painter:
    """Draws a run's figures in forked processes while this one goes on (analysis tables,
    summary). Create it as soon as the run's data are final: one process is forked and imports
    matplotlib meanwhile; when it has the block results (:meth:`draw`) it forks its siblings,
    which share the figures through a counter, so matplotlib is imported once. Collect the paths with
    :meth:`wait`, which re-raises the first figure's exception. Where no process can be forked
    (see :func:`figure_processes`) everything happens in :meth:`wait`, in this process.

    A figure is the same file either way: each block's draw function makes it, and
    :func:`streamsim.io.save_figure` writes it."""

    def __init__(self, data, folder, processes: int | None = None):
        self.data, self.folder = data, Path(folder)
        self.results = None
        self.procs, self.conns, self._outbox = [], [], None
        self.n = figure_processes(8) if processes is None else processes
        self._start(self.n)

    def _start(self, n: int, results=None) -> None:
        import multiprocessing as mp
        if n <= 0:
            return
        ctx = mp.get_context("fork")
        self.counter = ctx.Value("i", 0)
        pipes = [ctx.Pipe(duplex=False) for _ in range(n)]   # (read end, write end)
        inbox, self._outbox = ctx.Pipe(duplex=False)
        p = ctx.Process(target=_painter_main, args=(self.data, self.folder, inbox,
                                                     [w for _, w in pipes], self.counter,
                                                     results), daemon=True)
        import gc
        gc.freeze()   # the child's collector leaves the inherited objects (and their pages) alone
        try:
            p.start()
        finally:
            gc.unfreeze()
        inbox.close()
        for _, w in pipes:
            w.close()
        self.procs = [p]
        self.conns = [r for r, _ in pipes]

    def draw(self, results) -> None:
        """Start drawing the figures of these block results."""
        from multiprocessing.reduction import ForkingPickler
        self.results = results
        if not self.procs:
            return
        try:
            payload = bytes(ForkingPickler.dumps(results))
        except Exception:  # noqa: BLE001 - e.g. a block's draw function defined in a function
            self.close()   # new processes that inherit the results instead of receiving them
            self._start(self.n, results)
            return
        try:
            self._outbox.send_bytes(payload)   # the first process forks the others then
        except (BrokenPipeError, OSError):       # it is gone: wait() draws everything here
            pass
        self._outbox.close()

    def wait(self) -> list[Path]:
        """The figure paths, in the blocks' order; raises the first failed figure's exception."""
        if self.results is None:
            self.close()
            return []
        if not self.procs:
            return draw_figures(self.results, self.data, self.folder)
        got = {}
        try:
            for conn in self.conns:
                while True:
                    try:
                        if not conn.poll(FIGURE_TIMEOUT_S):  # stuck: draw the rest here
                            break
                        msg = conn.recv()
                    except EOFError:  # the process died: draw what it left here
                        break
                    if msg is None:
                        break
                    got[msg[0]] = msg[1]
        finally:
            self.close()
        todo = _figure_list(self.results)
        missing = [k for k in range(len(todo)) if k not in got]
        if missing:
            from .io import save_figure
            out = self.folder / "figures"
            for k in missing:
                name, i = todo[k]
                res = self.results[name]
                try:
                    got[k] = save_figure(res.figures[i].draw(res, self.data),
                                         out / res.figures[i].file)
                finally:
                    _pyplot().close("all")
        for k in range(len(todo)):
            if isinstance(got[k], BaseException):
                raise got[k]
        return [got[k] for k in range(len(todo))]

    def close(self) -> None:
        if getattr(self, "_outbox", None) is not None:
            self._outbox.close()
        for conn in self.conns:
            conn.close()
        self.conns = []
        for p in self.procs:
            p.join(timeout=5)
            if p.is_alive():
                p.terminate()
                p.join()
        self.procs = []
