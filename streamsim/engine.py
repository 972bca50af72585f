"""One deck's particles and fields, and one step: :class:`Simulation`.

The time loop, its cadenced handlers, the files and the analysis live in
:mod:`streamsim.pipeline`; no formulas live here: the push and deposit are in :mod:`kernels`, the
solve in :mod:`fields`.

Time levels: at the top of step n the state holds x^n, u^{n-1/2}, the densities n_s^n and E^n.
After :meth:`Simulation.advance`, ``prev_density``/``prev_efield`` are n^n/E^n and
``old_sums``/``new_sums`` the per-species sums of (gamma - 1) and u over u^{n-1/2} and u^{n+1/2}.

With a ``[drive]`` block the mean field E0 (k = 0) is part of the state: E^n on the grid is the
Poisson field plus E0^n (the gather's weights sum to one, so every particle's push sees E0 without
a kernel change), and after the push E0 advances by Ampere's law, E0^{n+1} = E0^n - dt (<J>^{n+1/2}
- J_ext^{n+1/2}) (:func:`streamsim.drive.ampere_step`), <J> from the half-step velocities. Then
``prev_e0`` is E0^n, ``old_current``/``new_current`` are <J>^{n-1/2}/<J>^{n+1/2} and
``current_ext_half`` is J_ext^{n+1/2}. Without the block none of this runs.
"""
from __future__ import annotations

import numpy as np

from . import drive as _drive
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
        #: the [drive] block (None: no mean field, the run is exactly the undriven one)
        self.drive = deck.drive
        self.e0 = self.prev_e0 = 0.0
        self._deposit_all()
        # u^0 -> u^{-1/2}: a backward half kick with E^0
        for s in range(len(self.names)):
            kernels.kick(self.u[s], self.x[s], self.efield, -0.5 * self.qm[s] * self.dt,
                         b.length, self.shape)
        #: (S, 2) sums of (gamma - 1) and u over u^{n-1/2} at the top of step n
        self.sums_half = self._half_step_sums()
        self.old_sums = self.new_sums = self.sums_half
        self.prev_density, self.prev_efield = self.density, self.efield
        if self.drive is not None:
            #: <J>^{n-1/2} at the top of step n
            self.current_half = self._current(self.u)
            self.old_current = self.new_current = self.current_half
            self.current_ext_half = _drive.external_current(self.drive, -0.5 * self.dt)

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
        if self.drive is not None:
            self.efield += self.e0

    def _current(self, us) -> float:
        """<J> of momenta ``us`` (one array per species), units of e n_ref c."""
        return _drive.mean_current(self.charges, self.weights, us, self.deck.box.length)

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
        if self.drive is not None:
            self.old_current, self.new_current = self.current_half, self._current(self.u)
            self.current_half = self.new_current
            self.current_ext_half = _drive.external_current(self.drive, (n + 0.5) * self.dt)
            self.prev_e0 = self.e0
            self.e0 = _drive.ampere_step(self.e0, self.new_current, self.current_ext_half,
                                         self.dt)
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

    def next_momenta(self) -> list[np.ndarray]:
        """Copies of u^{N+1/2} = u^{N-1/2} + (q/m) E^N dt, for the diagnostics of the last level
        t_N (nothing moves)."""
        b = self.deck.box
        out = []
        for s in range(len(self.names)):
            u = self.u[s].copy()
            kernels.kick(u, self.x[s], self.efield, self.qm[s] * self.dt, b.length, self.shape)
            out.append(u)
        return out

    def final_current(self, next_u=None) -> float:
        """<J>(t_N): the mean of <J> over u^{N-1/2} and u^{N+1/2} (drive runs only)."""
        nxt = self._current(next_u if next_u is not None else self.next_momenta())
        return 0.5 * (self.current_half + nxt)

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
        meta = {"threads": self.threads, "sums_half": self.sums_half.tolist(),
                "rng_state": self.rng_state}
        if self.drive is not None:      # JSON floats round-trip exactly
            meta["drive"] = {"e0": self.e0, "current_half": self.current_half}
        return {"step": self.step, "x": self.x, "u": self.u, "density": self.density,
                "meta": meta}

    def restore(self, step: int, x, u, density, meta: dict) -> None:
        if len(x) != len(self.x) or any(a.shape != b.shape for a, b in zip(x, self.x)):
            raise ValueError("the checkpoint does not belong to this deck "
                             "(particle counts differ)")
        self.x, self.u, self.step = list(x), list(u), int(step)
        if self.drive is not None:
            d = meta.get("drive")
            if d is None:
                raise ValueError("the checkpoint has no mean field E0 (written without [drive])")
            self.e0 = self.prev_e0 = float(d["e0"])
            self.current_half = float(d["current_half"])
            self.old_current = self.new_current = self.current_half
            self.current_ext_half = _drive.external_current(self.drive,
                                                            (self.step - 0.5) * self.dt)
        elif meta.get("drive") is not None:
            raise ValueError("the checkpoint holds a mean field E0 but the deck has no [drive]")
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
