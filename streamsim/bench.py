"""How fast the engine steps particles, against what the hardware allows, in one sitting.

Everything is measured in one process and interleaved (engine batch, copy, engine batch, ...)
so that ratios hold on a noisy shared machine; each figure is the best of its repeats.

- engine: :class:`streamsim.engine.Simulation` built from the default deck (two species) on
  the production grid (CELLS = 4096 cells) with ``particles_per_cell`` chosen to reach N
  particles, stepped by ``advance()`` exactly as a run steps it (push, deposit, field solve,
  diagnostics at the deck's default cadence), after warm-up steps. Reported in
  particle-steps/s, with the kernel alone, the rest of ``advance`` (field solve, sums, checks)
  and the handlers (diagnostics, peak snapshots) as separate lines.
- roofline: copy bandwidth (parallel, same threads, slice copies that compile to a memcpy-class
  loop) on two arrays of the particle arrays' size, converted at 32 bytes per particle-step
  (x and u as float64, read and written).
- ladder: what limits the speed. Three partial loops on the same particles (the in-place stream
  of x and u alone; + the relativistic push and wrap; + the CIC gather), then the full kernel
  (+ deposit and sums), then the whole step, each in particle-steps/s beside the roofline.
- peer: :mod:`streamsim.numpy_peer`, the same step in plain vectorised numpy (np.bincount
  deposit, rfft Poisson), on copies of the same particles.
- whole run: two fresh ``streamsim run`` processes of the default physics at WHOLE_RUN_PARTICLES
  (50 and 800 steps, analysis and figures included), differenced so that start-up, the end
  checkpoint and the fixed part of the analysis cancel; the time outside the time loop
  (start-up, io, analysis, figures) of each process is reported beside it.
- memory: peak resident bytes per particle of a run, measured in a fresh subprocess.
- cached start: wall time of a fresh ``python -c "import streamsim; streamsim.run(...)"``
  of a small deck with the numba cache warm.
- outside the loop: the default demo with and without ``--no-analysis`` (interleaved
  processes), what analysis, tables and figures add at WHOLE_RUN_PARTICLES, each of them timed
  in-process, the default checkpoint cadence against the long whole run's loop, and the whole
  run's per-step rate against the engine step.
"""
from __future__ import annotations

import json
import math
import os
import platform
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

#: bytes moved per particle-step at the roofline: x and u, float64, read and written
BYTES_PER_PARTICLE_STEP = 32
#: cells of the benchmark deck (the production grid)
CELLS = 4096
#: the scaling table; the headline is its largest N below 1e7 that is >= HEADLINE_MIN
DEFAULT_PARTICLES = (100_000, 1_000_000, 2_097_152, 10_000_000)
#: the headline's particle count must be at least this (production size, arrays beyond cache)
HEADLINE_MIN = 2_000_000
#: the whole-run processes: 4096 cells x 256 particles per cell per species, two species
WHOLE_RUN_PARTICLES = 2_097_152
WHOLE_RUN_STEPS = (50, 800)

_SMALL_DECK = {"title": "bench start-up", "box": {"cells": 64, "length": 6.283185307179586},
               "time": {"dt": 0.05, "end": 1.0},
               "species": [{"name": "electrons", "charge": -1.0, "density": 1.0,
                            "particles_per_cell": 16}]}


def bench_deck(particles: int, threads: int = 0, cells: int = CELLS):
    """The default deck (two counter-streaming species) on ``cells`` cells with ppc set so that
    the total is about ``particles`` (a multiple of 2 * cells)."""
    import tomllib

    from .deck import DEFAULT_DECK, load_deck
    raw = tomllib.loads(DEFAULT_DECK)
    ppc = max(1, int(round(particles / (len(raw["species"]) * cells))))
    raw["box"]["cells"] = cells
    for s in raw["species"]:
        s["particles_per_cell"] = ppc
    raw.setdefault("output", {})["threads"] = threads
    return load_deck(raw)


def _copy_kernel():
    import numba as nb

    # slice copies: numba lowers them to a vectorised memcpy-class loop (an element loop with
    # a data-dependent bound was measured 3-5x slower, which understated the roofline)
    @nb.njit(parallel=True, boundscheck=False)
    def copy2(xs, us, xd, ud, nchunks, reps):
        n = xs.size
        chunk = (n + nchunks - 1) // nchunks
        for c in nb.prange(nchunks):
            lo = min(n, c * chunk)
            hi = min(n, lo + chunk)
            for _ in range(reps):
                xd[lo:hi] = xs[lo:hi]
                ud[lo:hi] = us[lo:hi]
    return copy2


_COPY = None


def copy_seconds(xs, us, xd, ud, threads: int) -> float:
    """Seconds per parallel copy of (xs, us) into (xd, ud), repeated inside one parallel launch
    until ~0.3 GB have moved, so that the launch cost does not count as bandwidth."""
    global _COPY
    if _COPY is None:
        _COPY = _copy_kernel()
        _COPY(xs[:8], us[:8], xd[:8], ud[:8], 1, 1)
    reps = max(1, int(3e8 // (BYTES_PER_PARTICLE_STEP * xs.size)))
    t = time.perf_counter()
    _COPY(xs, us, xd, ud, threads, reps)
    return (time.perf_counter() - t) / reps


def _ladder_kernels():
    """Three loops that do a growing part of the push + deposit's work on the particle arrays,
    each with the kernel's chunking and indexing, compiled once: (1) the in-place stream of x
    and u with no arithmetic worth the name, (2) the relativistic push and periodic wrap in a
    uniform field (the square root and the division), (3) the push with the CIC gather of E.
    The full kernel adds the deposit and the energy and momentum sums."""
    import numba as nb

    from .kernels import _ix

    @nb.njit(inline="always")
    def step(xj, uj, ej, qm_dt, dt, length, inv_len):
        """The kernel's relativistic kick, drift and periodic wrap of one particle."""
        un = uj + qm_dt * ej
        gn = math.sqrt(1.0 + un * un)
        r = 1.0 / (gn * (gn + 1.0))
        xn = xj + un * (gn + 1.0) * r * dt
        xn = xn - length * math.floor(xn * inv_len)
        xn = xn + length if xn < 0.0 else xn
        xn = xn - length if xn >= length else xn
        return xn, un

    @nb.njit(parallel=True, boundscheck=False, error_model="numpy")
    def stream(x, u, e, qm_dt, dt, length, nchunks):
        n = x.size
        chunk = (n + nchunks - 1) // nchunks
        for c in nb.prange(nchunks):
            lo = min(n, c * chunk)
            hi = min(n, lo + chunk)
            for k in range(hi - lo):
                j = _ix(lo + k)
                un = u[j] + qm_dt * e[0]
                u[j] = un
                x[j] = x[j] + 0.0 * un * dt         # positions unchanged, still read and written

    @nb.njit(parallel=True, boundscheck=False, error_model="numpy")
    def push(x, u, e, qm_dt, dt, length, nchunks):
        n = x.size
        inv_len = 1.0 / length
        chunk = (n + nchunks - 1) // nchunks
        for c in nb.prange(nchunks):
            lo = min(n, c * chunk)
            hi = min(n, lo + chunk)
            for k in range(hi - lo):
                j = _ix(lo + k)
                x[j], u[j] = step(x[j], u[j], e[0], qm_dt, dt, length, inv_len)

    @nb.njit(parallel=True, boundscheck=False, error_model="numpy")
    def push_gather(x, u, e, qm_dt, dt, length, nchunks):
        n = x.size
        ng = e.size
        inv_dx = ng / length
        inv_len = 1.0 / length
        fng = float(ng)
        ee = np.empty(ng + 2)
        ee[:ng] = e
        ee[ng] = e[0]
        ee[ng + 1] = e[1 % ng]
        chunk = (n + nchunks - 1) // nchunks
        for c in nb.prange(nchunks):
            lo = min(n, c * chunk)
            hi = min(n, lo + chunk)
            for k in range(hi - lo):
                j = _ix(lo + k)
                xj = x[j]
                xg = min(xj * inv_dx, fng)
                i = int(xg)
                f = xg - i
                ii = _ix(i)
                ej = (1.0 - f) * ee[ii] + f * ee[ii + _ix(1)]
                x[j], u[j] = step(xj, u[j], ej, qm_dt, dt, length, inv_len)

    return {"stream": stream, "push": push, "push_gather": push_gather}


_LADDER = None


def ladder(sim, xd, ud, repeats: int = 5) -> dict:
    """particle-steps/s of the three partial loops of :func:`_ladder_kernels` and of the full
    kernel, on scratch copies (xd, ud) of the run's particles with its field, all threads,
    interleaved and best of ``repeats``: where the time of a step goes, beside the roofline."""
    global _LADDER
    from . import kernels
    if _LADDER is None:
        _LADDER = _ladder_kernels()
        for k in _LADDER.values():
            k(xd[:8].copy(), ud[:8].copy(), sim.efield, 0.0, 0.0, sim.deck.box.length, 1)
    b = sim.deck.box
    sizes = [x.size for x in sim.x]
    parts = [(sum(sizes[:s]), sum(sizes[:s + 1])) for s in range(len(sizes))]

    def full():
        for s, (lo, hi) in enumerate(parts):
            kernels.push_deposit(xd[lo:hi], ud[lo:hi], sim.efield, sim.qm[s] * sim.dt, sim.dt,
                                 b.length, sim.shape, sim.nchunks, sim.partial, sim.sums[s])

    def partial(k):
        def f():
            for s, (lo, hi) in enumerate(parts):
                k(xd[lo:hi], ud[lo:hi], sim.efield, sim.qm[s] * sim.dt, sim.dt, b.length,
                  sim.nchunks)
        return f
    runs = {name: partial(k) for name, k in _LADDER.items()}
    runs["kernel"] = full
    best = {name: np.inf for name in runs}
    for _ in range(repeats):
        for name, f in runs.items():
            best[name] = min(best[name], _timed(f))
    n = xd.size
    return {f"{name}_particle_steps_per_s": n / t for name, t in best.items()}


def _burn_kernel():
    import numba as nb

    @nb.njit(parallel=True)
    def burn(n, nchunks):
        out = np.zeros(nchunks)
        for c in nb.prange(nchunks):
            s = 0.0
            for j in range(n):
                s += math.sqrt(s + j)
            out[c] = s
        return out
    return burn


def core_capacity(threads: int, n: int = 4_000_000) -> float:
    """How many cores' worth of compute ``threads`` threads actually got just now: T times the
    time of one thread's fixed work over the time of T threads doing T such works (T on an
    idle machine, less when other jobs share the cores)."""
    import numba
    burn = _burn_kernel()
    burn(10, 1)
    saved = numba.get_num_threads()
    try:
        best = {}
        for t in (1, threads):
            numba.set_num_threads(t)
            best[t] = min(_timed(lambda: burn(n, t)) for _ in range(3))
    finally:
        numba.set_num_threads(saved)
    return threads * best[1] / best[threads]


def _timed(f) -> float:
    t = time.perf_counter()
    f()
    return time.perf_counter() - t


def load_numpy_peer():
    """The NumpyPeer class (:mod:`streamsim.numpy_peer`)."""
    from .numpy_peer import NumpyPeer
    return NumpyPeer


def measure(particles: int, threads: int, *, steps: int = 10, repeats: int = 3,
            warmup: int = 3, peer: bool = True, peer_steps: int = 2) -> dict:
    """Engine, kernel-only, roofline and peer rates for one N and thread count, and the parts
    of a step around the kernel (rest of ``advance``, handlers, one peak-snapshot copy, one
    checkpoint write) as separate lines."""
    import tempfile

    from . import io, kernels
    from .diagnostics import PeakSnapshot, make_handlers
    from .engine import Simulation
    deck = bench_deck(particles, threads)
    t0 = time.perf_counter()
    sim = Simulation(deck, threads)
    handlers = make_handlers(sim)   # the recording a run does, at the deck's cadences
    setup = time.perf_counter() - t0
    n = int(sum(x.size for x in sim.x))
    clock = {"advance": 0.0, "handlers": 0.0}

    def step():
        k = sim.step % sim.steps    # the handlers' arrays hold one run: wrap the step count
        t = time.perf_counter()
        for h in handlers:
            h.before(sim, k)
        t1 = time.perf_counter()
        sim.advance()
        t2 = time.perf_counter()
        for h in handlers:
            h.after(sim, k)
        t3 = time.perf_counter()
        clock["advance"] += t2 - t1
        clock["handlers"] += (t1 - t) + (t3 - t2)
        if sim.step >= sim.steps:
            sim.step = 0
            for h in handlers:
                if hasattr(h, "count"):
                    h.count = 0

    for _ in range(warmup):
        step()
    xs = np.concatenate(sim.x)
    us = np.concatenate(sim.u)
    xd = np.empty_like(xs)
    ud = np.empty_like(us)
    copy_seconds(xs, us, xd, ud, sim.threads)
    b = sim.deck.box
    best_step = best_copy = best_kernel = best_adv = best_hand = np.inf
    for _ in range(repeats):
        clock["advance"] = clock["handlers"] = 0.0
        t = time.perf_counter()
        for _ in range(steps):
            step()
        wall = (time.perf_counter() - t) / steps
        if wall < best_step:
            best_step = wall
            best_adv, best_hand = clock["advance"] / steps, clock["handlers"] / steps
        for _ in range(3):
            best_copy = min(best_copy, copy_seconds(xs, us, xd, ud, sim.threads))
        # the kernel alone (no field solve, no diagnostics), on scratch copies of the particles
        t = time.perf_counter()
        lo = 0
        for s in range(len(sim.x)):
            hi = lo + sim.x[s].size
            kernels.push_deposit(xd[lo:hi], ud[lo:hi], sim.efield, sim.qm[s] * sim.dt, sim.dt,
                                 b.length, sim.shape, sim.nchunks, sim.partial, sim.sums[s])
            lo = hi
        best_kernel = min(best_kernel, time.perf_counter() - t)
    # where the kernel's time goes: partial loops on the same particles, same sitting
    np.copyto(xd, xs)
    np.copyto(ud, us)
    steps_ladder = ladder(sim, xd, ud)
    # one copy of every position, as PeakSnapshot takes at each new maximum above
    # EXACT_ABOVE (about one diagnostics record in ten of a default run's growth phase)
    peak = next(h for h in handlers if isinstance(h, PeakSnapshot))
    best_peak = np.inf
    for _ in range(3):
        t = time.perf_counter()
        for dst, src in zip(peak.x, sim.x):
            np.copyto(dst, src)
        best_peak = min(best_peak, time.perf_counter() - t)
    # one checkpoint write (a default run writes one at its end, and one every five minutes)
    with tempfile.TemporaryDirectory() as tmp:
        st = sim.state()
        t = time.perf_counter()
        io.write_checkpoint(Path(tmp) / "checkpoint.h5", st,
                            {h.name: h.state() for h in handlers}, {"bench": True})
        ckpt = time.perf_counter() - t
    out = {
        "particles": n, "threads": sim.threads, "cells": b.cells, "shape": b.shape,
        "diagnostics_interval_steps": handlers[-1].every,
        "setup_s": setup,
        "step_s": best_step,
        "particle_steps_per_s": n / best_step,
        "ns_per_particle_step": best_step / n * 1e9,
        "kernel_particle_steps_per_s": n / best_kernel,
        "kernel_step_s": best_kernel,
        "overhead_per_step_s": max(0.0, best_step - best_kernel),
        "advance_outside_kernel_per_step_s": max(0.0, best_adv - best_kernel),
        "handlers_per_step_s": best_hand,
        "peak_snapshot_copy_s": best_peak,
        "checkpoint_write_s": ckpt,
        "copy_bandwidth_gb_s": BYTES_PER_PARTICLE_STEP * n / best_copy / 1e9,
        "roofline_particle_steps_per_s": n / best_copy,
    }
    out["roofline_fraction"] = out["particle_steps_per_s"] / out["roofline_particle_steps_per_s"]
    out["ladder"] = steps_ladder
    out["numpy_particle_steps_per_s"] = None
    if peer:
        Peer = load_numpy_peer()
        if Peer is not None:
            p = Peer(sim)
            p.step()
            best = np.inf
            for _ in range(peer_steps):
                t = time.perf_counter()
                p.step()
                best = min(best, time.perf_counter() - t)
            out["numpy_particle_steps_per_s"] = n / best
            out["speedup_vs_numpy"] = out["particle_steps_per_s"] / out["numpy_particle_steps_per_s"]
    sim = handlers = xs = us = xd = ud = None  # noqa: F841 - free the arrays before the next size
    return out


def _run_process(steps: int | None, particles: int | None, threads: int, folder,
                 analysis: bool = True) -> dict:
    """Wall time of one fresh ``streamsim run`` process (analysis and figures included unless
    ``analysis`` is false: ``--no-analysis``) of the default physics on CELLS cells with
    ``steps`` steps (None, None: the default demo as it is), and its time loop (summary
    ``wall_s``)."""
    cmd = [sys.executable, "-m", "streamsim.cli", "run", "--quiet", "--force", "--out",
           str(folder)] + ([] if analysis else ["--no-analysis"])
    if particles is not None:
        deck = bench_deck(particles, threads)
        ppc = deck.species[0].particles_per_cell
        sets = [f"box.cells={CELLS}", f"time.end={steps * deck.time.dt!r}",
                f"output.threads={threads}"]
        sets += [f"species.{sp.name}.particles_per_cell={ppc}" for sp in deck.species]
        for v in sets:
            cmd += ["--set", v]
    t = time.perf_counter()
    r = subprocess.run(cmd, capture_output=True, text=True, timeout=1800)
    wall = time.perf_counter() - t
    if r.returncode != 0:
        raise RuntimeError(r.stderr.strip().splitlines()[-1] if r.stderr.strip() else "failed")
    with open(Path(folder) / "summary.json") as f:
        summary = json.load(f)
    return {"steps": int(summary["steps"]), "particles": int(summary["particles"]),
            "process_s": wall, "loop_s": float(summary["wall_s"]),
            "outside_loop_s": wall - float(summary["wall_s"])}


def analysis_seconds(folder) -> dict:
    """The end-of-run analysis and its figures on a finished run folder, timed in-process:
    read, compute, the tables alone, the figures alone (in their forked processes, as a run
    draws them), and tables and figures together as a run writes them (overlapped)."""
    from . import analysis, io
    from .analysis.writers import write_tables
    from .plots import Painter
    t = time.perf_counter()
    data = io.read_run(folder)
    t1 = time.perf_counter()
    results = analysis.compute(data)
    t2 = time.perf_counter()
    write_tables(results, folder)
    t3 = time.perf_counter()
    painter = Painter(data, folder)
    painter.draw(results)
    painter.wait()
    t4 = time.perf_counter()
    analysis.write_outputs(results, data, folder, figures=True)
    t5 = time.perf_counter()
    return {"read_s": t1 - t, "compute_s": t2 - t1, "tables_s": t3 - t2, "figures_s": t4 - t3,
            "write_and_figures_s": t5 - t4, "samples": int(data.series.t.size)}


def whole_run(particles: int = WHOLE_RUN_PARTICLES, threads: int = 0,
              steps=WHOLE_RUN_STEPS, repeats: int = 1) -> dict:
    """whole_run_particle_steps_per_s from two real ``streamsim run`` processes (``steps``,
    short and long) differenced, best of ``repeats`` pairs; a warm-up process fills the numba
    cache first. Also the analysis of each, timed in-process on its folder."""
    import tempfile
    lo, hi = sorted(steps)
    best = None
    with tempfile.TemporaryDirectory() as tmp:
        _run_process(2, 2 * CELLS, threads, Path(tmp) / "warm")
        beyond = []
        for r in range(repeats):
            bare = _run_process(lo, particles, threads, Path(tmp) / f"bare{r}", analysis=False)
            a = _run_process(lo, particles, threads, Path(tmp) / f"short{r}")
            b = _run_process(hi, particles, threads, Path(tmp) / f"long{r}")
            # what analysis, tables and figures add to a run: outside-the-loop times differenced
            beyond.append(a["outside_loop_s"] - bare["outside_loop_s"])
            dt = b["process_s"] - a["process_s"]
            rate = (b["steps"] - a["steps"]) * b["particles"] / dt if dt > 0 else None
            if rate is not None and (best is None or rate > best["rate"]):
                best = {"rate": rate, "short": a, "long": b, "bare": bare,
                        "analysis_short": analysis_seconds(Path(tmp) / f"short{r}"),
                        "analysis_long": analysis_seconds(Path(tmp) / f"long{r}")}
    if best is None:
        return {"whole_run_particle_steps_per_s": None}
    return {"whole_run_particle_steps_per_s": best["rate"], "particles": best["long"]["particles"],
            "steps": [best["short"]["steps"], best["long"]["steps"]],
            "short": best["short"], "long": best["long"], "no_analysis": best["bare"],
            "analysis_beyond_no_analysis_s": min(beyond),
            "analysis_short": best["analysis_short"], "analysis_long": best["analysis_long"]}


def demo_costs(repeats: int = 3) -> dict:
    """The default demo as a user runs it, ``streamsim run`` against ``streamsim run
    --no-analysis``, interleaved in fresh processes after a warm-up, best of ``repeats`` each:
    the whole-run ratio, the time loop, and the time outside the loop without the analysis
    (start-up, theory, io, the end checkpoint)."""
    import tempfile
    full, bare = [], []
    with tempfile.TemporaryDirectory() as tmp:
        _run_process(None, None, 0, Path(tmp) / "warm")
        for r in range(repeats):
            bare.append(_run_process(None, None, 0, Path(tmp) / f"bare{r}", analysis=False))
            full.append(_run_process(None, None, 0, Path(tmp) / f"full{r}"))
    f = min(full, key=lambda p: p["process_s"])
    b = min(bare, key=lambda p: p["process_s"])
    return {"whole_s": f["process_s"], "no_analysis_s": b["process_s"],
            "ratio": f["process_s"] / b["process_s"], "loop_s": b["loop_s"],
            "no_analysis_outside_loop_s": min(p["outside_loop_s"] for p in bare),
            "outside_loop_s": min(p["outside_loop_s"] for p in full)}


def checkpoint_share(write_s: float, loop_s: float) -> dict:
    """The default checkpoint cadence's cost over a loop of ``loop_s``: one write every
    :attr:`streamsim.checkpointer.Checkpointer.WALL_S` of wall-clock time and one at the end."""
    from .checkpointer import Checkpointer
    writes = int(loop_s // Checkpointer.WALL_S) + 1
    return {"writes": writes, "write_s": write_s, "loop_s": loop_s,
            "fraction": writes * write_s / loop_s if loop_s > 0 else None}


def load_average() -> list[float] | None:
    """The 1, 5 and 15 minute load averages (how busy the shared machine was)."""
    try:
        return [round(v, 2) for v in os.getloadavg()]
    except OSError:
        return None


_MEMORY_CHILD = r"""
import json, resource, sys
import psutil
import streamsim
from streamsim.bench import bench_deck
from streamsim.engine import Simulation
n, threads = int(sys.argv[1]), int(sys.argv[2])
warm = Simulation(bench_deck(2048, threads), threads)   # compile/load every kernel first
for _ in range(2):
    warm.advance()
del warm
base = psutil.Process().memory_info().rss
sim = Simulation(bench_deck(n, threads), threads)
for _ in range(3):
    sim.advance()
def hwm():   # this process's peak RSS (VmHWM is per address space; ru_maxrss survives exec)
    try:
        with open("/proc/self/status") as f:
            for line in f:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
peak = hwm()
held = psutil.Process().memory_info().rss
print(json.dumps({"particles": int(sum(x.size for x in sim.x)), "base": base, "peak": peak,
                  "held": held}))
"""


def memory_per_particle(particles: int = 4_000_000, threads: int = 0) -> dict:
    """Peak and held resident bytes per particle of Simulation(deck) + 3 steps, in a fresh
    process (RSS above the process's size after a small warm-up run)."""
    r = subprocess.run([sys.executable, "-c", _MEMORY_CHILD, str(particles), str(threads)],
                       capture_output=True, text=True, timeout=300)
    if r.returncode != 0:
        return {"error": r.stderr.strip().splitlines()[-1] if r.stderr.strip() else "failed"}
    d = json.loads(r.stdout.strip().splitlines()[-1])
    n = d["particles"]
    return {"particles": n, "bytes_per_particle_peak": (d["peak"] - d["base"]) / n,
            "bytes_per_particle_held": (d["held"] - d["base"]) / n}


def cached_start(repeats: int = 2) -> float:
    """Best wall time of a fresh interpreter importing streamsim and running a small deck in
    memory, with the numba cache warm (a first run fills it)."""
    code = ("import streamsim; streamsim.run(%r, write=False, analyze=False)" % (_SMALL_DECK,))
    best = np.inf
    for i in range(repeats + 1):
        t = time.perf_counter()
        subprocess.run([sys.executable, "-c", code], check=True, capture_output=True, timeout=300)
        if i > 0:                                      # the first run may fill the cache
            best = min(best, time.perf_counter() - t)
    return best


def machine() -> dict:
    import numba
    cpu = platform.processor() or platform.machine()
    try:
        with open("/proc/cpuinfo") as f:
            for line in f:
                if line.startswith("model name"):
                    cpu = line.split(":", 1)[1].strip()
                    break
    except OSError:
        pass
    return {"cpu": cpu, "cores": os.cpu_count(), "numba_threads": numba.config.NUMBA_NUM_THREADS,
            "threading_layer": numba.config.THREADING_LAYER, "python": platform.python_version(),
            "numpy": np.__version__, "numba": numba.__version__,
            "date": time.strftime("%Y-%m-%d %H:%M")}


def run(particles=DEFAULT_PARTICLES, threads=None, *, steps: int = 10, repeats: int = 3,
        memory: bool = True, start: bool = True, whole: bool = True, whole_repeats: int = 1,
        progress=None) -> dict:
    """The whole benchmark. Headline figures are those of the N nearest WHOLE_RUN_PARTICLES
    among those >= HEADLINE_MIN (else the largest N), with all threads."""
    import numba
    if threads is None:
        threads = list(range(1, numba.config.NUMBA_NUM_THREADS + 1))
    particles = sorted(int(p) for p in particles)
    threads = sorted(int(t) for t in threads)
    scaling = []
    load_before = load_average()
    capacity_before = core_capacity(threads[-1])
    for n in particles:
        for t in threads:
            # fewer steps at large N keeps the whole run within its budget
            k = max(3, min(steps, int(steps * 2e6 / max(n, 1))))
            row = measure(n, t, steps=k, repeats=repeats, peer=(t == threads[-1]))
            row["load_average"] = load_average()
            scaling.append(row)
            if progress:
                progress(row)
    top = [r for r in scaling if r["threads"] == threads[-1]]
    big = [r for r in top if r["particles"] >= HEADLINE_MIN]
    head = (min(big, key=lambda r: abs(math.log(r["particles"] / WHOLE_RUN_PARTICLES)))
            if big else top[-1])
    ns = [r["ns_per_particle_step"] for r in top]
    result = {
        "particle_steps_per_s": head["particle_steps_per_s"],
        "roofline_particle_steps_per_s": head["roofline_particle_steps_per_s"],
        "roofline_fraction": head["roofline_fraction"],
        "numpy_particle_steps_per_s": head["numpy_particle_steps_per_s"],
        "speedup_vs_numpy": head.get("speedup_vs_numpy"),
        "whole_run_particle_steps_per_s": None,
        "whole_run_roofline_fraction": None,
        "whole_run_speedup_vs_numpy": None,
        "bytes_per_particle_peak": None,
        "cached_start_s": None,
        "scaling": scaling,
        "headline": {"particles": head["particles"], "threads": head["threads"],
                     "cells": head["cells"]},
        "cost_spread_over_n": (max(ns) / min(ns) - 1.0) if ns else None,
        "machine": machine(),
        "load_average": {"before": load_before},
        "core_capacity": {"threads": threads[-1], "before": capacity_before},
    }
    if whole:
        w = whole_run(threads=threads[-1], repeats=whole_repeats)
        result["whole_run"] = w
        rate = w.get("whole_run_particle_steps_per_s")
        result["whole_run_particle_steps_per_s"] = rate
        if rate:
            result["whole_run_roofline_fraction"] = rate / head["roofline_particle_steps_per_s"]
            if head["numpy_particle_steps_per_s"]:
                result["whole_run_speedup_vs_numpy"] = rate / head["numpy_particle_steps_per_s"]
    result["core_capacity"]["after"] = core_capacity(threads[-1])
    result["load_average"]["after"] = load_average()
    if memory:
        mem = memory_per_particle(min(4_000_000, max(particles)), threads[-1])
        result["memory"] = mem
        result["bytes_per_particle_peak"] = mem.get("bytes_per_particle_peak")
    if start:
        result["cached_start_s"] = cached_start()
        result["demo"] = demo_costs()
    w = result.get("whole_run") or {}
    if w.get("whole_run_particle_steps_per_s"):
        result["whole_run_over_engine_step"] = (w["whole_run_particle_steps_per_s"]
                                                / head["particle_steps_per_s"])
        result["checkpoint_cadence"] = checkpoint_share(head["checkpoint_write_s"],
                                                        w["long"]["loop_s"])
    return result


def head_row(result: dict) -> dict | None:
    """The scaling row of the headline."""
    h = result["headline"]
    rows = [r for r in result["scaling"] if r["particles"] == h["particles"]
            and r["threads"] == h["threads"]]
    return rows[-1] if rows else None


def cost_lines(result: dict) -> list[str]:
    """What a run costs outside its time loop, beside the loop, with the targets."""
    lines = []
    d = result.get("demo")
    w = result.get("whole_run") or {}
    ck = result.get("checkpoint_cadence")
    if not (d or ck or w.get("analysis_beyond_no_analysis_s") is not None):
        return lines
    lines.append("outside the time loop (same sitting):")
    if d:
        lines.append(f"  default demo: `streamsim run` {d['whole_s']:.2f} s, with --no-analysis "
                     f"{d['no_analysis_s']:.2f} s: ratio {d['ratio']:.2f} (target <= 1.5); its "
                     f"time loop {d['loop_s']:.2f} s")
        lines.append(f"  start-up etc. (--no-analysis, outside the loop: imports, deck, theory, "
                     f"kernels from the cache, io, the end checkpoint): "
                     f"{d['no_analysis_outside_loop_s']:.2f} s (target <= 0.5 s)")
    if w.get("analysis_beyond_no_analysis_s") is not None:
        a = w["analysis_short"]
        lines.append(f"  N = {w['particles']}, {w['steps'][0]} steps: analysis, tables and figures "
                     f"add {w['analysis_beyond_no_analysis_s']:.2f} s to --no-analysis (target "
                     f"<= 1.0 s); in-process: compute {a['compute_s']:.2f} s, tables "
                     f"{a['tables_s']:.2f} s, figures {a['figures_s']:.2f} s (other processes)")
    if ck:
        lines.append(f"  checkpoints at the default cadence (every 5 min of wall-clock time and at "
                     f"the end) over the {w['steps'][1]}-step loop of {ck['loop_s']:.2f} s: "
                     f"{ck['writes']} x {ck['write_s'] * 1e3:.0f} ms = {ck['fraction']:.1%} of "
                     f"the loop (target <= 5%)")
    if result.get("whole_run_over_engine_step"):
        lines.append(f"  whole run's per-step rate / the engine step: "
                     f"{result['whole_run_over_engine_step']:.2f} (target >= 0.8)")
    return lines


def format_table(result: dict) -> str:
    """The human-readable report of :func:`run`."""
    m = result["machine"]
    lines = [f"machine: {m['cpu']}, {m['cores']} cores, numba {m['numba']} "
             f"({m['threading_layer']}), {m['date']}",
             f"{'particles':>10} {'thr':>3} {'Mp-steps/s':>11} {'ns/p-step':>9} {'kernel':>9} "
             f"{'roofline':>9} {'fraction':>8} {'numpy':>8} {'speedup':>7} {'ovh/step':>9}"]
    for r in result["scaling"]:
        npy = r.get("numpy_particle_steps_per_s")
        lines.append(
            f"{r['particles']:>10d} {r['threads']:>3d} {r['particle_steps_per_s'] / 1e6:>11.1f} "
            f"{r['ns_per_particle_step']:>9.2f} {r['kernel_particle_steps_per_s'] / 1e6:>9.1f} "
            f"{r['roofline_particle_steps_per_s'] / 1e6:>9.1f} {r['roofline_fraction']:>8.2f} "
            + (f"{npy / 1e6:>8.1f} {r['speedup_vs_numpy']:>7.1f}" if npy else f"{'-':>8} {'-':>7}")
            + f" {r['overhead_per_step_s'] * 1e3:>7.2f}ms")
    h = result["headline"]
    lines.append(f"headline (N = {h['particles']}, {h['threads']} threads): "
                 f"{result['particle_steps_per_s']:.3g} particle-steps/s = "
                 f"{result['roofline_fraction']:.2f} of the copy roofline, "
                 + (f"{result['speedup_vs_numpy']:.1f}x the numpy peer"
                    if result.get("speedup_vs_numpy") else "no numpy peer"))
    r = head_row(result)
    if r is not None:
        step = r["step_s"]
        lines.append(
            f"one step at N = {r['particles']} ({r['cells']} cells): {step * 1e3:.2f} ms = kernel "
            f"{r['kernel_step_s'] * 1e3:.2f} ms + rest of advance (solve, sums, checks) "
            f"{r['advance_outside_kernel_per_step_s'] * 1e3:.2f} ms + handlers (diagnostics, "
            f"peak snapshot) {r['handlers_per_step_s'] * 1e3:.2f} ms")
        lad = r.get("ladder")
        if lad:
            roof = r["roofline_particle_steps_per_s"]
            parts = [("in-place stream of x, u", "stream"),
                     ("+ relativistic push and wrap (square root, division)", "push"),
                     ("+ CIC gather of E", "push_gather"),
                     ("+ deposit and sums = the kernel", "kernel")]
            lines.append(f"what limits the speed (N = {r['particles']}, {r['threads']} threads, "
                         f"same sitting; particle-steps/s and fraction of the copy roofline):")
            for label, key in parts:
                v = lad[f"{key}_particle_steps_per_s"]
                lines.append(f"  {label:<55} {v:>10.3g}  {v / roof:>5.2f}")
            lines.append(f"  {'+ field solve, sums, checks, diagnostics = one step':<55} "
                         f"{r['particle_steps_per_s']:>10.3g}  {r['roofline_fraction']:>5.2f}")
        lines.append(f"one peak-snapshot copy of all positions: {r['peak_snapshot_copy_s'] * 1e3:.2f}"
                     f" ms ({r['peak_snapshot_copy_s'] / step:.2f} step); one checkpoint write: "
                     f"{r['checkpoint_write_s'] * 1e3:.0f} ms ({r['checkpoint_write_s'] / step:.1f}"
                     f" steps)")
    w = result.get("whole_run")
    if w and w.get("whole_run_particle_steps_per_s"):
        lines.append(
            f"whole run (two `streamsim run` processes, N = {w['particles']}, {w['steps'][0]} and "
            f"{w['steps'][1]} steps, differenced): {w['whole_run_particle_steps_per_s']:.3g} "
            f"particle-steps/s = {result['whole_run_roofline_fraction']:.2f} of the copy roofline, "
            + (f"{result['whole_run_speedup_vs_numpy']:.1f}x the numpy peer"
               if result.get("whole_run_speedup_vs_numpy") else "no numpy peer"))
        for key in ("short", "long"):
            p, a = w[key], w[f"analysis_{key}"]
            lines.append(
                f"  {p['steps']:>4d} steps: process {p['process_s']:.2f} s, time loop "
                f"{p['loop_s']:.2f} s, outside the loop {p['outside_loop_s']:.2f} s; analysis of "
                f"its {a['samples']} samples: compute {a['compute_s']:.2f} s, tables "
                f"{a['tables_s']:.2f} s, figures {a['figures_s']:.2f} s (on their own), tables "
                f"and figures as a run writes them {a['write_and_figures_s']:.2f} s")
    lines += cost_lines(result)
    la = result.get("load_average")
    if la:
        lines.append(f"load average (1/5/15 min) before: {la.get('before')}, after: {la.get('after')}")
    cap = result.get("core_capacity")
    if cap:
        lines.append(f"cores' worth of compute that {cap['threads']} threads got (burn test, "
                     f"before/after): {cap['before']:.2f} / {cap['after']:.2f}")
    if result.get("cost_spread_over_n") is not None:
        lines.append(f"cost per particle-step, max/min over N - 1: {result['cost_spread_over_n']:.2f}")
    if result.get("bytes_per_particle_peak") is not None:
        mem = result["memory"]
        lines.append(f"peak memory: {mem['bytes_per_particle_peak']:.1f} bytes/particle "
                     f"(held after 3 steps: {mem['bytes_per_particle_held']:.1f}; "
                     f"N = {mem['particles']})")
    if result.get("cached_start_s") is not None:
        lines.append(f"cached start (fresh interpreter, small deck): {result['cached_start_s']:.2f} s")
    return "\n".join(lines)
