"""Plain-numpy reference implementations that the tests hold the optimised package code against
(one particle at a time semantics; slow, obvious, not part of the package).

- :func:`reference_weights`, :func:`reference_step`: the particle shapes NGP/CIC/TSC (Birdsall &
  Langdon 1991, ch. 8; Hockney & Eastwood 1988, ch. 5) and one leapfrog push + deposit,
  u' = u + (q/m) dt E(x), x' = x + u'/sqrt(1 + u'^2) dt (c = 1), for streamsim.kernels;
- :func:`form_factor_direct`: F(k_m) = sum_j w_j e^{i k_m x_j} / sum_j w_j summed directly,
  O(N M), for streamsim.analysis.coherence.form_factor.

Imported by the tests as ``from reference_impl import ...`` (pytest puts this rootdir-less tests
folder on sys.path, as for conftest).
"""
from __future__ import annotations

import math

import numpy as np


def reference_weights(xg: np.ndarray, n: int, shape: int):
    """Node indices (3, P) and weights (3, P) of particles at grid coordinates xg (numpy);
    shape code 0 NGP, 1 CIC, 2 TSC (as streamsim.kernels.SHAPES)."""
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


def form_factor_direct(x, length: float, modes: int, weights=None) -> np.ndarray:
    """F(k_m), m = 0..modes, k_m = 2 pi m / length, by the direct sum (O(N M))."""
    x = np.asarray(x, float)
    w = np.ones(x.size) if weights is None else np.broadcast_to(np.asarray(weights, float), x.shape)
    k = 2.0 * math.pi * np.arange(modes + 1) / length
    out = np.zeros(modes + 1, complex)
    for a in range(0, x.size, 4096):
        out += np.exp(1j * np.outer(k, x[a:a + 4096])) @ w[a:a + 4096]
    return out / w.sum()
