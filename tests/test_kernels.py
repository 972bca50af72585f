"""The numba kernels against the simple numpy reference kernel (tests/reference_impl.py), on
random particles."""
import numpy as np
import pytest

from reference_impl import reference_step, reference_weights
from streamsim import kernels


@pytest.mark.parametrize("shape", ["ngp", "cic", "tsc"])
@pytest.mark.parametrize("nchunks", [1, 2, 7])
def test_push_deposit_matches_reference(shape, nchunks):
    rng = np.random.default_rng(11)
    n, ng, length, dt = 5003, 37, 3.7, 0.05
    x = rng.random(n) * length
    u = rng.normal(0, 0.5, n)
    e = rng.normal(0, 1.0, ng)
    code = kernels.SHAPES[shape]
    xr, ur, rhor = reference_step(x.copy(), u.copy(), e, -0.7 * dt, dt, length, code)
    partial = np.zeros((nchunks, ng))
    sums = np.zeros((nchunks, kernels.NSUMS))
    xk, uk = x.copy(), u.copy()
    kernels.push_deposit(xk, uk, e, -0.7 * dt, dt, length, code, nchunks, partial, sums)
    np.testing.assert_allclose(uk, ur, rtol=0, atol=1e-13)
    np.testing.assert_allclose(xk, xr, rtol=0, atol=1e-12)
    np.testing.assert_allclose(partial.sum(axis=0), rhor, rtol=1e-12, atol=1e-10)
    assert partial.sum() == pytest.approx(n, rel=1e-13)          # weights sum to one per particle
    g = lambda v: v * v / (np.sqrt(1 + v * v) + 1)
    assert sums[:, 0].sum() == 0.0 and sums[:, 2].sum() == 0.0   # n-1/2 side: the engine's
    assert sums[:, 1].sum() == pytest.approx(g(ur).sum(), rel=1e-12)
    assert sums[:, 3].sum() == pytest.approx(ur.sum(), rel=1e-12, abs=1e-9)
    assert sums[:, 4].sum() == 0


@pytest.mark.parametrize("shape", ["ngp", "cic", "tsc"])
def test_deposit_matches_reference(shape):
    rng = np.random.default_rng(5)
    n, ng, length = 4001, 16, 1.0
    x = rng.random(n) * length
    idx, w = reference_weights(x * ng / length, ng, kernels.SHAPES[shape])
    ref = np.zeros(ng)
    np.add.at(ref, idx.ravel(), w.ravel())
    partial = np.zeros((3, ng))
    bad = kernels.deposit(x, ng, length, kernels.SHAPES[shape], 3, partial)
    assert bad == 0
    np.testing.assert_allclose(partial.sum(axis=0), ref, rtol=1e-12)


def test_nonfinite_particle_is_counted_not_deposited():
    x = np.array([0.1, np.nan, 0.5])
    u = np.zeros(3)
    partial = np.zeros((1, 8))
    sums = np.zeros((1, kernels.NSUMS))
    kernels.push_deposit(x, u, np.zeros(8), 0.0, 0.1, 1.0, 1, 1, partial, sums)
    assert sums[0, 4] == 1
    assert partial.sum() == pytest.approx(2.0)


def test_same_chunking_is_bit_identical():
    rng = np.random.default_rng(2)
    x0 = rng.random(10000)
    u0 = rng.normal(0, 1, 10000)
    e = rng.normal(0, 1, 32)
    out = []
    for _ in range(2):
        x, u = x0.copy(), u0.copy()
        partial = np.zeros((4, 32))
        sums = np.zeros((4, kernels.NSUMS))
        for _ in range(5):
            kernels.push_deposit(x, u, e, 0.01, 0.01, 1.0, 2, 4, partial, sums)
        out.append((x, u, partial.sum(axis=0)))
    for a, b in zip(out[0], out[1]):
        assert np.array_equal(a, b)
