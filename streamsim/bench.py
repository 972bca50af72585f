"""How fast the engine steps particles, against what the hardware allows, in one sitting.

Everything is measured in one process and interleaved (engine batch, copy, engine batch, ...)
so that ratios hold on a noisy shared machine; each figure is the best of its repeats.

- engine: :class:`streamsim.engine.Simulation` built from the default deck (256 cells, two
  species) with ``particles_per_cell`` chosen to reach N particles, stepped by ``advance()``
  exactly as a run steps it (push, deposit, field solve, diagnostics at the deck's default
  cadence), after warm-up steps. Reported in particle-steps/s.
- roofline: copy bandwidth (parallel, same threads) on two arrays of the particle arrays'
  size, converted at 32 bytes per particle-step (x and u as float64, read and written).
- peer: :mod:`streamsim.numpy_peer`, the same step in plain vectorised numpy, on copies of the
  same particles.
- memory: peak resident bytes per particle of a run, measured in a fresh subprocess.
- cached start: wall time of a fresh ``python -c "import streamsim; streamsim.run(...)"``
  of a small deck with the numba cache warm.
"""
from __future__ import annotations

import json
import math
import os
import platform
import subprocess
import sys
import time

import numpy as np

#: bytes moved per particle-step at the roofline: x and u, float64, read and written
BYTES_PER_PARTICLE_STEP = 32
#: cells of the benchmark deck (the default deck's grid)
CELLS = 256
DEFAULT_PARTICLES = (100_000, 1_000_000, 10_000_000)

_SMALL_DECK = {"title": "bench start-up", "box": {"cells": 64, "length": 6.283185307179586},
               "time": {"dt": 0.05, "end": 1.0},
               "species": [{"name": "electrons", "charge": -1.0, "density": 1.0,
                            "particles_per_cell": 16}]}


def bench_deck(particles: int, threads: int = 0):
    """The default deck (two counter-streaming species) with ppc set so that the total is
    about ``particles`` (a multiple of 2 * CELLS)."""
    import tomllib

    from .deck import DEFAULT_DECK, load_deck
    raw = tomllib.loads(DEFAULT_DECK)
    ppc = max(1, int(round(particles / (len(raw["species"]) * CELLS))))
    raw["box"]["cells"] = CELLS
    for s in raw["species"]:
        s["particles_per_cell"] = ppc
    raw.setdefault("output", {})["threads"] = threads
    return load_deck(raw)


def _copy_kernel():
    import numba as nb

    @nb.njit(parallel=True, boundscheck=False)
    def copy2(xs, us, xd, ud, nchunks, reps):
        n = xs.size
        chunk = (n + nchunks - 1) // nchunks
        for c in nb.prange(nchunks):
            for _ in range(reps):
                for j in range(c * chunk, min(n, c * chunk + chunk)):
                    xd[j] = xs[j]
                    ud[j] = us[j]
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
    """Engine, kernel-only, roofline and peer rates for one N and thread count."""
    from . import kernels
    from .diagnostics import standard_handlers
    from .engine import Simulation
    deck = bench_deck(particles, threads)
    t0 = time.perf_counter()
    sim = Simulation(deck, threads)
    handlers = standard_handlers(sim)   # the recording a run does, at the deck's cadences
    setup = time.perf_counter() - t0
    n = int(sum(x.size for x in sim.x))

    def step():
        k = sim.step % sim.steps    # the handlers' arrays hold one run: wrap the step count
        for h in handlers:
            h.before(sim, k)
        sim.advance()
        for h in handlers:
            h.after(sim, k)
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
    best_step = best_copy = best_kernel = np.inf
    for _ in range(repeats):
        t = time.perf_counter()
        for _ in range(steps):
            step()
        best_step = min(best_step, (time.perf_counter() - t) / steps)
        for _ in range(3):
            best_copy = min(best_copy, copy_seconds(xs, us, xd, ud, sim.threads))
        # the kernel alone (no field solve, no diagnostics), on scratch copies of the particles
        t = time.perf_counter()
        for s in range(len(sim.x)):
            kernels.push_deposit(xd[:sim.x[s].size], ud[:sim.u[s].size], sim.efield,
                                 sim.qm[s] * sim.dt, sim.dt, b.length, sim.shape, sim.nchunks,
                                 sim.partial, sim.sums[s])
        best_kernel = min(best_kernel, time.perf_counter() - t)
    out = {
        "particles": n, "threads": sim.threads, "cells": b.cells, "shape": b.shape,
        "diagnostics_interval_steps": handlers[-1].every,
        "setup_s": setup,
        "step_s": best_step,
        "particle_steps_per_s": n / best_step,
        "ns_per_particle_step": best_step / n * 1e9,
        "kernel_particle_steps_per_s": n / best_kernel,
        "overhead_per_step_s": max(0.0, best_step - best_kernel),
        "copy_bandwidth_gb_s": BYTES_PER_PARTICLE_STEP * n / best_copy / 1e9,
        "roofline_particle_steps_per_s": n / best_copy,
    }
    out["roofline_fraction"] = out["particle_steps_per_s"] / out["roofline_particle_steps_per_s"]
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
        memory: bool = True, start: bool = True, progress=None) -> dict:
    """The whole benchmark. Headline figures are those of the largest N with all threads."""
    import numba
    if threads is None:
        threads = list(range(1, numba.config.NUMBA_NUM_THREADS + 1))
    particles = sorted(int(p) for p in particles)
    threads = sorted(int(t) for t in threads)
    scaling = []
    capacity_before = core_capacity(threads[-1])
    for n in particles:
        for t in threads:
            # fewer steps at large N keeps the whole run within its budget
            k = max(3, min(steps, int(steps * 2e6 / max(n, 1))))
            row = measure(n, t, steps=k, repeats=repeats, peer=(t == threads[-1]))
            scaling.append(row)
            if progress:
                progress(row)
    head = [r for r in scaling if r["particles"] == scaling[-1]["particles"]
            and r["threads"] == threads[-1]][-1]
    ns = [r["ns_per_particle_step"] for r in scaling if r["threads"] == threads[-1]]
    result = {
        "particle_steps_per_s": head["particle_steps_per_s"],
        "roofline_particle_steps_per_s": head["roofline_particle_steps_per_s"],
        "roofline_fraction": head["roofline_fraction"],
        "numpy_particle_steps_per_s": head["numpy_particle_steps_per_s"],
        "speedup_vs_numpy": head.get("speedup_vs_numpy"),
        "bytes_per_particle_peak": None,
        "cached_start_s": None,
        "scaling": scaling,
        "headline": {"particles": head["particles"], "threads": head["threads"]},
        "cost_spread_over_n": (max(ns) / min(ns) - 1.0) if ns else None,
        "machine": machine(),
        "core_capacity": {"threads": threads[-1], "before": capacity_before,
                          "after": core_capacity(threads[-1])},
    }
    if memory:
        mem = memory_per_particle(min(4_000_000, max(particles)), threads[-1])
        result["memory"] = mem
        result["bytes_per_particle_peak"] = mem.get("bytes_per_particle_peak")
    if start:
        result["cached_start_s"] = cached_start()
    return result


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
