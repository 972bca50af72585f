"""Benchmark (not a test): growth rate gamma(k) for 2000 k values of a 4-species kinetic deck.

The deck (invented parameters): electron and positron beams counter-streaming at u = +-0.4 with
theta = 0.01, through a warm electron-positron background at rest (theta = 0.02), all drifting
1D Maxwell-Juttner species, so the Juttner quadrature model is used.  Target: under 2 s.

    python analysis/theory_benchmark.py [--nk 2000] [--model juttner]
"""
from __future__ import annotations

import argparse
import time

import numpy as np

from streamsim.deck import load_deck
from streamsim import theory

DECK = {
    "title": "theory benchmark, four warm species",
    "box": {"length": 100.0, "cells": 512},
    "species": [
        {"name": "beam_e", "charge": -1.0, "density": 0.2, "drift_u": 0.4, "theta": 0.01},
        {"name": "beam_p", "charge": 1.0, "density": 0.2, "drift_u": -0.4, "theta": 0.01},
        {"name": "bg_e", "charge": -1.0, "density": 0.3, "drift_u": 0.0, "theta": 0.02},
        {"name": "bg_p", "charge": 1.0, "density": 0.3, "drift_u": 0.0, "theta": 0.02},
    ],
}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--nk", type=int, default=2000)
    ap.add_argument("--model", default=None)
    a = ap.parse_args()
    deck = load_deck(DECK)
    model = a.model or theory.model_for_species(deck.species)
    kmax = theory.auto_kmax(deck.species)
    k = np.linspace(kmax / a.nk, kmax, a.nk)
    t0 = time.perf_counter()
    growth, omega_r = theory.growth_curve(deck.species, k, model)
    t1 = time.perf_counter()
    fast = theory.fastest_mode(deck.species, model)
    t2 = time.perf_counter()
    print(f"model {model}: growth_curve for {a.nk} k values in {t1 - t0:.3f} s "
          f"(target < 2 s); fastest_mode in {t2 - t1:.3f} s")
    print(f"max growth on the grid {np.nanmax(growth):.6g} omega_p; fastest mode k = {fast[0]:.6g} "
          f"omega_p/c, growth = {fast[1]:.6g} omega_p" if fast else "stable")


if __name__ == "__main__":
    main()
