"""Initial particles: positions, momenta and weights for each species of a deck.

Distributions are given in the lab frame, where the deck's ``density`` is measured. A
distribution defined in the species' drift frame is carried to the lab by the invariance of the
phase-space density, f_lab(u) = f_rest(u'(u)) with u' = Gamma_d (u - beta_d gamma) — not by
boosting rest-frame samples, which would weight them by gamma'/gamma (Zenitani 2015, Phys.
Plasmas 22, 042116).

- cold: every particle at the drift momentum u_d.
- juttner: 1D Maxwell–Juttner, f_lab(u) ∝ exp(-Gamma_d (gamma - beta_d u) / theta)
  (Juttner 1911; drifting form e.g. Zenitani 2015).
- waterbag: flat in u' on [-spread_u, spread_u] in the drift frame, which is flat in lab u on
  the boosted interval (the invariance above).
- table: a lab-frame f(u) given by rows, linear in v between them; its cumulative distribution is
  exact (a u + b gamma on each interval) and inverted by Newton's method
  (:meth:`streamsim.distribution_table.DistributionTable.inverse_cdf`), with the same quantiles
  (quiet: bit-reversed; random: the seeded generator) as the built-in distributions.

Sampling is inverse-transform (Devroye 1986, ch. 2) of the tabulated lab-frame CDF. The quiet
start (Birdsall & Langdon 1991, ch. 16) puts particles at evenly spaced positions and gives them
momenta at evenly spaced quantiles taken in bit-reversed order, so position and momentum are
not correlated: by default one set spread along the box, optionally the same set in every cell
(a phase-space lattice, :func:`lattice_quantiles`; :data:`QUIET_START`); the random
start draws both from the seeded generator.
"""
from __future__ import annotations

import math

import numpy as np

#: points of the tabulated CDF (common practice: enough that the tabulation error is far below
#: the sampling noise of any practical particle count)
_CDF_POINTS = 1 << 16


def boost_u(u_rest: np.ndarray | float, drift_u: float):
    """Lorentz boost of a momentum u' (rest frame) to the lab: u = Gamma_d (u' + beta_d gamma')."""
    g_d = math.sqrt(1.0 + drift_u * drift_u)
    b_d = drift_u / g_d
    return g_d * (u_rest + b_d * np.sqrt(1.0 + np.square(u_rest)))


def rest_u(u_lab: np.ndarray, drift_u: float) -> np.ndarray:
    """Inverse boost: u' = Gamma_d (u - beta_d gamma)."""
    g_d = math.sqrt(1.0 + drift_u * drift_u)
    b_d = drift_u / g_d
    return g_d * (u_lab - b_d * np.sqrt(1.0 + np.square(u_lab)))


def juttner_log_f(u_lab: np.ndarray, drift_u: float, theta: float) -> np.ndarray:
    """log f_lab(u) + const for the drifting 1D Maxwell–Juttner distribution:
    -Gamma_d (gamma - beta_d u)/theta = -gamma'/theta, written as -(gamma' - 1)/theta with
    gamma' - 1 = u'^2 / (gamma' + 1) to avoid cancellation for small theta."""
    up = rest_u(u_lab, drift_u)
    return -(up * up / (np.sqrt(1.0 + up * up) + 1.0)) / theta


def juttner_u_range(drift_u: float, theta: float, sigmas: float = 12.0) -> tuple[float, float]:
    """A lab-frame u interval holding all but ~exp(-sigmas^2/2) of a drifting Juttner species."""
    # rest-frame tail: gamma' - 1 = sigmas^2 theta / 2 (Gaussian core) plus the exponential tail
    edge_g = 1.0 + 0.5 * sigmas * sigmas * theta + 2.0 * sigmas * theta
    edge = math.sqrt(edge_g * edge_g - 1.0)
    return float(boost_u(-edge, drift_u)), float(boost_u(edge, drift_u))


def juttner_inverse_cdf(q: np.ndarray, drift_u: float, theta: float) -> np.ndarray:
    """u_lab at quantiles q of the drifting Juttner distribution (tabulated inverse CDF)."""
    lo, hi = juttner_u_range(drift_u, theta)
    grid = np.linspace(lo, hi, _CDF_POINTS)
    logf = juttner_log_f(grid, drift_u, theta)
    f = np.exp(logf - logf.max())
    cdf = np.concatenate([[0.0], np.cumsum(0.5 * (f[1:] + f[:-1]) * np.diff(grid))])
    cdf /= cdf[-1]
    # strictly increasing for interpolation (flat tails where f underflows)
    keep = np.concatenate([[True], np.diff(cdf) > 0])
    return np.interp(q, cdf[keep], grid[keep])


def waterbag_inverse_cdf(q: np.ndarray, drift_u: float, spread_u: float) -> np.ndarray:
    """u_lab at quantiles q of a waterbag species: uniform in lab u on the boosted interval."""
    lo = float(boost_u(-spread_u, drift_u))
    hi = float(boost_u(spread_u, drift_u))
    return lo + (hi - lo) * q


def bit_reversed_quantiles(n: int) -> np.ndarray:
    """The evenly spaced quantiles (i + 1/2)/n, i = 0..n-1, in bit-reversed (van der Corput,
    base 2) order (Birdsall & Langdon 1991, sec. 16-3)."""
    j = np.arange(n, dtype=np.uint64)
    bits = max(1, int(n - 1).bit_length())
    rev = np.zeros(n, dtype=np.uint64)
    for b in range(bits):
        rev |= ((j >> np.uint64(b)) & np.uint64(1)) << np.uint64(bits - 1 - b)
    order = np.argsort(rev, kind="stable")      # rank of each index in bit-reversed order
    rank = np.empty(n, dtype=np.int64)
    rank[order] = np.arange(n)
    return (rank + 0.5) / n


def lattice_quantiles(n: int, per_cell: int) -> np.ndarray:
    """The same per_cell evenly spaced quantiles (i + 1/2)/per_cell in every cell: particle j of
    the evenly spaced positions (cell j // per_cell) takes the bit-reversed quantile number
    j % per_cell, so each velocity level is a uniform row of particles one cell apart (a lattice
    in phase space; Birdsall & Langdon 1991, sec. 16-3 and 16-4) and within a cell position and
    velocity are not correlated."""
    return np.tile(bit_reversed_quantiles(per_cell), n // per_cell)


#: the warm quiet start: "bit_reversed" (one set of n bit-reversed quantiles spread along the
#: whole box, :func:`bit_reversed_quantiles`) or "lattice" (:func:`lattice_quantiles`). The
#: lattice keeps the unstable band far quieter, but its per_cell discrete velocity beams
#: recur (t = 2 pi / (k dv)) and spoil Landau damping (measured in README, "Growth"), so the
#: bit-reversed start stays the default.
QUIET_START = "bit_reversed"


def momenta(species, n: int, quiet: bool, rng: np.random.Generator) -> np.ndarray:
    """Lab-frame momenta u for n particles of a species (quiet: see :data:`QUIET_START`)."""
    if species.is_cold:
        return np.full(n, species.drift_u)
    ppc = int(getattr(species, "particles_per_cell", 0) or 0)
    if quiet and QUIET_START == "lattice" and ppc > 0 and n % ppc == 0:
        q = lattice_quantiles(n, ppc)
    elif quiet:
        q = bit_reversed_quantiles(n)
    else:
        q = rng.random(n)
    if species.distribution == "waterbag":
        return waterbag_inverse_cdf(q, species.drift_u, species.spread_u)
    if species.distribution == "table":
        return species.table.inverse_cdf(q)
    return juttner_inverse_cdf(q, species.drift_u, species.theta)


def positions(n: int, length: float, quiet: bool, rng: np.random.Generator) -> np.ndarray:
    """Evenly spaced (quiet: x_j = (j + 1/2) L / n) or uniform random positions in [0, L)."""
    if quiet:
        return (np.arange(n) + 0.5) * (length / n)
    return rng.random(n) * length


def displace(x: np.ndarray, length: float, modes, amplitude: float) -> np.ndarray:
    """Seed density waves delta n/n = -amplitude cos(k_m x) for each mode m by the displacement
    xi(x) = sum_m (amplitude / k_m) sin(k_m x) (linear: n = n_0 (1 - d xi / dx))."""
    if amplitude == 0 or not len(modes):
        return x
    xi = np.zeros_like(x)
    for m in modes:
        k = 2.0 * np.pi * m / length
        xi += amplitude / k * np.sin(k * x)
    return np.mod(x + xi, length)


#: the phase stream of a seeded perturbation is its own generator, seeded from
#: (random_seed, this tag), so that it never shifts the loading's own random stream
_PHASE_STREAM = 0x5EED


def seed_phases(deck) -> np.ndarray:
    """The phase phi_m in [0, 2 pi) of each seeded mode of ``deck.perturbation.modes`` (in that
    order): zero, or ``phases = "random"``: uniform, drawn from ``random_seed``."""
    pert = deck.perturbation
    n = len(pert.modes)
    if pert.phases != "random":
        return np.zeros(n)
    rng = np.random.default_rng([int(deck.random_seed), _PHASE_STREAM])
    return rng.random(n) * (2.0 * np.pi)


def seeded_density(x, length: float, modes, amplitude: float, phases) -> np.ndarray:
    """n(x)/n_0 = 1 - amplitude sum_m cos(k_m x + phi_m), k_m = 2 pi m / L: the density the
    perturbation loads (the convention of :func:`displace` with phases)."""
    x = np.asarray(x, float)
    out = np.ones_like(x)
    for m, ph in zip(modes, phases):
        out -= amplitude * np.cos(2.0 * np.pi * m / length * x + ph)
    return out


def seed_positions(x: np.ndarray, length: float, modes, amplitude: float, phases,
                   iterations: int = 8, chunk: int = 1 << 16) -> np.ndarray:
    """Place particles so that they sample n(x) = n_0 (1 - A sum_m cos(k_m x + phi_m)) exactly:
    the unperturbed positions x_0 (even or random) give the quantiles q = x_0 / L of the
    uniform load, and each particle goes to the root of G(x) = q of the cumulative fraction

        G(x) = x/L - (A/L) sum_m [sin(k_m x + phi_m) - sin(phi_m)] / k_m

    (inverse-transform sampling, Devroye 1986, ch. 2), solved by Newton's method from the
    linear displacement x_0 + sum_m (A/k_m) [sin(k_m x_0 + phi_m) - sin(phi_m)]. For evenly
    spaced x_0 the form factor (1/N) sum_j exp(-i k x_j) is then the midpoint rule of the
    periodic integral of exp(-i k x) n(x)/(n_0 L), exact to round-off for k far below the
    particle spacing's 2 pi N / L; the linear displacement alone is exact only to O(A^2).
    Needs A sum 1 < 1 (positive density)."""
    if amplitude == 0 or not len(modes):
        return x
    ks = 2.0 * np.pi * np.asarray(modes, float) / length
    ph = np.asarray(phases, float)
    off = np.sum(np.sin(ph) / ks)
    out = np.empty_like(x, dtype=np.float64)
    for lo in range(0, x.size, chunk):
        x0 = np.asarray(x[lo:lo + chunk], float)
        q = x0 / length
        arg = np.outer(x0, ks) + ph
        y = x0 + amplitude * (np.sin(arg) @ (1.0 / ks) - off)
        for _ in range(iterations):
            arg = np.outer(y, ks) + ph
            g = y / length - amplitude / length * (np.sin(arg) @ (1.0 / ks) - off) - q
            dg = (1.0 - amplitude * np.cos(arg).sum(axis=1)) / length
            step = g / dg
            y -= step
            if np.max(np.abs(step)) < 1e-15 * length:
                break
        out[lo:lo + chunk] = y
    return np.mod(out, length)


def load_species(species, deck, rng: np.random.Generator):
    """(x, u, weight) for one species: weight = density L / N (lab-frame number per macro)."""
    n = species.particles_per_cell * deck.box.cells
    quiet = species.loading == "quiet"
    x = positions(n, deck.box.length, quiet, rng)
    u = momenta(species, n, quiet, rng)
    pert = deck.perturbation
    targets = pert.species or tuple(s.name for s in deck.species if s.charge < 0)
    if species.name in targets:
        x = seed_positions(x, deck.box.length, pert.modes, pert.amplitude, seed_phases(deck))
    x = np.ascontiguousarray(x, dtype=np.float64)
    x[x >= deck.box.length] -= deck.box.length
    weight = species.density * deck.box.length / n
    return x, np.ascontiguousarray(u, dtype=np.float64), weight
