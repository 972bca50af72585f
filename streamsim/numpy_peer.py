"""The engine's step written as plain vectorised numpy: the reference a user would write by hand.

Same physics and the same time levels as :meth:`streamsim.engine.Simulation.advance` for CIC
(and NGP/TSC) weights: gather E^n at x^n, kick u^{n-1/2} -> u^{n+1/2}, drift x^n -> x^{n+1}
with v = u / sqrt(1 + u^2), periodic wrap, deposit at x^{n+1} with ``np.bincount``, FFT solve
for E^{n+1}, and the per-step energy and momentum sums the engine records at its default
diagnostics cadence. Whole-array expressions throughout, no loops over particles, no numba.

``streamsim bench`` times it on the same particles as the engine (``speedup_vs_numpy``); the
correctness tests compare one step of it with the engine's kernel.
"""
from __future__ import annotations

import numpy as np

from streamsim import fields


def weights(xg: np.ndarray, n: int, shape: int):
    """Node indices and weights (lists of arrays) at grid coordinates xg, numpy only."""
    if shape == 0:
        i = np.floor(xg + 0.5).astype(np.int64) % n
        return [i], [np.ones_like(xg)]
    if shape == 1:
        i = np.floor(xg).astype(np.int64)
        f = xg - i
        i %= n
        return [i, (i + 1) % n], [1.0 - f, f]
    i = np.floor(xg + 0.5).astype(np.int64)
    d = xg - i
    i %= n
    return ([(i - 1) % n, i, (i + 1) % n],
            [0.5 * (0.5 - d) ** 2, 0.75 - d * d, 0.5 * (0.5 + d) ** 2])


class NumpyPeer:
    """The state of a run (copies of the engine's particles) stepped by plain numpy."""

    def __init__(self, sim):
        b = sim.deck.box
        self.length, self.cells, self.dx = b.length, b.cells, b.dx
        self.shape = sim.shape
        self.dt = sim.dt
        self.qm = np.array(sim.qm, dtype=float)
        self.charges = np.array(sim.charges, dtype=float)
        self.masses = np.array(sim.masses, dtype=float)
        self.weights = np.array(sim.weights, dtype=float)
        self.green = sim.green
        self.x = [x.copy() for x in sim.x]
        self.u = [u.copy() for u in sim.u]
        self.efield = sim.efield.copy()
        self.last = None

    def step(self):
        """One full step; returns (density (S, N), kinetic (S,), momentum (S,), field energy)."""
        ng, length = self.cells, self.length
        density = np.empty((len(self.x), ng))
        kinetic = np.empty(len(self.x))
        momentum = np.empty(len(self.x))
        for s, (x, u) in enumerate(zip(self.x, self.u)):
            idx, w = weights(x * (ng / length), ng, self.shape)
            e = sum(wk * self.efield[ik] for ik, wk in zip(idx, w))
            un = u + (self.qm[s] * self.dt) * e
            go = np.sqrt(1.0 + u * u)
            gn = np.sqrt(1.0 + un * un)
            kinetic[s] = 0.5 * (np.sum(u * u / (go + 1.0)) + np.sum(un * un / (gn + 1.0)))
            momentum[s] = 0.5 * (u.sum() + un.sum())
            xn = np.mod(x + un / gn * self.dt, length)
            xn[xn >= length] -= length
            idx, w = weights(xn * (ng / length), ng, self.shape)
            rho = sum(np.bincount(ik, wk, minlength=ng) for ik, wk in zip(idx, w))
            density[s] = rho * (self.weights[s] / self.dx)
            self.x[s] = xn
            self.u[s] = un
        kinetic *= self.weights * self.masses
        momentum *= self.weights * self.masses
        self.efield = fields.solve(self.charges @ density, self.green)
        we = fields.field_energy(self.efield, self.dx)
        self.last = (density, kinetic, momentum, we)
        return self.last
