"""Figures of a run: matplotlib helpers shared by the analysis blocks' figure functions, and the
generic loop that draws every block's figures into ``<folder>/figures/``.

Each block draws its figures from its own tables and summary entries (and the run's raw series),
never from a recomputation, so a figure always shows the numbers in summary.json.
"""
from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np

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


__all__ = ["plt", "message_figure", "draw_figures", "Painter", "WP", "T_LABEL", "X_LABEL",
           "K_LABEL", "DN", "KC", "NUC", "positive", "time_ns_axis", "length_cm_axis", "ghz_axis",
           "log_limits", "say_empty", "legend", "plot_positive", "quiet_log_minor", "top_positive",
           "SUMMARY_KEYS", "summary_value"]

# One notation in every figure (mathtext): the plasma frequency, the normalised axes, the density
# contrast and the coherence cutoff.
WP = r"$\omega_p$"
T_LABEL = r"$t$ [$1/\omega_p$]"
X_LABEL = r"$x$ [$c/\omega_p$]"
K_LABEL = r"$k$ [$\omega_p/c$]"
DN = r"$\delta n/n$"
KC = r"$k_c$"
NUC = r"$\nu_c$"


# The summary.json keys the figures read, in one place (a renamed key is fixed here alone):
# name -> (block, key).
SUMMARY_KEYS = {
    "nu_c_hz": ("coherence", "frequency_cutoff_hz"),
    "nu_c_lower_bound_hz": ("coherence", "frequency_cutoff_lower_bound_hz"),
    "bulk_gamma": ("coherence", "bulk_gamma"),
    "t_unity": ("contrast", "t_unity"),
    "t_unity_ns": ("contrast", "t_unity_ns"),
    "emission_nu_c_hz": ("emission", "frequency_cutoff_hz"),
    "emission_nu_c_err_hz": ("emission", "frequency_cutoff_err_hz"),
    "emission_size_cm": ("emission", "size_median_cm"),
    "emission_size_err_cm": ("emission", "size_median_err_cm"),
}


def summary_value(summary: dict, name: str):
    """The value of the summary entry ``name`` of :data:`SUMMARY_KEYS` (None if absent)."""
    block, key = SUMMARY_KEYS[name]
    return (summary.get(block) or {}).get(key)


def positive(y):
    """y with the values <= 0 (and non-finite ones) as NaN, for a log axis."""
    y = np.asarray(y, float)
    return np.where(np.isfinite(y) & (y > 0), y, np.nan)


def top_positive(arrays) -> float:
    """The largest positive finite value of the arrays (0 if none), without numpy warnings."""
    top = 0.0
    for a in arrays:
        a = np.asarray(a, float).ravel()
        a = a[np.isfinite(a) & (a > 0)]
        if a.size:
            top = max(top, float(a.max()))
    return top


def plot_positive(ax, x, y, *args, **kw):
    """Plot only the points where y > 0, joined (a spectrum with exact zeros between its
    harmonics stays one visible line on a log axis)."""
    x, y = np.asarray(x, float), np.asarray(y, float)
    keep = np.isfinite(y) & (y > 0) & np.isfinite(x)
    return ax.plot(x[keep], y[keep], *args, **kw)


def quiet_log_minor(ax, axis: str = "x"):
    """No labels on the minor ticks of a log axis (they crowd a short range)."""
    from matplotlib.ticker import NullFormatter
    getattr(ax, f"{axis}axis").set_minor_formatter(NullFormatter())


def time_ns_axis(ax, density_cm3: float, where: str = "top"):
    """A second time axis in ns beside an axis in 1/omega_p (t_ns = t / omega_p, units.time_ns
    of the run's reference density)."""
    from . import units
    tu = units.time_ns(1.0, float(density_cm3))
    sec = ax.secondary_xaxis(where, functions=(lambda t: t * tu, lambda t: t / tu))
    sec.set_xlabel(r"$t$ [ns]")
    return sec


def length_cm_axis(ax, density_cm3: float, where: str = "top"):
    """A second length axis in cm beside an axis in c/omega_p (units.skin_depth_cm)."""
    from . import units
    d = units.skin_depth_cm(float(density_cm3))
    sec = ax.secondary_xaxis(where, functions=(lambda x: x * d, lambda x: x / d))
    sec.set_xlabel(r"$x$ [cm]")
    return sec


def ghz_axis(ax, bulk_gamma: float, density_cm3: float, where: str = "top"):
    """A second axis in GHz beside a wavenumber axis in omega_p/c: nu = Gamma c k / 2 pi, the
    conversion of the coherence cutoff (analysis.coherence.emission_cutoff_hz)."""
    from .analysis.coherence import emission_cutoff_hz
    f = emission_cutoff_hz(1.0, float(bulk_gamma), float(density_cm3)) / 1e9
    sec = ax.secondary_xaxis(where, functions=(lambda k: k * f, lambda v: v / f))
    sec.set_xlabel(r"$\nu = \Gamma c k / 2\pi$ [GHz]" + f" ($\\Gamma$ = {bulk_gamma:.3g})")
    return sec


def log_limits(ax, arrays, decades: float = 8.0, percentile: float = 2.0, floor=None):
    """Limit a log y axis to what is above the noise: from the ``percentile``-th percentile of
    the positive values (never more than ``decades`` below the largest, never below ``floor``
    / 10 when a noise floor is given) to above the largest. Returns False if nothing is positive
    (then the caller says so in the axes)."""
    vals = [np.asarray(a, float).ravel() for a in arrays]
    pos = np.concatenate(vals) if vals else np.array([])
    pos = pos[np.isfinite(pos) & (pos > 0)]
    if not pos.size:
        return False
    top = float(pos.max())
    lo = max(float(np.percentile(pos, percentile)), top * 10.0 ** (-decades))
    if floor and float(floor) > 0:
        # the noise floor stays in view: the data above it is what the figure is about
        top = max(top, float(floor))
        lo = max(min(lo, float(floor) / 10.0), top * 10.0 ** (-decades))
    ax.set_ylim(lo / 3.0, top * 3.0)
    return True


def say_empty(ax, text: str, y: float = 0.5):
    """Say inside the axes (at height ``y`` of the axes) why there is nothing to show."""
    ax.text(0.5, y, text, ha="center", va="center", transform=ax.transAxes, fontsize=9,
            color="0.3", wrap=True, bbox=dict(facecolor="w", alpha=0.8, lw=0))


def legend(ax, **kw):
    """A readable legend, drawn only when something is labelled (no matplotlib warning)."""
    if ax.get_legend_handles_labels()[0]:
        kw.setdefault("fontsize", 8)
        kw.setdefault("framealpha", 0.85)
        return ax.legend(**kw)
    return None


def message_figure(text: str, size=(6, 3)):
    """A figure that only says why there is nothing to draw."""
    fig, ax = _pyplot().subplots(figsize=size)
    ax.text(0.5, 0.5, text, ha="center", va="center")
    ax.set_axis_off()
    return fig


def draw_figures(results, data, folder) -> list[Path]:
    """Draw every figure of every block result into <folder>/figures/ (atomic PNGs), in this
    process, one after the other."""
    out = Path(folder) / "figures"
    return [_draw_one(res, i, data, out) for res in results.values()
            for i in range(len(res.figures))]


def _draw_one(res, i: int, data, out: Path) -> Path:
    """Draw figure ``i`` of the block result ``res`` and write it into ``out``; every way of
    drawing (here, a figure process, what a process left) goes through this one function."""
    from .io import save_figure
    f = res.figures[i]
    try:
        with warnings.catch_warnings():   # matplotlib's complaints (an empty log axis)
            warnings.simplefilter("ignore")   # never reach the terminal
            return save_figure(f.draw(res, data), out / f.file)
    finally:
        _pyplot().close("all")


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
    todo = _figure_list(results)
    out = Path(folder) / "figures"
    while True:
        with counter.get_lock():
            k = counter.value
            counter.value += 1
        if k >= len(todo):
            break
        name, i = todo[k]
        try:
            conn.send((k, _draw_one(results[name], i, data, out)))
        except Exception as ex:  # noqa: BLE001 - the parent re-raises it
            try:
                conn.send((k, ex))
            except Exception:  # noqa: BLE001 - an exception that does not pickle
                conn.send((k, RuntimeError(f"{ex.__class__.__name__}: {ex}")))
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
        for k in missing:
            name, i = todo[k]
            got[k] = _draw_one(self.results[name], i, self.data, self.folder / "figures")
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
