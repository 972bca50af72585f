"""One deck's particles and fields, and one step: :class:`Simulation`.

The time loop, its cadenced handlers, the files and the analysis live in
:mod:`streamsim.pipeline`; no formulas live here: the push and deposit are in :mod:`kernels`, the
solve in :mod:`fields`.

Time levels: at the top of step n the state holds x^n, u^{n-1/2}, the densities n_s^n and E^n.
After :meth:`Simulation.advance`, ``prev_density``/``prev_efield`` are n^n/E^n and
``old_sums``/``new_sums`` the per-species sums of (gamma - 1) and u over u^{n-1/2} and u^{n+1/2}.
"""
from __future__ import annotations

import numpy as np

from . import fields, kernels, loading
from .deck import Deck


class NumericalError(RuntimeError):
    """The run met NaN/Inf; the message says when and where. Exit status 3 in the CLI."""


def _threads(requested: int) -> int:
    import numba
    avail = numba.config.NUMBA_NUM_THREADS
    n = requested or avail
    n = max(1, min(n, avail))
    numba.set_num_threads(n)
    return n


class Simulation:
    """One deck's particles and fields, stepped by :meth:`advance`. It records nothing: the
    handlers of :mod:`streamsim.diagnostics` read its state between steps."""

    def __init__(self, deck: Deck, threads: int | None = None):
        self.deck = deck
        self.threads = _threads(deck.output.threads if threads is None else threads)
        self.nchunks = self.threads
        b = deck.box
        self.shape = kernels.SHAPES[b.shape]
        self.green = fields.green_function(b.cells, b.length, b.solver, b.smoothing_passes)
        self.names = [s.name for s in deck.species]
        self.charges = np.array([s.charge for s in deck.species])
        self.qm = np.array([s.charge / s.mass for s in deck.species])
        self.masses = np.array([s.mass for s in deck.species])
        self.steps = deck.time.steps
        self.dt = deck.time.dt
        rng = np.random.default_rng(deck.random_seed)
        self.x, self.u, self.weights = [], [], []
        for s in deck.species:
            x, u, w = loading.load_species(s, deck, rng)
            self.x.append(x)
            self.u.append(u)
            self.weights.append(w)
        k = deck.output.phase_space_particles
        #: the fixed random subsample of each species recorded in phase space
        self.subsample = [np.sort(rng.choice(x.size, size=min(k, x.size), replace=False))
                          for x in self.x]
        self.rng_state = rng.bit_generator.state
        self.partial = np.zeros((self.nchunks, b.cells))
        self.sums = np.zeros((len(self.names), self.nchunks, kernels.NSUMS))
        self.step = 0
        self._deposit_all()
        # u^0 -> u^{-1/2}: a backward half kick with E^0
        for s in range(len(self.names)):
            kernels.kick(self.u[s], self.x[s], self.efield, -0.5 * self.qm[s] * self.dt,
                         b.length, self.shape)
        #: (S, 2) sums of (gamma - 1) and u over u^{n-1/2} at the top of step n
        self.sums_half = self._half_step_sums()
        self.old_sums = self.new_sums = self.sums_half
        self.prev_density, self.prev_efield = self.density, self.efield

    @property
    def n_particles(self) -> int:
        return int(sum(x.size for x in self.x))

    def _half_step_sums(self) -> np.ndarray:
        """(S, 2): sum (gamma - 1) and sum u over u^{n-1/2} of each species, computed directly
        (at the start; during the run the previous push's n+1/2 sums carry over)."""
        b = self.deck.box
        out = np.zeros((len(self.names), 2))
        for s in range(len(self.names)):
            kernels.moment_sums(self.x[s], self.u[s], self.efield, 0.0, b.length, self.shape,
                                self.nchunks, self.sums[s])
            tot = self.sums[s].sum(axis=0)
            out[s] = tot[kernels.SUM_KE_OLD], tot[kernels.SUM_U_OLD]
        return out

    # -- fields --------------------------------------------------------------------------
    def _deposit_all(self) -> None:
        b = self.deck.box
        self.density = np.zeros((len(self.names), b.cells))
        for s, x in enumerate(self.x):
            bad = kernels.deposit(x, b.cells, b.length, self.shape, self.nchunks, self.partial)
            if bad:
                self._fail_particles()
            self.density[s] = self.partial.sum(axis=0) * (self.weights[s] / b.dx)
        self._solve()

    def _solve(self) -> None:
        rho = self.charges @ self.density
        self.efield = fields.solve(rho, self.green)

    # -- one step ------------------------------------------------------------------------
    def advance(self) -> None:
        """x^n, u^{n-1/2}, E^n -> x^{n+1}, u^{n+1/2}, E^{n+1}."""
        n = self.step
        b = self.deck.box
        new_density = np.empty_like(self.density)
        for s in range(len(self.names)):
            kernels.push_deposit(self.x[s], self.u[s], self.efield, self.qm[s] * self.dt, self.dt,
                                 b.length, self.shape, self.nchunks, self.partial, self.sums[s])
            new_density[s] = self.partial.sum(axis=0) * (self.weights[s] / b.dx)
        if self.sums[:, :, kernels.SUM_BAD].any():
            self._fail_particles()
        tot = self.sums.sum(axis=1)
        self.old_sums = self.sums_half
        self.new_sums = np.stack([tot[:, kernels.SUM_KE_NEW], tot[:, kernels.SUM_U_NEW]], axis=1)
        self.sums_half = self.new_sums
        self.prev_density, self.prev_efield = self.density, self.efield
        self.density = new_density
        self._solve()
        if not np.isfinite(self.efield).all():
            i = int(np.flatnonzero(~np.isfinite(self.efield))[0])
            raise NumericalError(f"the field became non-finite at step {n + 1} "
                                 f"(t = {(n + 1) * self.dt:.6g}/omega_p), grid node {i} "
                                 f"(x = {i * b.dx:.6g} c/omega_p)")
        self.step = n + 1

    def final_sums(self) -> np.ndarray:
        """(S, 2) sums over u^{N+1/2} for the diagnostics of the last level t_N, computed
        without moving the particles."""
        b = self.deck.box
        for s in range(len(self.names)):
            kernels.moment_sums(self.x[s], self.u[s], self.efield, self.qm[s] * self.dt, b.length,
                                self.shape, self.nchunks, self.sums[s])
        tot = self.sums.sum(axis=1)
        return np.stack([tot[:, kernels.SUM_KE_NEW], tot[:, kernels.SUM_U_NEW]], axis=1)

    def _fail_particles(self) -> None:
        for s, (x, u) in enumerate(zip(self.x, self.u)):
            bad = np.flatnonzero(~((x >= 0) & (x < self.deck.box.length)) | ~np.isfinite(u))
            if bad.size:
                j = int(bad[0])
                raise NumericalError(
                    f"{bad.size} particle(s) of species '{self.names[s]}' became non-finite at "
                    f"step {self.step + 1} (t = {(self.step + 1) * self.dt:.6g}/omega_p); the first "
                    f"is particle {j} (x = {x[j]!r}, u = {u[j]!r})")
        raise NumericalError(f"non-finite particles at step {self.step + 1}")

    # -- state for checkpoints -----------------------------------------------------------
    def state(self) -> dict:
        """What a checkpoint needs of the simulation itself (arrays and JSON)."""
        return {"step": self.step, "x": self.x, "u": self.u, "density": self.density,
                "meta": {"threads": self.threads, "sums_half": self.sums_half.tolist(),
                         "rng_state": self.rng_state}}

    def restore(self, step: int, x, u, density, meta: dict) -> None:
        if len(x) != len(self.x) or any(a.shape != b.shape for a, b in zip(x, self.x)):
            raise ValueError("the checkpoint does not belong to this deck "
                             "(particle counts differ)")
        self.x, self.u, self.step = list(x), list(u), int(step)
        if density is not None and density.shape == self.density.shape:
            self.density = density
            self._solve()
        else:
            self._deposit_all()
        sums = meta.get("sums_half")
        self.sums_half = (np.array(sums, dtype=float) if sums is not None
                          else self._half_step_sums())
        self.old_sums = self.new_sums = self.sums_half
        self.prev_density, self.prev_efield = self.density, self.efield
