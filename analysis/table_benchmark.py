"""Benchmark (not a test): a species given as a 1e4-row table f(u) against the built-in Juttner.

Two timings, each the best of ``--repeat`` on one core:

1. theory: the growth curve on 400 k (the default of ``streamsim theory``), the fastest mode and
   the unstable band of a pair plasma whose electrons are a drifting Juttner (u = +1,
   theta = 0.05) written as a 1e4-row table and whose positrons are its mirror image.
   Target: under 2 s.
2. loading: 1e7 momenta by the quiet start (bit-reversed quantiles) from the same table, against
   the same number from the built-in Juttner species. Target: within 2x of the Juttner load.

The parameters are invented.

    python analysis/table_benchmark.py [--rows 10000] [--particles 10000000] [--repeat 3]
"""
from __future__ import annotations

import argparse
import math
import time

import numpy as np

from streamsim import loading
from streamsim.deck import Species
from streamsim.distribution_table import table_from_arrays
from streamsim.theory.formulas import juttner_distribution
from streamsim.theory.roots import _auto_kmax, _bands_from, _curve_and_fastest, _Solver

DRIFT_U = 1.0
THETA = 0.05


def pair(rows: int):
    lo, hi = loading.juttner_u_range(DRIFT_U, THETA, 12.0)
    edge = max(abs(lo), abs(hi))
    u = np.sinh(np.linspace(-math.asinh(edge), math.asinh(edge), rows))
    out = []
    for name, q, d in (("electrons", -1.0, DRIFT_U), ("positrons", 1.0, -DRIFT_U)):
        t = table_from_arrays(u, juttner_distribution(u, d, THETA))
        out.append(Species(name=name, charge=q, mass=1.0, density=0.5, drift_u=d, theta=0.0,
                           distribution="table", spread_u=0.0, particles_per_cell=16,
                           loading="quiet", table=t))
    return out


def best_of(fn, repeat):
    best = math.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=10000)
    ap.add_argument("--particles", type=int, default=10_000_000)
    ap.add_argument("--repeat", type=int, default=3)
    a = ap.parse_args(argv)
    species = pair(a.rows)

    def curve():
        solver = _Solver(species, "table")
        k, w, g, fast = _curve_and_fastest(solver, _auto_kmax(species), 400, extend=True)
        return _bands_from(solver, k, w, g), fast

    curve()                                   # load the compiled kernel once
    t_theory = best_of(curve, a.repeat)
    bands, fast = curve()
    print(f"theory, {a.rows}-row table: growth curve (400 k) + fastest mode + band in "
          f"{t_theory:.3f} s (target < 2 s); fastest k = {fast[0]:.6g}, growth = "
          f"{fast[1].imag:.6g} omega_p, band {bands}")

    jut = Species(name="electrons", charge=-1.0, mass=1.0, density=0.5, drift_u=DRIFT_U,
                  theta=THETA, distribution="juttner", spread_u=0.0, particles_per_cell=16,
                  loading="quiet")
    tab = species[0]
    rng = np.random.default_rng(1)
    t_j = best_of(lambda: loading.momenta(jut, a.particles, True, rng), a.repeat)
    t_t = best_of(lambda: loading.momenta(tab, a.particles, True, rng), a.repeat)
    print(f"loading {a.particles:.3g} momenta (quiet): Juttner {t_j:.3f} s, table {t_t:.3f} s, "
          f"ratio {t_t / t_j:.2f} (target <= 2)")


if __name__ == "__main__":
    main()
