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

The push + deposit works through each chunk in blocks of BLOCK particles held in a small
per-chunk scratch: a scalar gather of E (an indirect load the compiler will not vectorise), a
branch-free vectorised pass for the push, the periodic wrap, the energy terms and the deposit
weights, a scalar scatter into SUBROWS interleaved copies of the row (consecutive particles in
one cell no longer wait on each other), and per-block sums. Ghost nodes -1, N, N+1 on the field
and the row copies remove every index wrap from the loops. All arithmetic is strict IEEE except
the per-block sums (reassociated, fixed by the compiled code), so the chunking alone fixes the
result, whichever thread runs a chunk.
"""
from __future__ import annotations

import math
import os

# OpenMP workers that spin between parallel regions steal the core the Python thread needs
# for the field solve and diagnostics between two kernel calls; on a shared or virtualised
# machine a launch after such a gap was measured at several ms instead of ~0.1 ms. Sleeping
# workers cost ~0.05 ms per launch, small against a step of >= 1e5 particles. Read by the
# OpenMP runtime when numba first starts its pool; a value set by the user wins.
os.environ.setdefault("OMP_WAIT_POLICY", "PASSIVE")

import numba as nb  # noqa: E402
import numpy as np  # noqa: E402

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


#: particles per block of the fused push: a block's scratch (~40 KB) stays in L1/L2
BLOCK = 512
#: interleaved copies of the deposit row per chunk: consecutive particles in one cell (sorted
#: particles, cold beams) would otherwise wait on each other's store-to-load forwarding
SUBROWS = 4
#: grids above this many cells deposit into a single copy (four would no longer fit in cache)
SUBROW_MAX_CELLS = 1 << 14
#: below this many particles the call runs on the calling thread alone: waking the pool costs
#: more than it saves (the chunking, hence every bit of the result, is the same either way)
SERIAL_BELOW = 1 << 16

# rows of the per-chunk float64 scratch (row r holds BLOCK values)
_R_E, _R_KO, _R_KN, _R_UO, _R_UN, _R_BAD, _R_W0, _R_W1, _R_W2 = range(9)
_NREG = 9


@nb.njit(inline="always")
def _ix(i):
    """A non-negative index as unsigned: numba then skips the negative-index wrap, which keeps
    the address affine in the loop counter (a precondition for vectorisation)."""
    return np.uint64(i)


@nb.njit(inline="always")
def _push_block(x, u, ee, qm_dt, dt, length, inv_len, inv_dx, fng, shape, b0, m, c, scr, ib):
    """Gather E(x^n), push, wrap, energy terms and deposit weights at x^{n+1} for particles
    b0 .. b0+m-1, branch-free. ``shape`` is a literal where this is inlined. Node t of the grid
    is ee[t + 1] (ghost nodes -1, N, N+1), so no index is wrapped here. A position not inside
    [0, L) (NaN/Inf) is gathered and deposited at x = 0 with weight 0, and flagged."""
    cc = _ix(c)
    one = _ix(1)
    two = _ix(2)
    for k in range(m):
        j = _ix(b0 + k)
        kk = _ix(k)
        xj = x[j]
        ok = (xj >= 0.0) & (xj < length)
        xg = (xj if ok else 0.0) * inv_dx
        if shape == 1:
            xg = min(xg, fng)
            i = int(xg)
            f = xg - i
            ii = _ix(i)
            ej = (1.0 - f) * ee[ii + one] + f * ee[ii + two]
        elif shape == 0:
            ej = ee[_ix(int(min(xg + 0.5, fng))) + one]
        else:
            i = int(min(xg + 0.5, fng))
            d = xg - i
            a = 0.5 - d
            b = 0.5 + d
            ii = _ix(i)
            ej = 0.5 * a * a * ee[ii] + (0.75 - d * d) * ee[ii + one] + 0.5 * b * b * ee[ii + two]
        scr[cc, _R_E, kk] = ej
    for k in range(m):
        j = _ix(b0 + k)
        kk = _ix(k)
        xj = x[j]
        uo = u[j]
        un = uo + qm_dt * scr[cc, _R_E, kk]
        gn = math.sqrt(1.0 + un * un)
        r = 1.0 / (gn * (gn + 1.0))
        v = un * (gn + 1.0) * r                     # u / gamma
        xn = xj + v * dt
        xn = xn - length * math.floor(xn * inv_len)
        xn = xn + length if xn < 0.0 else xn        # rounding at the edges
        xn = xn - length if xn >= length else xn
        u[j] = un
        x[j] = xn
        scr[cc, _R_KN, kk] = un * un * gn * r       # gamma - 1 without cancellation
        scr[cc, _R_UN, kk] = un
        ok = (xn >= 0.0) & (xn < length)            # False for NaN
        s = 1.0 if ok else 0.0
        scr[cc, _R_BAD, kk] = 1.0 - s
        xg = (xn if ok else 0.0) * inv_dx
        if shape == 1:
            xg = min(xg, fng)
            i = int(xg)
            f = xg - i
            ib[cc, kk] = _ix(i)
            scr[cc, _R_W0, kk] = s * (1.0 - f)
            scr[cc, _R_W1, kk] = s * f
        elif shape == 0:
            ib[cc, kk] = _ix(int(min(xg + 0.5, fng)))
            scr[cc, _R_W0, kk] = s
        else:
            i = int(min(xg + 0.5, fng))
            d = xg - i
            a = 0.5 - d
            b = 0.5 + d
            ib[cc, kk] = _ix(i)
            scr[cc, _R_W0, kk] = s * 0.5 * a * a
            scr[cc, _R_W1, kk] = s * (0.75 - d * d)
            scr[cc, _R_W2, kk] = s * 0.5 * b * b


@nb.njit(fastmath={"reassoc"}, boundscheck=False, error_model="numpy")
def _block_sum(scr, c, r, m):
    """Sum of scr[c, r, :m]. Reassociation lets the compiler vectorise it: the order of the
    additions is then fixed by the compiled code, the same on every call and run."""
    t = 0.0
    for k in range(m):
        t += scr[_ix(c), _ix(r), _ix(k)]
    return t


@nb.njit(inline="always")
def _scatter_block(m, c, scr, ib, acc, nsub, stride, shape):
    """Add the block's weights into the chunk's row copies; copy k & (nsub - 1) takes particle k."""
    cc = _ix(c)
    one = _ix(1)
    two = _ix(2)
    for k in range(m):
        kk = _ix(k)
        base = _ix((k & (nsub - 1)) * stride) + ib[cc, kk]
        if shape == 1:
            acc[cc, base + one] += scr[cc, _R_W0, kk]
            acc[cc, base + two] += scr[cc, _R_W1, kk]
        elif shape == 0:
            acc[cc, base + one] += scr[cc, _R_W0, kk]
        else:
            acc[cc, base] += scr[cc, _R_W0, kk]
            acc[cc, base + one] += scr[cc, _R_W1, kk]
            acc[cc, base + two] += scr[cc, _R_W2, kk]


@nb.njit(parallel=True, cache=True, boundscheck=False, error_model="numpy")
def _push_deposit(x, u, efield, qm_dt, dt, length, shape, nchunks, partial, sums):
    n = x.size
    ng = efield.size
    inv_dx = ng / length
    inv_len = 1.0 / length
    fng = float(ng)
    chunk = (n + nchunks - 1) // nchunks
    ee = np.empty(ng + 3)                   # E on nodes -1 .. N+1: ee[t] = E[(t - 1) mod N]
    for t in range(ng):
        ee[t + 1] = efield[t]
    ee[0] = efield[ng - 1]
    ee[ng + 1] = efield[0]
    ee[ng + 2] = efield[1 % ng]
    nsub = SUBROWS if ng <= SUBROW_MAX_CELLS else 1
    stride = ng + 3
    # per-chunk scratch, allocated here (not in the parallel body) so that the body holds no
    # array views: numba then marks the body's arrays as not aliasing, which lets the gather
    # vectorise
    scr = np.zeros((nchunks, _NREG, BLOCK))
    ib = np.zeros((nchunks, BLOCK), np.uint64)
    acc = np.zeros((nchunks, nsub * stride + 16))
    # per-chunk running sums of the SUM_* columns; rows padded to 128 bytes and the row copies
    # by 16 values, so that no cache line is written by two threads
    lanes = np.zeros((nchunks, 16))
    for c in nb.prange(nchunks):
        lo = min(n, c * chunk)
        hi = min(n, lo + chunk)
        for b0 in range(lo, hi, BLOCK):
            m = min(BLOCK, hi - b0)
            if shape == 1:
                _push_block(x, u, ee, qm_dt, dt, length, inv_len, inv_dx, fng, 1, b0, m, c, scr, ib)
                _scatter_block(m, c, scr, ib, acc, nsub, stride, 1)
            elif shape == 0:
                _push_block(x, u, ee, qm_dt, dt, length, inv_len, inv_dx, fng, 0, b0, m, c, scr, ib)
                _scatter_block(m, c, scr, ib, acc, nsub, stride, 0)
            else:
                _push_block(x, u, ee, qm_dt, dt, length, inv_len, inv_dx, fng, 2, b0, m, c, scr, ib)
                _scatter_block(m, c, scr, ib, acc, nsub, stride, 2)
            for q in (SUM_KE_NEW, SUM_U_NEW, SUM_BAD):   # the n-1/2 side is the caller's
                lanes[c, q] += _block_sum(scr, c, q + 1, m)
        # fold the row copies and the ghost nodes into the chunk's row of ``partial``
        for t in range(ng):
            partial[c, t] = 0.0
        for s in range(nsub):
            o = s * stride
            for t in range(ng):
                partial[c, t] += acc[c, o + t + 1]
            partial[c, ng - 1] += acc[c, o]
            partial[c, 0] += acc[c, o + ng + 1]
            partial[c, 1 % ng] += acc[c, o + ng + 2]
        for q in range(5):
            sums[c, q] = lanes[c, q]


def push_deposit(x, u, efield, qm_dt, dt, length, shape, nchunks, partial, sums):
    """Advance one species by one leapfrog step and deposit its number density at x^{n+1}.

    x, u: positions in [0, L) and momenta u^{n-1/2}; updated in place to x^{n+1}, u^{n+1/2}.
    efield: E^n on the N nodes. qm_dt: (q/m) dt. partial: (nchunks, N) overwritten here with the
    shape-weight sums of each chunk (number of macro-particles per node, not yet divided by dx).
    sums: (nchunks, NSUMS) receives sum (gamma-1) and sum u at n+1/2 (columns SUM_KE_NEW,
    SUM_U_NEW), and the count of particles whose position is not finite after the push (stored
    as they are, so that the caller can say which, and deposited nowhere). The n-1/2 columns
    (SUM_KE_OLD, SUM_U_OLD) are left at zero: they are the previous step's n+1/2 sums, which the
    caller keeps, so the push spends one square root per particle, not two.

    Particles are split into ``nchunks`` fixed contiguous chunks; each chunk is pushed in blocks
    of BLOCK particles by one thread into its own row. The chunking alone fixes every bit of the
    result: below SERIAL_BELOW particles all chunks run on the calling thread, with the same sums.
    """
    if x.size < SERIAL_BELOW:
        threads = nb.get_num_threads()
        if threads > 1:
            nb.set_num_threads(1)
            try:
                _push_deposit(x, u, efield, qm_dt, dt, length, shape, nchunks, partial, sums)
            finally:
                nb.set_num_threads(threads)
            return
    _push_deposit(x, u, efield, qm_dt, dt, length, shape, nchunks, partial, sums)


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
