"""Noise in the unstable band against time for the two warm quiet starts (bit-reversed quantiles
spread along the box, and the same quantiles in every cell: Birdsall & Langdon 1991, ch. 16).

Runs the warm pair-beam deck without a seed (perturbation amplitude 0) for each start and prints
the field energy of the unstable band (modes the theory says grow), L Sum |E_m|^2, at a few times.
Usage: PYTHONPATH=. python analysis/quiet_start_noise.py [DECK]
"""
import sys

import numpy as np

from streamsim import loading
from streamsim.deck import load_deck
from streamsim.pipeline import run


def band_energy(res):
    s = res.data.series
    band = [b.mode for b in res.data.theory.box_modes if b.growth > 0]
    return s.t, res.data.length * np.sum(np.abs(s.mode_amplitude[:, [m - 1 for m in band]]) ** 2,
                                          axis=1)


def main(deck_path="runs/warm-pair-beams.toml"):
    deck = load_deck(deck_path, ["perturbation.amplitude=0.0"])
    out = {}
    for start in ("bit_reversed", "lattice"):
        loading.QUIET_START = start
        res = run(deck, out=None, quiet=True, figures=False)
        out[start] = band_energy(res)
    t = out["lattice"][0]
    print("t [1/omega_p]   band energy: bit_reversed   lattice")
    for tt in (0.0, 5.0, 10.0, 20.0, 30.0, 40.0, 60.0):
        i = int(np.argmin(np.abs(t - tt)))
        print(f"{t[i]:8.3g}   {out['bit_reversed'][1][i]:14.3e}   {out['lattice'][1][i]:10.3e}")
    for start, (tt, w) in out.items():
        j = np.flatnonzero(w >= 1e-3 * w.max())
        print(f"{start}: band energy first reaches 1e-3 of its maximum at t = {tt[j[0]]:.3g}")


if __name__ == "__main__":
    main(*sys.argv[1:])
