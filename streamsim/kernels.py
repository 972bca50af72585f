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

The push + deposit works through each chunk in blocks of BLOCK particles, in two passes:

1. one vectorised, branch-free pass gathers E (an AVX-512/AVX2 gather where the CPU has one),
   pushes, wraps, stores x and u, and leaves three values per particle in a small per-chunk
   scratch (gamma - 1, the node index and the shape coordinate at x^{n+1}), with the lowest
   and highest node of the block;
2. the deposit: when the block's particles land on fewer than WINDOW neighbouring nodes (cold
   or cell-ordered particles at >= BLOCK / WINDOW per cell, the usual case for beams), one
   vectorised masked sum per node; otherwise a scalar scatter into SUBROWS interleaved copies
   of the row (consecutive particles in one cell no longer wait on each other).

The energy and momentum sums are per-block vectorised sums. Ghost nodes -1, N, N+1 on the field
and the row copies remove every index wrap from the loops. All arithmetic is strict IEEE except
the per-block and per-node sums (reassociated, fixed by the compiled code), so the data and the
chunking alone fix the result, whichever thread runs a chunk.

Measured on one core of the development machine (AMD EPYC Zen 5, 2.1 M particles, 4096 cells,
the default beams, variants interleaved in one process): 2.5 ns per particle-step, against 3.7
ns for the previous scalar-scatter kernel; without the deposit 2.4 ns, without the gather 1.9
ns. The push with its gather is most of the cost; ``streamsim bench`` prints the same ladder at
all threads beside the copy roofline.
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


#: particles per block of the fused push: a block's scratch (~10 KB) stays in L1
BLOCK = 512
#: a block whose particles end in fewer than this many neighbouring nodes deposits by masked
#: sums, one vectorised pass per node (sorted or cold particles, >= BLOCK / WINDOW per cell);
#: wider blocks (warm, mixed or sparse particles) deposit by a scalar scatter
WINDOW = 8
#: interleaved copies of the deposit row per chunk for the scalar scatter: consecutive particles
#: in one cell would otherwise wait on each other's store-to-load forwarding
SUBROWS = 4
#: grids above this many cells deposit into a single copy (four would no longer fit in cache)
SUBROW_MAX_CELLS = 1 << 14
#: below this many particles the call runs on the calling thread alone: waking the pool costs
#: more than it saves (the chunking, hence every bit of the result, is the same either way)
SERIAL_BELOW = 1 << 16
#: extra slots past the ghost nodes of each row copy: a particle whose position is not finite
#: is deposited there, and those slots are never folded into the density
_DUMP = 3


@nb.njit(inline="always")
def _ix(i):
    """A non-negative index as unsigned: numba then skips the negative-index wrap, which keeps
    the address affine in the loop counter (a precondition for vectorisation)."""
    return np.uint64(i)


@nb.njit(inline="always")
def _push_block(x, u, ee, qm_dt, dt, length, inv_len, inv_dx, fng, dump, shape, b0, m, c,
                ke, fw, ib):
    """One vectorised pass over particles b0 .. b0+m-1: gather E(x^n), push, wrap, store x, u,
    and leave in the chunk's scratch the kinetic term gamma - 1 (``ke``), the node index
    (``ib``) and the shape coordinate (``fw``: f = x/dx - i for CIC, d = x/dx - i for NGP/TSC)
    of x^{n+1}. ``shape`` is a literal where this is inlined. Node t of the grid is ee[t + 1]
    (ghost nodes -1, N, N+1), so no index is wrapped here. A position not inside [0, L)
    (NaN/Inf) is gathered at x = 0; a non-finite x^{n+1} shows as a non-finite block sum of
    ``fw``, and only then a second pass counts such particles and sends them to the dump node.
    Returns (lowest node, highest node, number of non-finite particles)."""
    cc = _ix(c)
    one = _ix(1)
    two = _ix(2)
    jmin = dump
    jmax = -1
    nbad = 0
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
        un = u[j] + qm_dt * ej
        gn = math.sqrt(1.0 + un * un)
        r = 1.0 / (gn * (gn + 1.0))
        v = un * (gn + 1.0) * r                     # u / gamma
        xn = xj + v * dt
        xn = xn - length * math.floor(xn * inv_len)
        xn = xn + length if xn < 0.0 else xn        # rounding at the edges
        xn = xn - length if xn >= length else xn
        u[j] = un
        x[j] = xn
        ke[cc, kk] = un * un * gn * r               # gamma - 1 without cancellation
        ok = (xn >= 0.0) & (xn < length)            # False for NaN
        xg = (xn if ok else 0.0) * inv_dx           # a safe index for every particle
        if shape == 1:
            i = int(min(xg, fng))
        else:
            i = int(min(xg + 0.5, fng))
        fw[cc, kk] = xn * inv_dx - i                # not finite for a bad particle
        ib[cc, kk] = i
        jmin = min(jmin, i)
        jmax = max(jmax, i)
    t = _block_sum(fw, c, m)
    if not t - t == 0.0:                        # some x^{n+1} is not finite: a rare second pass
        for k in range(m):
            kk = _ix(k)
            d = fw[cc, kk]
            if not d - d == 0.0:
                nbad += 1
                ib[cc, kk] = dump
                fw[cc, kk] = 0.0
                jmax = dump
    return jmin, jmax, nbad


@nb.njit(fastmath={"reassoc"}, boundscheck=False, error_model="numpy")
def _node_sums(ib, fw, c, m, t, shape):
    """The block's shape weights that fall on the three nodes t - 1, t, t + 1 from particles
    whose node index is t (CIC: on t, t + 1 from the particles in cell t), by masked sums that
    vectorise; reassociation fixes the order of the additions in the compiled code, the same
    on every call and run."""
    s0 = 0.0
    s1 = 0.0
    s2 = 0.0
    cc = _ix(c)
    for k in range(m):
        kk = _ix(k)
        hit = ib[cc, kk] == t
        d = fw[cc, kk]
        if shape == 1:
            s0 += (1.0 - d) if hit else 0.0
            s1 += d if hit else 0.0
        elif shape == 0:
            s1 += 1.0 if hit else 0.0
        else:
            a = 0.5 - d
            b = 0.5 + d
            s0 += 0.5 * a * a if hit else 0.0
            s1 += (0.75 - d * d) if hit else 0.0
            s2 += 0.5 * b * b if hit else 0.0
    return s0, s1, s2


@nb.njit(fastmath={"reassoc"}, boundscheck=False, error_model="numpy")
def _block_sum(a, c, m):
    """Sum of a[c, :m]. Reassociation lets the compiler vectorise it: the order of the
    additions is then fixed by the compiled code, the same on every call and run."""
    t = 0.0
    for k in range(m):
        t += a[_ix(c), _ix(k)]
    return t


@nb.njit(fastmath={"reassoc"}, boundscheck=False, error_model="numpy")
def _range_sum(a, lo, m):
    """Sum of a[lo:lo + m], vectorised as :func:`_block_sum`."""
    t = 0.0
    for k in range(m):
        t += a[_ix(lo + k)]
    return t


@nb.njit(inline="always")
def _deposit_block(m, c, fw, ib, acc, nsub, stride, jmin, jmax, shape):
    """Add the block's weights at x^{n+1} into the chunk's row copies: by masked sums over the
    nodes jmin .. jmax when they are fewer than WINDOW, else by a scalar scatter in which copy
    k & (nsub - 1) takes particle k. Row slot t + 1 is node t (CIC: cell t deposits on slots
    t + 1, t + 2; NGP/TSC: node t on slots t, t + 1, t + 2)."""
    cc = _ix(c)
    one = _ix(1)
    two = _ix(2)
    if jmax - jmin < WINDOW:
        for t in range(jmin, jmax + 1):
            s0, s1, s2 = _node_sums(ib, fw, c, m, t, shape)
            tt = _ix(t)
            if shape == 1:
                acc[cc, tt + one] += s0
                acc[cc, tt + two] += s1
            elif shape == 0:
                acc[cc, tt + one] += s1
            else:
                acc[cc, tt] += s0
                acc[cc, tt + one] += s1
                acc[cc, tt + two] += s2
        return
    for k in range(m):
        kk = _ix(k)
        base = _ix((k & (nsub - 1)) * stride) + _ix(ib[cc, kk])
        d = fw[cc, kk]
        if shape == 1:
            acc[cc, base + one] += 1.0 - d
            acc[cc, base + two] += d
        elif shape == 0:
            acc[cc, base + one] += 1.0
        else:
            a = 0.5 - d
            b = 0.5 + d
            acc[cc, base] += 0.5 * a * a
            acc[cc, base + one] += 0.75 - d * d
            acc[cc, base + two] += 0.5 * b * b


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
    stride = ng + 3 + _DUMP
    dump = ng + 3                           # row slots ng + 3 .. ng + 5: never folded
    # per-chunk scratch, allocated here (not in the parallel body) so that the body holds no
    # array views: numba then marks the body's arrays as not aliasing, which lets the loops
    # vectorise
    ke = np.zeros((nchunks, BLOCK))
    fw = np.zeros((nchunks, BLOCK))
    ib = np.zeros((nchunks, BLOCK), np.int32)
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
                jmin, jmax, nbad = _push_block(x, u, ee, qm_dt, dt, length, inv_len, inv_dx,
                                               fng, dump, 1, b0, m, c, ke, fw, ib)
                _deposit_block(m, c, fw, ib, acc, nsub, stride, jmin, jmax, 1)
            elif shape == 0:
                jmin, jmax, nbad = _push_block(x, u, ee, qm_dt, dt, length, inv_len, inv_dx,
                                               fng, dump, 0, b0, m, c, ke, fw, ib)
                _deposit_block(m, c, fw, ib, acc, nsub, stride, jmin, jmax, 0)
            else:
                jmin, jmax, nbad = _push_block(x, u, ee, qm_dt, dt, length, inv_len, inv_dx,
                                               fng, dump, 2, b0, m, c, ke, fw, ib)
                _deposit_block(m, c, fw, ib, acc, nsub, stride, jmin, jmax, 2)
            # the n-1/2 side is the caller's
            lanes[c, SUM_KE_NEW] += _block_sum(ke, c, m)
            lanes[c, SUM_U_NEW] += _range_sum(u, b0, m)
            lanes[c, SUM_BAD] += nbad
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
