"""The optimised fused push + deposit against the simple numpy reference kernel
(reference_impl.reference_step in this folder, one particle at a time semantics), for every
shape, on random particles and on the awkward cases the blocked, branch-free kernel must still
get right: block and chunk tails, the serial and the parallel path, grids too large for row
copies, tiny grids, positions at the box edges, several wraps per step, and NaN/Inf particles.

Tolerances are round-off: the kernel computes v = u / gamma and gamma - 1 through one shared
reciprocal, a few ulps from the reference's two divisions, and the grid coordinate as
x * (N / L) instead of x * N / L. The latter moves a weight by up to ~N ulp (the grid coordinate
is ~N in size), so the gathered field moves by ~N ulp times the node-to-node field jump, and
u by |q/m dt| times that: the tolerance on u below is that bound (with a factor 8 margin).
"""
import numba
import numpy as np
import pytest

from reference_impl import reference_step
from streamsim import kernels

SHAPES = ["ngp", "cic", "tsc"]


def _run(x, u, e, qm_dt, dt, length, shape, nchunks):
    partial = np.full((nchunks, e.size), np.nan)      # must be overwritten, not added to
    sums = np.full((nchunks, kernels.NSUMS), np.nan)
    xk, uk = x.copy(), u.copy()
    kernels.push_deposit(xk, uk, e, qm_dt, dt, length, kernels.SHAPES[shape], nchunks, partial, sums)
    return xk, uk, partial, sums


def _check(x, u, e, qm_dt, dt, length, shape, nchunks):
    xr, ur, rhor = reference_step(x.copy(), u.copy(), e, qm_dt, dt, length, kernels.SHAPES[shape])
    xk, uk, partial, sums = _run(x, u, e, qm_dt, dt, length, shape, nchunks)
    eps = np.finfo(float).eps
    jump = 2.0 * np.abs(e).max()
    tol_u = 8 * abs(qm_dt) * jump * e.size * eps + 4 * eps * np.abs(ur).max()
    np.testing.assert_allclose(uk, ur, rtol=0, atol=tol_u)
    # positions: round-off of L, except that a particle within round-off of L may land at 0
    dx = np.abs(xk - xr)
    dx = np.minimum(dx, length - dx)
    assert dx.max() <= 1e-13 * max(1.0, length)
    assert np.all((xk >= 0) & (xk < length))
    np.testing.assert_allclose(partial.sum(axis=0), rhor, rtol=1e-12, atol=1e-9)
    assert partial.sum() == pytest.approx(x.size, rel=1e-13)
    g1 = lambda v: v * v / (np.sqrt(1 + v * v) + 1)   # gamma - 1
    assert sums[:, kernels.SUM_KE_OLD].sum() == 0.0     # the n-1/2 side is carried by the engine
    assert sums[:, kernels.SUM_KE_NEW].sum() == pytest.approx(g1(ur).sum(), rel=1e-13)
    assert sums[:, kernels.SUM_U_OLD].sum() == 0.0
    assert sums[:, kernels.SUM_U_NEW].sum() == pytest.approx(ur.sum(), rel=1e-12, abs=1e-9)
    assert sums[:, kernels.SUM_BAD].sum() == 0
    return xk, uk, partial, sums


@pytest.mark.parametrize("shape", SHAPES)
@pytest.mark.parametrize("n,nchunks", [(1, 1), (7, 3), (kernels.BLOCK + 3, 2), (9001, 4),
                                       (kernels.SERIAL_BELOW + 1234, 3)])
def test_random_particles_match_reference(shape, n, nchunks):
    rng = np.random.default_rng(100 + n + nchunks)
    ng, length, dt = 41, 5.3, 0.07
    x = rng.random(n) * length
    u = rng.normal(0, 2.0, n)                     # relativistic: gamma up to ~10
    e = rng.normal(0, 1.0, ng)
    _check(x, u, e, -0.9 * dt, dt, length, shape, nchunks)


@pytest.mark.parametrize("shape", SHAPES)
def test_sorted_cold_beam_in_few_cells(shape):
    """Many consecutive particles in one cell: the interleaved row copies must add up."""
    rng = np.random.default_rng(7)
    n, ng, length, dt = 20000, 64, 2.0, 0.01
    x = np.sort(rng.random(n) * length * 3 / ng)  # three cells only
    u = np.full(n, 0.3)
    e = rng.normal(0, 0.1, ng)
    _check(x, u, e, 0.5 * dt, dt, length, shape, 2)


@pytest.mark.parametrize("shape", SHAPES)
def test_large_grid_single_row_copy(shape):
    rng = np.random.default_rng(8)
    ng = kernels.SUBROW_MAX_CELLS * 2 + 5
    n, length, dt = 30000, 100.0, 0.05
    x = rng.random(n) * length
    u = rng.normal(0, 0.5, n)
    e = rng.normal(0, 1.0, ng)
    _check(x, u, e, 0.4 * dt, dt, length, shape, 3)


@pytest.mark.parametrize("shape", SHAPES)
@pytest.mark.parametrize("ng", [2, 3])
def test_tiny_grids(shape, ng):
    rng = np.random.default_rng(9 + ng)
    n, length, dt = 3000, 1.0, 0.05
    x = rng.random(n) * length
    u = rng.normal(0, 1.0, n)
    e = rng.normal(0, 1.0, ng)
    _check(x, u, e, 0.3 * dt, dt, length, shape, 2)


@pytest.mark.parametrize("shape", SHAPES)
def test_box_edges_and_multiple_wraps(shape):
    length = 0.37
    tiny = np.nextafter(length, 0.0)
    x = np.array([0.0, tiny, length / 2, 1e-300, np.nextafter(tiny, 0.0), 0.25])
    u = np.array([-5.0, 5.0, 1e3, -1e3, 0.0, -40.0])   # |v| dt up to ~1: several box lengths
    e = np.linspace(-1, 1, 11)
    dt = 1.0
    # reference: exact wraps by np.mod
    xk, uk, partial, sums = _run(x, u, e, 0.0, dt, length, shape, 2)
    v = u / np.sqrt(1 + u * u)
    want = np.mod(x + v * dt, length)
    want[want >= length] -= length
    d = np.abs(xk - want)
    assert np.minimum(d, length - d).max() < 1e-13
    assert np.all((xk >= 0) & (xk < length))
    np.testing.assert_array_equal(uk, u)
    assert partial.sum() == pytest.approx(x.size, rel=1e-14)
    # a particle at rest exactly at the edge stays there and is gathered there
    x0 = np.array([0.0, tiny])
    _check(x0, np.zeros(2), e, 0.1, 0.1, length, shape, 1)


@pytest.mark.parametrize("shape", SHAPES)
def test_nonfinite_particles_are_counted_not_deposited(shape):
    rng = np.random.default_rng(3)
    n, ng, length = 2000, 16, 1.0
    x = rng.random(n) * length
    u = rng.normal(0, 0.1, n)
    bad_x = [5, 600, 1999]
    bad_u = [17, 1030]
    x[bad_x] = [np.nan, np.inf, -np.inf]
    u[bad_u] = [np.nan, np.inf]
    xk, uk, partial, sums = _run(x, u, rng.normal(0, 1, ng), 0.01, 0.05, length, shape, 3)
    assert sums[:, kernels.SUM_BAD].sum() == len(bad_x) + len(bad_u)
    assert partial.sum() == pytest.approx(n - len(bad_x) - len(bad_u), rel=1e-13)
    assert np.isnan(xk[bad_x + bad_u]).all() or not np.isfinite(xk[bad_x + bad_u]).any()
    good = np.ones(n, bool)
    good[bad_x + bad_u] = False
    assert np.all((xk[good] >= 0) & (xk[good] < length))


@pytest.mark.parametrize("shape", SHAPES)
def test_serial_and_parallel_paths_are_bit_identical(shape):
    """Same chunking, one thread or all: every bit equal (the serial path below SERIAL_BELOW
    runs the same compiled kernel on one thread)."""
    rng = np.random.default_rng(12)
    n, ng, length = kernels.SERIAL_BELOW + 777, 50, 3.0
    x0 = rng.random(n) * length
    u0 = rng.normal(0, 1, n)
    e = rng.normal(0, 1, ng)
    out = []
    saved = numba.get_num_threads()
    try:
        for threads in (1, numba.config.NUMBA_NUM_THREADS):
            numba.set_num_threads(threads)
            x, u = x0.copy(), u0.copy()
            partial = np.zeros((4, ng))
            sums = np.zeros((4, kernels.NSUMS))
            for _ in range(3):
                kernels.push_deposit(x, u, e, 0.02, 0.05, length, kernels.SHAPES[shape], 4,
                                     partial, sums)
            out.append((x, u, partial.copy(), sums.copy()))
    finally:
        numba.set_num_threads(saved)
    for a, b in zip(out[0], out[1]):
        assert np.array_equal(a, b)


def test_momentum_sums_match_reference_over_many_steps():
    """Three steps of the kernel against three reference steps (errors must not grow)."""
    rng = np.random.default_rng(21)
    n, ng, length, dt = 5000, 32, 4.0, 0.1
    x = rng.random(n) * length
    u = rng.normal(0, 0.3, n)
    e = rng.normal(0, 0.5, ng)
    xr, ur = x.copy(), u.copy()
    xk, uk = x.copy(), u.copy()
    partial = np.zeros((2, ng))
    sums = np.zeros((2, kernels.NSUMS))
    for _ in range(3):
        xr, ur, _ = reference_step(xr, ur, e, -dt, dt, length, 1)
        kernels.push_deposit(xk, uk, e, -dt, dt, length, 1, 2, partial, sums)
    np.testing.assert_allclose(uk, ur, rtol=0, atol=1e-13)
    d = np.abs(xk - xr)
    assert np.minimum(d, length - d).max() < 1e-12
