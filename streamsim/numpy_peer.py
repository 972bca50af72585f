"""The engine's step written as plain vectorised numpy: the reference a careful user would write.

Same physics and the same time levels as :meth:`streamsim.engine.Simulation.advance`: gather E^n
at x^n with the deposit's weights, kick u^{n-1/2} -> u^{n+1/2}, drift x^n -> x^{n+1} with
v = u / sqrt(1 + u^2), periodic wrap, deposit at x^{n+1} with ``np.bincount``, rfft Poisson solve
for E^{n+1}, and the per-step energy and momentum sums the engine records at its default
diagnostics cadence. Whole-array expressions throughout, no loops over particles, no numba.

Written as a careful group member would: CIC (the default shape) gathers through E and its
node-to-node differences (two ``np.take``), deposits with one plain and one weighted
``np.bincount`` (the weight 1 - f at node i is the count minus the f's), works in place where
numpy allows it (``out=``), computes one square root per particle and step and carries the
n-1/2 kinetic-energy and momentum sums over from the previous step, as the engine does. NGP and
TSC use the general weights below.

``streamsim bench`` times it on the same particles as the engine (``speedup_vs_numpy``); the
correctness tests compare one step of it with the reference kernel.
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


def _cic_cell(x: np.ndarray, inv_dx: float, ng: int):
    """Cell index i (clamped to N - 1) and fraction f = x/dx - i of positions in [0, L)."""
    xg = x * inv_dx
    i = xg.astype(np.intp)              # floor: xg >= 0
    np.minimum(i, ng - 1, out=i)        # x/dx may round up to N; f is then 1 (node 0)
    xg -= i
    return i, xg


def _gamma_minus_one_sum(u: np.ndarray) -> float:
    """sum (gamma - 1) = sum u^2 / (sqrt(1 + u^2) + 1) (no cancellation)."""
    g = np.sqrt(1.0 + u * u)
    g += 1.0
    return float(np.sum(u * u / g))


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
        #: sums of (gamma - 1) and u over u^{n-1/2}, carried from step to step
        self.half = [(_gamma_minus_one_sum(u), float(u.sum())) for u in self.u]
        self.last = None

    def _gather(self, x):
        ng = self.cells
        inv_dx = ng / self.length
        if self.shape == 1:
            i, f = _cic_cell(x, inv_dx, ng)
            ee = np.append(self.efield, self.efield[0])
            de = np.diff(ee)
            e = np.take(ee, i)
            f *= np.take(de, i)
            e += f
            return e
        idx, w = weights(x * inv_dx, ng, self.shape)
        return sum(wk * self.efield[ik] for ik, wk in zip(idx, w))

    def _deposit(self, x):
        ng = self.cells
        inv_dx = ng / self.length
        if self.shape == 1:
            i, f = _cic_cell(x, inv_dx, ng)
            count = np.bincount(i, minlength=ng).astype(float)
            right = np.bincount(i, weights=f, minlength=ng)
            count -= right
            count += np.roll(right, 1)
            return count
        idx, w = weights(x * inv_dx, ng, self.shape)
        return sum(np.bincount(ik, wk, minlength=ng) for ik, wk in zip(idx, w))

    def step(self):
        """One full step; returns (density (S, N), kinetic (S,), momentum (S,), field energy)."""
        ng, length, dt = self.cells, self.length, self.dt
        density = np.empty((len(self.x), ng))
        kinetic = np.empty(len(self.x))
        momentum = np.empty(len(self.x))
        for s, (x, u) in enumerate(zip(self.x, self.u)):
            un = self._gather(x)
            un *= self.qm[s] * dt
            un += u                                  # u^{n+1/2}
            g = un * un
            g += 1.0
            np.sqrt(g, out=g)                        # gamma^{n+1/2}
            v = un / g
            v *= dt
            v += x
            xn = np.mod(v, length, out=v)
            xn[xn >= length] -= length               # np.mod may round up to L
            g += 1.0
            ke_new = float(np.sum(un * un / g))
            p_new = float(un.sum())
            ke_old, p_old = self.half[s]
            kinetic[s] = 0.5 * (ke_old + ke_new)
            momentum[s] = 0.5 * (p_old + p_new)
            self.half[s] = (ke_new, p_new)
            density[s] = self._deposit(xn) * (self.weights[s] / self.dx)
            self.x[s] = xn
            self.u[s] = un
        kinetic *= self.weights * self.masses
        momentum *= self.weights * self.masses
        self.efield = fields.solve(self.charges @ density, self.green)
        we = fields.field_energy(self.efield, self.dx)
        self.last = (density, kinetic, momentum, we)
        return self.last
