"""Hot kernels (numba): the fused relativistic push + deposit, gather, deposit.

Plain arrays in, plain arrays out: no Python objects, no configuration, no I/O.

Grid: N periodic nodes at x_i = i dx, i = 0..N-1, box [0, L). Particle shapes (Birdsall &
Langdon 1991, ch. 8; Hockney & Eastwood 1988, ch. 5), ``shape`` code 0/1/2:

- 0 NGP: weight 1 at the nearest node;
- 1 CIC: linear weights (1 - f, f) at nodes i, i + 1 with f = x/dx - i;
- 2 TSC: quadratic spline, (1/2 (1/2 - d)^2, 3/4 - d^2, 1/2 (1/2 + d)^2) at i - 1, i, i + 1 with
  i the nearest node and d = x/dx - i.

The gather uses the same weights as the deposit, which makes the scheme momentum conserving
(Birdsall & Langdon 1991, sec. 8-6) when the field solve is antisymmetric.

Leapfrog (Boris-free, 1D electrostatic): u^{n+1/2} = u^{n-1/2} + (q/m) E^n(x^n) dt,
x^{n+1} = x^n + v^{n+1/2} dt with v = u / sqrt(1 + u^2) (c = 1).

Parallelism: particles are split into ``nchunks`` fixed contiguous chunks, each chunk pushed
serially by one thread into its own row of ``partial`` (chunks x N). Rows are summed in a fixed
order afterwards, so results are bit-identical run to run for a fixed chunk count.
"""
from __future__ import annotations

import math

import numba as nb
import numpy as np

SHAPES = {"ngp": 0, "cic": 1, "tsc": 2}

#: columns of the per-chunk sums returned by the push
SUM_KE_OLD, SUM_KE_NEW, SUM_U_OLD, SUM_U_NEW, SUM_BAD = range(5)
NSUMS = 5


@nb.njit(inline="always")
def _weights(xg, n, shape):
    """Node indices (i0, i1, i2) and weights (w0, w1, w2) of a particle at grid coordinate xg."""
    if shape == 0:
        i = int(math.floor(xg + 0.5))
        i1 = i % n
        return i1, i1, i1, 1.0, 0.0, 0.0
    elif shape == 1:
        i = int(math.floor(xg))
        f = xg - i
        i0 = i % n
        i1 = i0 + 1
        if i1 >= n:
            i1 -= n
        return i0, i1, i1, 1.0 - f, f, 0.0
    else:
        i = int(math.floor(xg + 0.5))
        d = xg - i
        ic = i % n
        im = ic - 1
        if im < 0:
            im += n
        ip = ic + 1
        if ip >= n:
            ip -= n
        a = 0.5 - d
        b = 0.5 + d
        return im, ic, ip, 0.5 * a * a, 0.75 - d * d, 0.5 * b * b


@nb.njit(parallel=True, cache=True, fastmath=False, boundscheck=False)
def push_deposit(x, u, efield, qm_dt, dt, length, shape, nchunks, partial, sums):
    """Advance one species by one leapfrog step and deposit its number density at x^{n+1}.

    x, u: positions in [0, L) and momenta u^{n-1/2}; updated in place to x^{n+1}, u^{n+1/2}.
    efield: E^n on the N nodes. qm_dt: (q/m) dt. partial: (nchunks, N) zeroed here, receives the
    shape-weight sums (number of macro-particles per node, not yet divided by dx).
    sums: (nchunks, NSUMS) receives sum (gamma-1) and sum u at n-1/2 and n+1/2, and the count of
    particles whose position is not finite after the push (stored as they are, so that the caller
    can say which, and deposited nowhere).
    """
    n = x.size
    ng = efield.size
    inv_dx = ng / length
    chunk = (n + nchunks - 1) // nchunks
    for c in nb.prange(nchunks):
        row = partial[c]
        for i in range(ng):
            row[i] = 0.0
        lo = c * chunk
        hi = min(n, lo + chunk)
        ke_o = 0.0
        ke_n = 0.0
        p_o = 0.0
        p_n = 0.0
        bad = 0.0
        for j in range(lo, hi):
            xj = x[j]
            i0, i1, i2, w0, w1, w2 = _weights(xj * inv_dx, ng, shape)
            ej = w0 * efield[i0] + w1 * efield[i1] + w2 * efield[i2]
            uo = u[j]
            un = uo + qm_dt * ej
            go = math.sqrt(1.0 + uo * uo)
            gn = math.sqrt(1.0 + un * un)
            ke_o += uo * uo / (go + 1.0)       # gamma - 1 without cancellation
            ke_n += un * un / (gn + 1.0)
            p_o += uo
            p_n += un
            xn = xj + (un / gn) * dt
            xn -= length * math.floor(xn / length)
            if xn >= length:                   # floor rounding at the upper edge
                xn -= length
            u[j] = un
            x[j] = xn
            if not (xn >= 0.0 and xn < length):  # NaN/Inf: keep it visible, deposit nowhere
                bad += 1.0
                continue
            i0, i1, i2, w0, w1, w2 = _weights(xn * inv_dx, ng, shape)
            row[i0] += w0
            row[i1] += w1
            row[i2] += w2
        sums[c, 0] = ke_o
        sums[c, 1] = ke_n
        sums[c, 2] = p_o
        sums[c, 3] = p_n
        sums[c, 4] = bad


@nb.njit(parallel=True, cache=True, boundscheck=False)
def deposit(x, ng, length, shape, nchunks, partial):
    """Shape-weight sums of the particles at x on the N nodes, per chunk (see push_deposit).
    Returns the number of particles not inside [0, L) (deposited nowhere)."""
    n = x.size
    inv_dx = ng / length
    chunk = (n + nchunks - 1) // nchunks
    bad = np.zeros(nchunks)
    for c in nb.prange(nchunks):
        row = partial[c]
        for i in range(ng):
            row[i] = 0.0
        lo = c * chunk
        hi = min(n, lo + chunk)
        for j in range(lo, hi):
            xj = x[j]
            if not (xj >= 0.0 and xj < length):
                bad[c] += 1.0
                continue
            i0, i1, i2, w0, w1, w2 = _weights(xj * inv_dx, ng, shape)
            row[i0] += w0
            row[i1] += w1
            row[i2] += w2
    return bad.sum()


@nb.njit(parallel=True, cache=True, boundscheck=False)
def kick(u, x, efield, qm_dt, length, shape):
    """u += (q/m) dt E(x), gathered with the deposit's shape (used for the initial half step)."""
    n = x.size
    ng = efield.size
    inv_dx = ng / length
    for j in nb.prange(n):
        i0, i1, i2, w0, w1, w2 = _weights(x[j] * inv_dx, ng, shape)
        u[j] += qm_dt * (w0 * efield[i0] + w1 * efield[i1] + w2 * efield[i2])


@nb.njit(parallel=True, cache=True, boundscheck=False)
def moment_sums(x, u, efield, qm_dt, length, shape, nchunks, sums):
    """The sums of :func:`push_deposit` without moving anything (diagnostics at the last step)."""
    n = x.size
    ng = efield.size
    inv_dx = ng / length
    chunk = (n + nchunks - 1) // nchunks
    for c in nb.prange(nchunks):
        lo = c * chunk
        hi = min(n, lo + chunk)
        ke_o = 0.0
        ke_n = 0.0
        p_o = 0.0
        p_n = 0.0
        for j in range(lo, hi):
            i0, i1, i2, w0, w1, w2 = _weights(x[j] * inv_dx, ng, shape)
            ej = w0 * efield[i0] + w1 * efield[i1] + w2 * efield[i2]
            uo = u[j]
            un = uo + qm_dt * ej
            ke_o += uo * uo / (math.sqrt(1.0 + uo * uo) + 1.0)
            ke_n += un * un / (math.sqrt(1.0 + un * un) + 1.0)
            p_o += uo
            p_n += un
        sums[c, 0] = ke_o
        sums[c, 1] = ke_n
        sums[c, 2] = p_o
        sums[c, 3] = p_n
        sums[c, 4] = 0.0


# ----------------------------------------------------------------------------------------------
# Simple reference kernels (numpy, one particle at a time semantics) for the correctness tests
# ----------------------------------------------------------------------------------------------
def reference_weights(xg: np.ndarray, n: int, shape: int):
    """Node indices (3, P) and weights (3, P) of particles at grid coordinates xg (numpy)."""
    xg = np.asarray(xg, dtype=float)
    if shape == 0:
        i = np.floor(xg + 0.5).astype(np.int64) % n
        return np.stack([i, i, i]), np.stack([np.ones_like(xg), 0 * xg, 0 * xg])
    if shape == 1:
        i = np.floor(xg).astype(np.int64)
        f = xg - i
        i0 = i % n
        return np.stack([i0, (i0 + 1) % n, (i0 + 1) % n]), np.stack([1 - f, f, 0 * f])
    i = np.floor(xg + 0.5).astype(np.int64)
    d = xg - i
    ic = i % n
    return (np.stack([(ic - 1) % n, ic, (ic + 1) % n]),
            np.stack([0.5 * (0.5 - d) ** 2, 0.75 - d * d, 0.5 * (0.5 + d) ** 2]))


def reference_step(x, u, efield, qm_dt, dt, length, shape):
    """One push + deposit in plain numpy: returns (x_new, u_new, node_sums)."""
    ng = efield.size
    idx, w = reference_weights(x * ng / length, ng, shape)
    e = (w * efield[idx]).sum(axis=0)
    un = u + qm_dt * e
    xn = np.mod(x + un / np.sqrt(1 + un * un) * dt, length)
    xn = np.where(xn >= length, xn - length, xn)
    idx, w = reference_weights(xn * ng / length, ng, shape)
    rho = np.zeros(ng)
    np.add.at(rho, idx.ravel(), w.ravel())
    return xn, un, rho
