"""The phase-space grid of a continuum run: the momentum range of each species and its
initial distribution f_s(x, u) on the cells.

f_s is held as cell averages on a uniform grid, shape (momentum_cells, box.cells): row i is the
momentum cell [u_min + i du, u_min + (i + 1) du], column j the spatial cell centred on the PIC
grid node x_j = j dx. It is normalised to the lab-frame density: sum_i f_s[i, j] du = n_s(x_j)
(in n_ref), so that the deck's ``density`` means the same as for particles.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .. import loading


@dataclass(frozen=True)
class MomentumGrid:
    u_min: float
    u_max: float
    cells: int
    automatic: bool

    @property
    def du(self) -> float:
        return (self.u_max - self.u_min) / self.cells

    @property
    def centres(self) -> np.ndarray:
        return self.u_min + (np.arange(self.cells) + 0.5) * self.du

    @property
    def edges(self) -> np.ndarray:
        return self.u_min + np.arange(self.cells + 1) * self.du


def trapping_width(deck, species) -> float:
    """Half-width in velocity of the islands a seeded wave of amplitude A traps: 2 sqrt(|q/m| phi)
    with phi = rho_k / k^2, rho_k = A sum_targets |q| n (O'Neil 1965, Phys. Fluids 8, 2255), for
    the longest seeded wavelength. 0 without a seed."""
    p = deck.perturbation
    if not p.amplitude or not p.modes:
        return 0.0
    targets = p.species or tuple(s.name for s in deck.species if s.charge < 0)
    rho = p.amplitude * sum(abs(s.charge) * s.density for s in deck.species if s.name in targets)
    k = 2.0 * math.pi * min(p.modes) / deck.box.length
    return 2.0 * math.sqrt(abs(species.charge / species.mass) * rho) / k


def juttner_edge(theta: float, widths: float) -> float:
    """The drift-frame momentum u' at which the 1D Juttner distribution exp(-(gamma' - 1)/theta)
    has fallen to exp(-widths^2/2) of its peak: gamma' - 1 = theta widths^2 / 2 (for theta << 1
    that is u' = widths sqrt(theta), ``widths`` thermal widths of the Maxwellian limit)."""
    g = 1.0 + 0.5 * theta * widths * widths
    return math.sqrt(g * g - 1.0)


def loaded_range(species, widths: float) -> tuple[float, float]:
    """The lab-frame u interval a species' loaded distribution occupies: a drifting Juttner out to
    f/f_peak = exp(-widths^2/2) (:func:`juttner_edge`, boosted by the drift), a waterbag's boosted
    edges plus a quarter of its width on each side; a table its rows' support (f = 0 beyond)."""
    if species.distribution == "table":
        return species.table.support
    if species.distribution == "waterbag":
        lo = float(loading.boost_u(-species.spread_u, species.drift_u))
        hi = float(loading.boost_u(species.spread_u, species.drift_u))
        pad = 0.25 * (hi - lo)
        return lo - pad, hi + pad
    edge = juttner_edge(species.theta, widths)
    return (float(loading.boost_u(-edge, species.drift_u)),
            float(loading.boost_u(edge, species.drift_u)))


def momentum_grid(deck, species) -> MomentumGrid:
    """The u grid of one species: ``vlasov.u_min``/``u_max`` where given, else automatic — the
    loaded range widened on each side by ``vlasov.widen`` x W, where W is the larger of the
    largest drift difference to another species (the velocity a two-stream saturation mixes,
    common practice) and the seeded wave's trapping width."""
    v = deck.vlasov
    lo, hi = loaded_range(species, v.thermal_widths)
    drifts = [abs(species.drift_u - s.drift_u) for s in deck.species]
    w = max(max(drifts), trapping_width(deck, species))
    lo -= v.widen * w
    hi += v.widen * w
    given_lo, given_hi = v.bound("u_min", species.name), v.bound("u_max", species.name)
    lo = given_lo if given_lo is not None else lo
    hi = given_hi if given_hi is not None else hi
    if not hi > lo:
        from ..deck import DeckError
        raise DeckError("vlasov.u_max", f"species {species.name}: the momentum range is empty "
                        f"(u_min = {lo:g}, u_max = {hi:g})", hi)
    return MomentumGrid(float(lo), float(hi), v.momentum_cells,
                        automatic=given_lo is None and given_hi is None)


def momentum_profile(species, grid: MomentumGrid) -> np.ndarray:
    """F(u_i) on the cells with sum_i F_i du = 1: the drifting Juttner at the cell centres, or the
    exact overlap of each cell with a waterbag's boosted interval, or the cell average of a
    table's interpolant (lab-frame f by the invariance
    of the phase-space density, as in :mod:`streamsim.loading`)."""
    if species.distribution == "waterbag":
        lo = float(loading.boost_u(-species.spread_u, species.drift_u))
        hi = float(loading.boost_u(species.spread_u, species.drift_u))
        e = grid.edges
        F = np.clip(np.minimum(e[1:], hi) - np.maximum(e[:-1], lo), 0.0, None) / grid.du
    elif species.distribution == "table":
        # the exact cell average of the table's interpolant (its CDF at the cell edges)
        F = np.diff(species.table.cdf_at(grid.edges)) / grid.du
    else:
        logf = loading.juttner_log_f(grid.centres, species.drift_u, species.theta)
        F = np.exp(logf - logf.max())
    total = F.sum() * grid.du
    if not total > 0:
        from ..deck import DeckError
        raise DeckError("vlasov.u_min", f"species {species.name}: the momentum grid "
                        f"[{grid.u_min:g}, {grid.u_max:g}] holds none of the distribution")
    return F / total


def density_profile(deck, species) -> np.ndarray:
    """n_s(x_j) on the nodes: the deck's density times 1 - A sum_m cos(k_m x_j + phi_m) for a
    perturbed species — the density the PIC loading samples (:func:`streamsim.loading.
    seeded_density`, with the same phases :func:`streamsim.loading.seed_phases`)."""
    from ..loading import seed_phases, seeded_density
    b = deck.box
    x = np.arange(b.cells) * b.dx
    n = np.full(b.cells, species.density)
    p = deck.perturbation
    targets = p.species or tuple(s.name for s in deck.species if s.charge < 0)
    if species.name in targets and p.amplitude and p.modes:
        n = n * seeded_density(x, b.length, p.modes, p.amplitude, seed_phases(deck))
    return n


def initial_f(deck, species, grid: MomentumGrid) -> np.ndarray:
    """f_s[i, j] = n_s(x_j) F_s(u_i), shape (momentum_cells, cells), C order."""
    return np.ascontiguousarray(np.outer(momentum_profile(species, grid),
                                         density_profile(deck, species)))
