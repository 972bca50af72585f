"""Phase-space block: no numbers, one figure of the recorded (x, u) subsample.

Figure: ``phase_space.png``.
"""
from __future__ import annotations

import numpy as np

from ... import units
from ..base import BlockResult, Context, Figure

NAME = "phase_space"
SCAN_COLUMNS: list = []


def compute(ctx: Context) -> BlockResult:
    return BlockResult(NAME, {}, {}, [Figure("phase_space.png", "x-u phase space of each "
                                             "species at a few times", _draw)])


def _draw(res: BlockResult, data):
    from matplotlib.lines import Line2D

    from ...plots import WP, X_LABEL, length_cm_axis, message_figure, plt
    dist = (data.extra or {}).get("distribution")
    if dist is not None and len(dist["t"]):
        return _draw_continuum(dist, data)
    ps = data.phase_space
    t = np.asarray(ps.t, float) if ps is not None else np.array([])
    n_t = min(4, t.size)
    if n_t == 0:
        return message_figure("no phase-space samples in this run")
    pick = np.unique(np.linspace(0, t.size - 1, n_t).round().astype(int))
    fig, axes = plt.subplots(len(pick), 1, figsize=(7, 2.2 * len(pick)), sharex=True,
                             squeeze=False)
    colours = plt.rcParams["axes.prop_cycle"].by_key()["color"]
    for ax, i in zip(axes[:, 0], pick):
        for j, name in enumerate(data.names):
            x = np.asarray(ps.x.get(name, []))
            u = np.asarray(ps.u.get(name, []))
            if x.ndim == 2 and x.shape[0] > i:
                ax.plot(x[i], u[i], ",", alpha=0.6, color=colours[j % len(colours)])
        ax.set_ylabel(r"momentum $u = \gamma\beta$ [$m c$]")
        ax.text(0.01, 0.88, f"$t$ = {t[i]:.4g}/{WP} = "
                f"{units.time_ns(float(t[i]), data.deck.units.density_cm3):.3g} ns",
                transform=ax.transAxes, fontsize=8,
                bbox=dict(facecolor="w", alpha=0.7, lw=0))
    # pixel markers cannot be scaled in a legend: proxy handles with visible markers
    handles = [Line2D([], [], ls="none", marker="o", ms=6, color=colours[j % len(colours)],
                      label=name) for j, name in enumerate(data.names)]
    axes[0, 0].legend(handles=handles, loc="upper right", fontsize=8, framealpha=0.85)
    axes[-1, 0].set_xlabel(X_LABEL)
    axes[-1, 0].set_xlim(0, data.length)
    length_cm_axis(axes[0, 0], data.deck.units.density_cm3)
    fig.suptitle("phase space")
    return fig


def _draw_continuum(dist, data):
    """f_s(x, u) of a Vlasov run at up to four of its field-cadence times, one column per
    species (log colour scale over four decades below each panel's maximum)."""
    from matplotlib.colors import LogNorm

    from ...plots import WP, X_LABEL, length_cm_axis, plt
    t = np.asarray(dist["t"], float)
    pick = np.unique(np.linspace(0, t.size - 1, min(4, t.size)).round().astype(int))
    S = len(dist["f"])
    fig, axes = plt.subplots(len(pick), S, figsize=(5 * S, 2.2 * len(pick)), sharex=True,
                             squeeze=False)
    for r, i in enumerate(pick):
        for s in range(S):
            ax = axes[r, s]
            f = np.asarray(dist["f"][s][i], float)
            g = dist["grids"][s]
            top = float(f.max()) if f.size and f.max() > 0 else 1.0
            im = ax.imshow(np.clip(f / top, 1e-4, None), origin="lower", aspect="auto",
                           extent=(0.0, data.length, g.u_min, g.u_max),
                           norm=LogNorm(vmin=1e-4, vmax=1.0), cmap="viridis")
            fig.colorbar(im, ax=ax, pad=0.01, label=r"$f / f_{max}$")
            ax.text(0.01, 0.88, f"{data.names[s]}, $t$ = {t[i]:.4g}/{WP} = "
                    f"{units.time_ns(float(t[i]), data.deck.units.density_cm3):.3g} ns",
                    transform=ax.transAxes, fontsize=8, color="w")
            if s == 0:
                ax.set_ylabel(r"momentum $u = \gamma\beta$ [$m c$]")
    for s in range(S):
        axes[-1, s].set_xlabel(X_LABEL)
        length_cm_axis(axes[0, s], data.deck.units.density_cm3)
    fig.suptitle("phase space: f(x, u) of the continuum run")
    return fig
