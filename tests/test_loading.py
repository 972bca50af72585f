"""Initial distributions against analytic moments (scipy.special Bessel functions)."""
import math

import numpy as np
import pytest
from scipy.special import kv

from streamsim import loading
from streamsim.deck import load_deck


def _species(**kw):
    raw = {"species": [dict({"name": "s", "charge": -1.0, "density": 1.0}, **kw)],
           "box": {"length": 1.0, "cells": 4}}
    return load_deck(raw).species[0]


@pytest.mark.parametrize("theta,beta", [(0.05, 0.0), (0.5, 0.0), (0.5, 0.6), (2.0, -0.9)])
def test_juttner_rest_frame_mean_gamma(theta, beta):
    """1D Maxwell-Juttner f(u') ∝ exp(-gamma'/theta): <gamma'> = K_0(1/theta)/K_1(1/theta) + theta
    (from the normalisation 2 K_1(1/theta); e.g. Synge 1957). Lab samples carry the rest-frame
    average with weight gamma'/gamma (invariance of f, Zenitani 2015)."""
    s = _species(theta=theta, drift_beta=beta)
    u = loading.momenta(s, 200_000, quiet=True, rng=np.random.default_rng(0))
    up = loading.rest_u(u, s.drift_u)
    gp, g = np.sqrt(1 + up * up), np.sqrt(1 + u * u)
    w = gp / g
    z = 1.0 / theta
    expected = kv(0, z) / kv(1, z) + theta
    assert np.sum(w * gp) / np.sum(w) == pytest.approx(expected, rel=2e-4)


def test_juttner_lab_frame_mean_velocity_is_the_drift():
    """The lab-frame particle flux of a drifting species is n beta_d (definition of the drift
    frame: N^mu = n' U^mu, so <v>_lab = beta_d)."""
    s = _species(theta=0.3, drift_beta=0.4)
    u = loading.momenta(s, 200_000, quiet=True, rng=np.random.default_rng(0))
    assert np.mean(u / np.sqrt(1 + u * u)) == pytest.approx(0.4, rel=1e-3)


def test_waterbag_edges_are_boosted_spread():
    """Waterbag: flat in u' on [-D, D]; the lab edges are the Lorentz boosts of +-D."""
    s = _species(distribution="waterbag", spread_u=0.2, drift_u=1.0)
    u = loading.momenta(s, 10_000, quiet=True, rng=np.random.default_rng(0))
    g = math.sqrt(2.0)
    b = 1 / g
    hi = g * (0.2 + b * math.sqrt(1.04))
    lo = g * (-0.2 + b * math.sqrt(1.04))
    assert u.max() == pytest.approx(hi, rel=1e-3) and u.min() == pytest.approx(lo, rel=1e-3)
    assert np.mean(u / np.sqrt(1 + u * u)) == pytest.approx(b, rel=2e-3)


def test_quiet_quantiles_are_a_permutation_of_even_quantiles():
    """Quiet start: evenly spaced quantiles (Birdsall & Langdon 1991, ch. 16)."""
    q = loading.bit_reversed_quantiles(1000)
    np.testing.assert_allclose(np.sort(q), (np.arange(1000) + 0.5) / 1000)
    # bit-reversed (van der Corput, base 2) order, computed here by reversing binary strings:
    # for n = 2^m, particle i takes quantile (rev_m(i) + 1/2)/n; otherwise the rank of rev(i)
    # among rev(0..n-1) (Birdsall & Langdon 1991, sec. 16-3; van der Corput 1935)
    def rev(i, m):
        return int(format(i, f"0{m}b")[::-1], 2)
    q = loading.bit_reversed_quantiles(1024)
    np.testing.assert_array_equal(q, [(rev(i, 10) + 0.5) / 1024 for i in range(1024)])
    r = [rev(i, 10) for i in range(1000)]
    rank = {v: j for j, v in enumerate(sorted(r))}
    np.testing.assert_array_equal(loading.bit_reversed_quantiles(1000),
                                  [(rank[v] + 0.5) / 1000 for v in r])
    # so every leading block of 2^j particles fills the 2^j equal quantile bins once each
    for j in range(1, 11):
        assert sorted(np.floor(q[: 2**j] * 2**j).astype(int)) == list(range(2**j))


def test_displacement_seeds_the_requested_density_wave():
    """x -> x + (A/k) sin(kx) gives n = n0 (1 - A cos(kx)) to first order (linear kinematics)."""
    n, length, a = 4096, 2 * math.pi, 1e-3
    x = loading.displace(loading.positions(n, length, True, None), length, [3], a)
    amp = np.abs(np.sum(np.exp(-3j * x))) / n
    assert amp == pytest.approx(a / 2, rel=1e-2)
