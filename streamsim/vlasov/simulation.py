"""A continuum run: f_s(x, u) of every species, stepped by Strang splitting of the 1D1V
relativistic Vlasov-Poisson system (Cheng & Knorr 1976, J. Comput. Phys. 22, 330):

    df/dt + v(u) df/dx + (q/m) E df/du = 0,   v = u / sqrt(1 + u^2),   dE/dx = sum_s q_s n_s

one step = x-advection over dt/2 (per momentum row, at its v(u)) -> Poisson -> u-advection over dt
(per spatial column, at q E(x)/m) -> x-advection over dt/2 -> Poisson; second order in dt.
The advections are the PFC kernels of :mod:`.kernels` (or, with ``vlasov.x_advection =
"spectral"``, the exact periodic shift of every row by its Fourier phase); Poisson is the PIC's
own solve (:mod:`streamsim.fields`), so both methods see the same field.

:class:`VlasovSimulation` shows the cadenced handlers the interface of
:class:`streamsim.engine.Simulation`: ``density``, ``efield``, ``prev_density``, ``prev_efield``,
``old_sums``/``new_sums``/``sums_half``/``final_sums()`` (per species, integrals of (gamma - 1) f
and u f over phase space; the state lives at whole time levels, so old and new sums are the same
level), ``weights`` = 1 and ``masses``. It holds no particles: ``x`` and ``subsample`` are
empty, and ``u[s]`` is the one-element array int |u| f du dx (the momentum scale the series
recorder takes from the mean |u| of the particles times their weight).
"""
from __future__ import annotations

import math

import numpy as np

from .. import fields
from ..engine import NumericalError, _threads
from . import kernels
from .grid import initial_f, momentum_grid

__all__ = ["VlasovSimulation"]


class VlasovSimulation:
    """One deck's distribution functions on the phase-space grid, stepped by :meth:`advance`."""
    method = "vlasov"

    def __init__(self, deck, threads: int | None = None):
        self.deck = deck
        self.threads = _threads(deck.output.threads if threads is None else threads)
        b = deck.box
        self.green = fields.green_function(b.cells, b.length, b.solver, b.smoothing_passes)
        self.names = [s.name for s in deck.species]
        self.charges = np.array([s.charge for s in deck.species])
        self.masses = np.array([s.mass for s in deck.species])
        self.qm = self.charges / self.masses
        self.weights = np.ones(len(self.names))
        self.steps = deck.time.steps
        self.dt = deck.time.dt
        self.dx = b.dx
        self.grids = [momentum_grid(deck, s) for s in deck.species]
        self.f = [initial_f(deck, s, g) for s, g in zip(deck.species, self.grids)]
        self._work = [np.empty_like(f) for f in self.f]
        u = [g.centres for g in self.grids]
        self._gm1 = [x * x / (np.sqrt(1.0 + x * x) + 1.0) for x in u]   # gamma - 1, no cancellation
        self._u = u
        self._vshift = [x / np.sqrt(1.0 + x * x) * (0.5 * self.dt / self.dx) for x in u]
        self.spectral = deck.vlasov.x_advection == "spectral"
        if self.spectral:
            k = fields.wavenumbers(b.cells, b.length)
            self._phase = []
            for x in u:
                shift = (x / np.sqrt(1.0 + x * x) * 0.5 * self.dt)[:, None] * k[None, :]
                ph = np.exp(-1j * shift)
                if b.cells % 2 == 0:       # the Nyquist mode stays real: shift it by its cosine
                    ph[:, -1] = np.cos(shift[:, -1])
                self._phase.append(ph)
        self.x = [np.zeros(0) for _ in self.names]
        self.subsample = [np.zeros(0, dtype=np.int64) for _ in self.names]
        self.step = 0
        self.mass0 = None
        self._update_fields()
        self.sums_half = self._sums()
        self.old_sums = self.new_sums = self.sums_half
        self.prev_density, self.prev_efield = self.density, self.efield
        self.u = [np.array([self._abs_momentum(s)]) for s in range(len(self.names))]
        self.mass0 = self.norms()[:, 0].copy()

    # -- what the handlers and the pipeline read ------------------------------------------
    @property
    def n_particles(self) -> int:
        return 0

    @property
    def phase_cells(self) -> int:
        return int(sum(f.size for f in self.f))

    def _update_fields(self) -> None:
        b = self.deck.box
        self.density = np.empty((len(self.names), b.cells))
        col = np.empty(b.cells)
        for s, (f, g) in enumerate(zip(self.f, self.grids)):
            kernels.column_sums(f, g.du, col)
            self.density[s] = col
        self.efield = fields.solve(self.charges @ self.density, self.green)

    def _row_moments(self, s) -> np.ndarray:
        out = np.empty((self.f[s].shape[0], 4))
        kernels.row_moments(self.f[s], out)
        return out

    def _sums(self) -> np.ndarray:
        """(S, 2): int (gamma - 1) f du dx and int u f du dx per species."""
        out = np.zeros((len(self.names), 2))
        for s, g in enumerate(self.grids):
            rows = self._row_moments(s)[:, 0]
            w = g.du * self.dx
            out[s, 0] = float(np.dot(self._gm1[s], rows)) * w
            out[s, 1] = float(np.dot(self._u[s], rows)) * w
        return out

    def _abs_momentum(self, s) -> float:
        rows = self._row_moments(s)[:, 0]
        return float(np.dot(np.abs(self._u[s]), rows)) * self.grids[s].du * self.dx

    def final_sums(self) -> np.ndarray:
        return self.sums_half

    def norms(self) -> np.ndarray:
        """(S, 5) per species: mass int f, L1 int |f|, L2 (int f^2)^(1/2), min f, and the mass in
        the two outermost momentum cells at each end (how close f comes to the grid's edge)."""
        out = np.zeros((len(self.names), 5))
        for s, g in enumerate(self.grids):
            rows = self._row_moments(s)
            w = g.du * self.dx
            out[s] = (rows[:, 0].sum() * w, rows[:, 1].sum() * w, math.sqrt(rows[:, 2].sum() * w),
                      rows[:, 3].min(), (rows[:2, 0].sum() + rows[-2:, 0].sum()) * w)
        return out

    # -- one step ------------------------------------------------------------------------
    def _advect_x(self) -> None:
        for s in range(len(self.names)):
            if self.spectral:
                from scipy import fft
                spec = fft.rfft(self.f[s], axis=1, workers=self.threads) * self._phase[s]
                self.f[s] = np.ascontiguousarray(
                    fft.irfft(spec, n=self.f[s].shape[1], axis=1, workers=self.threads))
            else:
                kernels.advect_rows(self.f[s], self._vshift[s], self._work[s], True, np.inf)
                self.f[s], self._work[s] = self._work[s], self.f[s]

    def _advect_u(self) -> None:
        for s, g in enumerate(self.grids):
            shifts = np.ascontiguousarray(self.qm[s] * self.efield * (self.dt / g.du))
            kernels.advect_columns(self.f[s], shifts, self._work[s], False, np.inf)
            self.f[s], self._work[s] = self._work[s], self.f[s]

    def advance(self) -> None:
        """f^n, E^n -> f^{n+1}, E^{n+1} (one Strang step)."""
        n = self.step
        self.prev_density, self.prev_efield = self.density, self.efield
        self.old_sums = self.new_sums = self.sums_half
        self._advect_x()
        self._update_fields()
        self._advect_u()
        self._advect_x()
        self._update_fields()
        if not np.isfinite(self.efield).all():
            i = int(np.flatnonzero(~np.isfinite(self.efield))[0])
            raise NumericalError(f"the field became non-finite at step {n + 1} "
                                 f"(t = {(n + 1) * self.dt:.6g}/omega_p), grid node {i} "
                                 f"(x = {i * self.dx:.6g} c/omega_p)")
        self.sums_half = self._sums()
        self.step = n + 1

    # -- state for checkpoints (the pipeline's layout: f in place of x, the u grids for u) ----
    def state(self) -> dict:
        return {"step": self.step, "x": self.f, "u": [g.centres for g in self.grids],
                "density": self.density,
                "meta": {"threads": self.threads, "method": "vlasov",
                         "mass0": [float(m) for m in self.mass0]}}

    def restore(self, step: int, x, u, density, meta: dict) -> None:
        if meta.get("method") != "vlasov" or len(x) != len(self.f) or any(
                a.shape != b.shape for a, b in zip(x, self.f)):
            raise ValueError("the checkpoint does not belong to this deck (phase-space grids "
                             "differ)")
        self.f = [np.ascontiguousarray(a, dtype=np.float64) for a in x]
        self.step = int(step)
        self.mass0 = np.array(meta.get("mass0", self.norms()[:, 0]))
        self._update_fields()
        self.sums_half = self._sums()
        self.old_sums = self.new_sums = self.sums_half
        self.prev_density, self.prev_efield = self.density, self.efield
