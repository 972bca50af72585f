"""Write the tables of the example deck runs/powerlaw-tail-pairs.toml (invented distribution).

Each species is a broad, non-thermal momentum distribution of the kind a pair cascade leaves
behind: a drifting core (a 1D Maxwell-Juttner with drift u_d and drift-frame temperature theta)
plus a power-law tail f ~ u^-p above u_b, out to u_max where the table ends. Electrons stream
forward; the positrons' table is the mirror image (u -> -u). The parameters are invented.

    python analysis/powerlaw_tail_table.py [--out runs]

Writes runs/powerlaw-tail-electrons.csv and runs/powerlaw-tail-positrons.csv (header u,f, rows
uniform in the rapidity asinh(u), f in an arbitrary normalisation).
"""
from __future__ import annotations

import argparse
import math
from pathlib import Path

import numpy as np

from streamsim.theory.formulas import juttner_distribution

DRIFT_U = 1.0        # core drift, gamma*beta
THETA = 0.03         # core temperature, kT / m c^2 in its drift frame
TAIL_START = 2.0     # u_b: the tail takes over above this momentum
TAIL_INDEX = 3.0     # p in f ~ u^-p
TAIL_FRACTION = 0.2  # share of the particles in the tail
U_MIN, U_MAX = -1.0, 40.0
ROWS = 3000


def _tail(u):
    """The tail's shape: (1 + (u/u_b)^2)^(-p/2), ~u^-p above u_b, switched on across the core
    (tanh step at u_d of width 0.3) so that it adds to the core's fall, not a separate hump."""
    step = 0.5 * (1.0 + np.tanh((u - DRIFT_U) / 0.3))
    return step * (1.0 + (u / TAIL_START) ** 2) ** (-0.5 * TAIL_INDEX)


def distribution(u: np.ndarray) -> np.ndarray:
    """(1 - tail fraction) x the normalised Juttner core + tail fraction x the normalised tail."""
    core = juttner_distribution(u, DRIFT_U, THETA)
    uu = np.sinh(np.linspace(math.asinh(U_MIN), math.asinh(U_MAX), 200001))
    norm = np.trapezoid(_tail(uu), uu)
    return (1.0 - TAIL_FRACTION) * core + TAIL_FRACTION * _tail(u) / norm


def write(path: Path, u: np.ndarray, f: np.ndarray, what: str) -> None:
    lines = [f"# {what}: invented broad non-thermal pair distribution (streamsim example)",
             f"# drifting Juttner core u_d = {DRIFT_U:g}, theta = {THETA:g}; power-law tail "
             f"f ~ u^-{TAIL_INDEX:g} above u = {TAIL_START:g} (switched on at u_d) holding {TAIL_FRACTION:.0%}",
             f"# written by analysis/powerlaw_tail_table.py; rows uniform in asinh(u)",
             "u,f"]
    lines += [f"{a:.12g},{b:.12g}" for a, b in zip(u, f)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    print(f"wrote {path} ({u.size} rows, u from {u[0]:g} to {u[-1]:g})")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", default="runs")
    a = ap.parse_args(argv)
    out = Path(a.out)
    u = np.sinh(np.linspace(math.asinh(U_MIN), math.asinh(U_MAX), ROWS))
    f = distribution(u)
    write(out / "powerlaw-tail-electrons.csv", u, f, "electrons")
    write(out / "powerlaw-tail-positrons.csv", -u[::-1], f[::-1], "positrons (mirror image)")


if __name__ == "__main__":
    main()
