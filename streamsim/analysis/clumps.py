"""Clumps: overdense regions of one species on the periodic grid.

A clump is a connected run of grid nodes with delta n/n > ``threshold`` (deck
``analysis.clump_threshold``, default 0.5), labelled with :func:`scipy.ndimage.label` and joined
across the periodic boundary.  For each clump:

- ``position``: the centroid of its excess density n - <n> over the region (periodic, c/omega_p);
- ``peak``: the largest delta n/n in it;
- ``width``: the full width at half maximum of the excess density delta n/n around the peak
  node, edges linearly interpolated between nodes (c/omega_p);
- ``mass``: integral of n dx over the region (n_ref c/omega_p), ``fraction``: that over the
  species' total, ``excess``: integral of (n - <n>) dx.

Also the density power spectrum P(k) = |(1/N) sum_i (delta n/n)_i e^{-i k x_i}|^2 at the box
wavenumbers k_m = 2 pi m / L, m = 0..N/2 (numpy FFT), and the size spectrum (histogram of widths).
"""
from __future__ import annotations

import math

import numpy as np
from scipy import ndimage

__all__ = ["label_periodic", "find_clumps", "fwhm_periodic", "density_power_spectrum",
           "size_histogram", "deposit_cic", "refinement", "median_bootstrap",
           "DEFAULT_THRESHOLD", "BOOTSTRAP"]

DEFAULT_THRESHOLD = 0.5
#: bootstrap resamples of the clumps for the error of the median size
BOOTSTRAP = 400
#: particles per cell of the deposition grid at least. The per-node shot noise 1/sqrt(256) =
#: 0.06 stays well below the clump threshold 0.5 and moves a half-maximum crossing little; at
#: 64 per fine cell (noise 0.125) the median FWHM of a warm deck at 512 particles per cell came
#: out 26 % below the noise-free Vlasov value of the same deck, at 256 per fine cell 3 % below
#: (measured, `streamsim validate --only pic_vlasov`)
PARTICLES_PER_FINE_CELL = 256
#: the deposition grid is at most this many times finer than the simulation grid
MAX_REFINE = 8


def deposit_cic(x, length: float, nodes: int, weight: float = 1.0) -> np.ndarray:
    """Cloud-in-cell density of positions x on ``nodes`` periodic nodes x_i = i L / nodes
    (Birdsall & Langdon 1991, sec. 8-2), in units of weight per length."""
    x = np.asarray(x, float)
    h = length / nodes
    s = np.mod(x, length) / h
    i = np.floor(s).astype(np.int64)
    f = s - i
    i %= nodes
    n = np.bincount(i, weights=1.0 - f, minlength=nodes)
    n += np.bincount((i + 1) % nodes, weights=f, minlength=nodes)
    return n * (weight / h)


def refinement(particles_per_cell: float) -> int:
    """How many times finer than the simulation grid the clumps are measured: the largest power
    of 2 <= MAX_REFINE that keeps PARTICLES_PER_FINE_CELL per fine cell (at least 1)."""
    r = 1
    while r * 2 <= MAX_REFINE and particles_per_cell / (r * 2) >= PARTICLES_PER_FINE_CELL:
        r *= 2
    return r


def median_bootstrap(values, resamples: int = BOOTSTRAP, seed: int = 0) -> float | None:
    """Standard error of the median by the bootstrap (Efron & Tibshirani 1993, An Introduction
    to the Bootstrap, ch. 6): the standard deviation of the medians of ``resamples`` resamples
    with replacement (seeded). None for fewer than 2 values."""
    v = np.asarray(values, float)
    if v.size < 2:
        return None
    rng = np.random.default_rng(seed)
    idx = rng.integers(0, v.size, size=(int(resamples), v.size))
    return float(np.std(np.median(v[idx], axis=1), ddof=1))


def label_periodic(mask: np.ndarray) -> tuple[np.ndarray, int]:
    """Label connected True runs of a 1D periodic mask; a run through the boundary is one label."""
    mask = np.asarray(mask, bool)
    lab, n = ndimage.label(mask)
    if n > 1 and mask[0] and mask[-1]:
        last = lab[-1]
        lab[lab == last] = lab[0]
        lab[lab > last] -= 1
        n -= 1
    return lab, int(n)


def fwhm_periodic(delta: np.ndarray, ipk: int, dx: float) -> float:
    """Full width at half maximum of ``delta`` (the excess delta n/n) around node ``ipk`` on a
    periodic grid: walk out both ways to the first node below half the peak and interpolate
    linearly between it and its inner neighbour.  Capped at the box length."""
    n = delta.size
    half = 0.5 * delta[ipk]

    def side(step):
        for j in range(1, n):
            a = delta[(ipk + step * (j - 1)) % n]
            b = delta[(ipk + step * j) % n]
            if b < half:
                return (j - 1) + (a - half) / (a - b)
        return n / 2.0

    return float(min((side(1) + side(-1)) * dx, n * dx))


def find_clumps(density: np.ndarray, length: float, threshold: float = DEFAULT_THRESHOLD) -> list[dict]:
    """Clumps of one species' density profile n(x) (n_ref, on N equally spaced periodic nodes)."""
    n = np.asarray(density, float)
    N = n.size
    dx = length / N
    mean = float(n.mean())
    if not mean > 0:
        return []
    delta = n / mean - 1.0
    lab, count = label_periodic(delta > threshold)
    x = np.arange(N) * dx
    total = float(n.sum() * dx)
    out = []
    for c in range(1, count + 1):
        idx = np.flatnonzero(lab == c)
        if idx.size == 0:
            continue
        # unwrap the region around the boundary for the centroid
        if idx[0] == 0 and idx[-1] == N - 1 and idx.size < N:
            gap = np.flatnonzero(np.diff(idx) > 1)
            if gap.size:
                idx = np.concatenate([idx[gap[0] + 1:], idx[:gap[0] + 1]])
        xs = np.unwrap(x[idx], period=length)
        ex = np.maximum(n[idx] - mean, 0.0)
        pos = float(np.sum(xs * ex) / ex.sum()) % length if ex.sum() > 0 else float(xs.mean()) % length
        ipk = int(idx[np.argmax(delta[idx])])
        out.append({
            "position": pos,
            "peak": float(delta[ipk]),
            "width": fwhm_periodic(delta, ipk, dx),
            "extent": float(idx.size * dx),
            "mass": float(n[idx].sum() * dx),
            "fraction": float(n[idx].sum() * dx / total) if total > 0 else None,
            "excess": float((n[idx] - mean).sum() * dx),
        })
    out.sort(key=lambda r: r["position"])
    return out


def density_power_spectrum(density: np.ndarray, length: float) -> tuple[np.ndarray, np.ndarray]:
    """(k_m, P_m), P_m = |(1/N) sum_i (delta n/n)_i e^{-i k_m x_i}|^2, m = 0..N/2 (numpy rfft)."""
    n = np.asarray(density, float)
    N = n.size
    mean = n.mean()
    delta = n / mean - 1.0 if mean > 0 else np.zeros_like(n)
    P = np.abs(np.fft.rfft(delta) / N) ** 2
    k = 2.0 * math.pi * np.arange(P.size) / length
    return k, P


def size_histogram(widths, dx: float, length: float, bins: int | None = None):
    """Histogram of clump widths over the range of the widths found (edges in c/omega_p),
    from 0 when the narrowest clump is within a few cells of it: sqrt(N) bins (5 to 30, a
    common-practice rule), logarithmic when the widths span more than a decade and a half.
    Returns (edges, counts); no clump gives one empty bin of one cell."""
    w = np.asarray(widths, float)
    w = w[np.isfinite(w)]
    if w.size == 0:
        return np.array([0.0, dx]), np.array([0])
    lo, hi = float(w.min()), float(w.max())
    nb = bins or int(min(30, max(5, math.ceil(math.sqrt(w.size)))))
    if lo > 0 and hi / lo > 30.0:
        edges = np.geomspace(lo / 1.05, hi * 1.05, nb + 1)
    else:
        pad = max(0.05 * (hi - lo), 0.25 * dx)
        start = 0.0 if lo - pad < 3 * dx else lo - pad
        edges = np.linspace(start, hi + pad, nb + 1)
    counts, _ = np.histogram(w, bins=edges)
    return edges, counts
