"""numba kernels of the continuum solver: plain arrays in and out, no Python objects.

One-dimensional advection of every row of a 2D array by a constant shift per row, with the
Positive and Flux Conservative (PFC) method of Filbet, Sonnendrucker & Bertrand 2001 (J. Comput.
Phys. 172, 166): the new cell average is the mass that the exact characteristic carries into the
cell, taken from a third-order reconstruction of the primitive with slope correctors that keep
every partial-cell mass between 0 and (fraction x row maximum). Hence, for a row of cell averages
f_j in [0, f_max]:

- mass: the fluxes telescope, so sum_j f_j is conserved to round-off (periodic rows) or changes
  only by what crosses the two ends (open rows, zero inflow);
- positivity: f_new >= 0 (Filbet et al. 2001, sec. 3). The slope correctors take the upper bound
  ``fmax``; with fmax = inf (what the solver uses) only positivity is enforced, so smooth maxima
  keep third-order accuracy instead of being clipped by the maximum principle;
- shifts of any size (semi-Lagrangian: no CFL limit): the integer part is an exact shift.

With a shift s = n + b (n integer, 0 < b < 1) the departure interval of cell i is the right
(1 - b) part of cell j = i - n - 1 and the left b part of cell j + 1; with L_j(beta) the mass of the
left beta part of cell j, f_new_i = f_j - L_j(1 - b) + L_{j+1}(1 - b).

Determinism: each row is computed by one thread in a fixed order, and every reduction runs in a
fixed order, so results are bit-identical whatever the thread count.
"""
from __future__ import annotations

import math

import numba
import numpy as np
from numba import prange


@numba.njit(cache=True, inline="always")
def _left_mass(fm, f0, fp, beta, fmax):
    """Mass of the left part of length beta (cell units) of a cell with average f0 between
    neighbours fm (left) and fp (right): the PFC reconstruction with slope correctors eps+ and
    eps- (Filbet, Sonnendrucker & Bertrand 2001, eqs. for a < 0):

        L = beta [f0 - eps+/6 (1 - beta)(1 + beta)(fp - f0) - eps-/6 (1 - beta)(2 - beta)(f0 - fm)]
    """
    dp = fp - f0
    dm = f0 - fm
    if dp > 0.0:
        ep = min(1.0, 2.0 * f0 / dp)
    elif dp < 0.0:
        ep = min(1.0, -2.0 * (fmax - f0) / dp)
    else:
        ep = 1.0
    if dm > 0.0:
        em = min(1.0, 2.0 * (fmax - f0) / dm)
    elif dm < 0.0:
        em = min(1.0, -2.0 * f0 / dm)
    else:
        em = 1.0
    ep = max(ep, 0.0)
    em = max(em, 0.0)
    return beta * (f0 - ep / 6.0 * (1.0 - beta) * (1.0 + beta) * dp
                   - em / 6.0 * (1.0 - beta) * (2.0 - beta) * dm)


@numba.njit(cache=True)
def _advect_line(row, out, work, shift, periodic, fmax):
    """One row of cell averages advected by ``shift`` cells (positive: towards larger index);
    ``fmax`` is the upper bound of the slope correctors (inf: positivity only)."""
    n = row.size
    ni = math.floor(shift)
    b = shift - ni
    if b == 0.0:
        for i in range(n):
            j = i - ni
            if periodic:
                out[i] = row[j % n]
            else:
                out[i] = row[j] if 0 <= j < n else 0.0
        return
    beta = 1.0 - b
    for j in range(n):
        if periodic:
            fm = row[(j - 1) % n]
            fp = row[(j + 1) % n]
        else:
            fm = row[j - 1] if j > 0 else 0.0
            fp = row[j + 1] if j < n - 1 else 0.0
        work[j] = _left_mass(fm, row[j], fp, beta, fmax)
    for i in range(n):
        j = i - ni - 1
        if periodic:
            jj = j % n
            kk = (j + 1) % n
            out[i] = row[jj] - work[jj] + work[kk]
        else:
            a = row[j] - work[j] if 0 <= j < n else 0.0
            c = work[j + 1] if 0 <= j + 1 < n else 0.0
            out[i] = a + c


@numba.njit(parallel=True, cache=True)
def advect_rows(f, shifts, out, periodic, fmax):
    """Every row f[r, :] advected along its axis by shifts[r] cells into out[r, :] (PFC)."""
    nr, n = f.shape
    for r in prange(nr):
        work = np.empty(n)
        _advect_line(f[r], out[r], work, shifts[r], periodic, fmax)


@numba.njit(parallel=True, cache=True)
def advect_columns(f, shifts, out, periodic, fmax):
    """Every column f[:, c] advected along the first axis by shifts[c] cells into out[:, c]."""
    n, nc = f.shape
    for c in prange(nc):
        col = np.empty(n)
        res = np.empty(n)
        work = np.empty(n)
        for i in range(n):
            col[i] = f[i, c]
        _advect_line(col, res, work, shifts[c], periodic, fmax)
        for i in range(n):
            out[i, c] = res[i]


@numba.njit(parallel=True, cache=True)
def column_sums(f, scale, out):
    """out[c] = scale * sum_i f[i, c] (the density n(x_c) = sum_u f du), each column in order."""
    n, nc = f.shape
    for c in prange(nc):
        s = 0.0
        for i in range(n):
            s += f[i, c]
        out[c] = s * scale


@numba.njit(parallel=True, cache=True)
def row_moments(f, out):
    """Per row r: out[r] = (sum_c f, sum_c |f|, sum_c f^2, min_c f) — summed later in row order,
    so totals do not depend on the thread count."""
    nr, n = f.shape
    for r in prange(nr):
        s = 0.0
        a = 0.0
        q = 0.0
        m = math.inf
        for c in range(n):
            v = f[r, c]
            s += v
            a += abs(v)
            q += v * v
            if v < m:
                m = v
        out[r, 0] = s
        out[r, 1] = a
        out[r, 2] = q
        out[r, 3] = m
