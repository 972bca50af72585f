"""``method = "vlasov"``: a noise-free continuum solver for the same deck.

f_s(x, u) of every species on a periodic-x x bounded-u grid, stepped by Strang splitting of the
1D1V relativistic Vlasov-Poisson system (Cheng & Knorr 1976, J. Comput. Phys. 22, 330) with the
positive, flux-conservative advection of Filbet, Sonnendrucker & Bertrand 2001 (J. Comput. Phys.
172, 166). The ``"vlasov"`` entry of :data:`streamsim.methods.METHODS` hands the pipeline
:class:`VlasovSimulation`, :data:`VLASOV_HANDLERS`, :func:`health_findings`, :func:`state_bytes`,
:func:`run_data`, :func:`summary_block` and :func:`notes`; the series, files and analysis blocks
are the PIC run's, with the density at maximum contrast in place of particle positions.

    from streamsim import run
    res = run("runs/warm-pair-beams-vlasov.toml")
    res.summary["vlasov"]              # grids, conservation, cost
    res.data.extra["distribution"]     # f(x, u) snapshots

The PIC-vs-Vlasov cross-check of one deck is :func:`streamsim.vlasov.compare.compare`.
"""
from __future__ import annotations

import numpy as np

from .grid import MomentumGrid, momentum_grid
from .handlers import NORM_SERIES, VLASOV_HANDLERS
from .simulation import VlasovSimulation

__all__ = ["VlasovSimulation", "MomentumGrid", "momentum_grid",
           "VLASOV_HANDLERS", "health_findings", "state_bytes", "memory_refusal",
           "run_data", "summary_block", "notes", "PIC_ONLY_RULES", "NORM_SERIES"]

#: health rules of :mod:`streamsim.health` that concern particles, not a continuum: particles
#: crossing cells, the finite-grid (aliasing) heating of macro-particles, the cold-beam grid
#: instability (no cold species reach a continuum run) and shot noise
PIC_ONLY_RULES = ("cell_crossing", "finite_grid_instability", "cold_beam_grid_instability",
                  "noise_floor", "leapfrog_stability")

#: relative mass at the momentum grid's edges above which a run warns (f reaches the edge)
EDGE_WARN = 1.0e-6


def health_findings(deck, findings) -> list:
    """The health findings that apply to a continuum run (the PIC-only rules removed: the
    semi-Lagrangian advections have no CFL limit and there are no particles)."""
    return [f for f in findings if f.id not in PIC_ONLY_RULES]


def notes(deck) -> list[str]:
    """The one-line notes a continuum run gives before it starts."""
    out = []
    if deck.vlasov.ignored:
        out.append('method = "vlasov" ignores ' + ", ".join(deck.vlasov.ignored)
                   + " (they mean nothing to a continuum)")
    return out


def state_bytes(deck) -> dict[str, int]:
    """Bytes of a continuum run's own state: f of every species and its work copy (the
    recorded arrays are the handlers' own, :data:`VLASOV_HANDLERS`)."""
    cells = deck.box.cells * deck.vlasov.momentum_cells * len(deck.species)
    return {"phase_space_grid": 8 * 2 * cells}


def memory_refusal(deck, item: str, need: int, avail: int):
    """The one-line refusal of a continuum deck whose arrays exceed the available memory
    (``need``: the whole estimate)."""
    from ..memory import GIB, MemoryRefusal
    return MemoryRefusal("vlasov.momentum_cells", f"the phase-space grid and its snapshots "
                         f"need {need / GIB:.2g} GiB (available {avail / GIB:.2g} GiB): lower "
                         f"vlasov.momentum_cells or box.cells, or raise output.fields_interval",
                         deck.vlasov.momentum_cells)


def run_data(sim, handlers, dispersion):
    """The RunData of a continuum run (no particles; the densities at maximum contrast and at
    the end; every handler's series, the norms of f among them; f snapshots in
    ``extra["distribution"]``)."""
    from ..diagnostics import FieldSnapshots, collect_series
    from ..rundata import DensityProfile, PhaseSpace, RunData
    from .handlers import DistributionSnapshots, PeakDensity
    deck = sim.deck
    one = {type(h): h for h in handlers}
    return RunData(deck=deck, names=sim.names, length=deck.box.length, cells=deck.box.cells,
                   dt=sim.dt, series=collect_series(handlers),
                   snapshots=one[FieldSnapshots].snapshots(),
                   phase_space=PhaseSpace(t=np.zeros(0), x={}, u={}), peak=None, end=None,
                   theory=dispersion,
                   extra={"distribution": one[DistributionSnapshots].snapshots()},
                   peak_density=one[PeakDensity].profile(),
                   end_density=DensityProfile(t=float(sim.step * sim.dt),
                                              density=sim.density.copy()))


def summary_block(sim, data, wall: float, steps_done: int, say) -> dict:
    """summary.json ``vlasov``: the grids, the conservation of mass and the norms of f, the cost;
    warns once when f reaches the edge of a momentum grid."""
    s = data.series
    out = {"momentum_cells": sim.deck.vlasov.momentum_cells, "x_advection":
           sim.deck.vlasov.x_advection, "phase_space_cells": sim.phase_cells,
           "cell_steps_per_s": steps_done * sim.phase_cells / wall if wall > 0 else None,
           "species": {}}
    worst_edge = 0.0
    for j, (name, g) in enumerate(zip(sim.names, sim.grids)):
        m = s.vlasov_mass[:, j]
        l2 = s.vlasov_l2[:, j]
        m0 = float(m[0]) if m.size else None
        edge = float(np.max(s.vlasov_edge_mass[:, j]) / m0) if m0 else None
        worst_edge = max(worst_edge, edge or 0.0)
        out["species"][name] = {
            "u_min": g.u_min, "u_max": g.u_max, "du": g.du, "automatic": g.automatic,
            "recurrence_time_mode1": None,
            "mass_relative_error_max": float(np.max(np.abs(m - m0)) / m0) if m0 else None,
            "l1_relative_change_max": float(np.max(np.abs(s.vlasov_l1[:, j] - s.vlasov_l1[0, j]))
                                            / s.vlasov_l1[0, j]) if m0 else None,
            "l2_relative_change": float(l2[-1] / l2[0] - 1.0) if l2.size else None,
            "f_min": float(np.min(s.vlasov_f_min[:, j])) if m.size else None,
            "edge_mass_fraction_max": edge}
        v = g.centres / np.sqrt(1.0 + g.centres**2)
        dv = float(np.max(np.abs(np.diff(v)))) if v.size > 1 else None
        k1 = 2.0 * np.pi / sim.deck.box.length
        # recurrence of the first box mode on this grid: t_R = 2 pi / (k dv), dv the largest
        # velocity step of the grid (Cheng & Knorr 1976)
        out["species"][name]["recurrence_time_mode1"] = 2.0 * np.pi / (k1 * dv) if dv else None
    if worst_edge > EDGE_WARN:
        say(f"f reaches the edge of a momentum grid (up to {worst_edge:.2g} of a species' mass "
            f"in its outermost cells): widen vlasov.u_min/u_max or raise vlasov.widen")
    return out
