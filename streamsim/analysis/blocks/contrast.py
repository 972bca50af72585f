"""Contrast block: max and rms delta n/n against time per species and for the pair total,
the saturation level and the clump-formation time t_unity (first max delta n/n >= 1).

Summary key: ``contrast``. Table: ``contrast``. Figure: ``contrast.png``.
"""
from __future__ import annotations

import numpy as np

from ... import units
from .. import contrast as _ct
from ..base import BlockResult, Context, Figure, ScanColumn, Table, fmt

NAME = "contrast"

SCAN_COLUMNS = [
    ScanColumn("t_unity_ns", "ns", "first time max delta n/n reaches 1 (clump formation)",
               ("contrast", "t_unity_ns")),
    ScanColumn("contrast_max", "", "maximum delta n/n over the run", ("contrast", "max")),
]


def compute(ctx: Context) -> BlockResult:
    data, n_cm3 = ctx.data, ctx.density_cm3
    s = data.series
    names = list(data.names)
    block = _ct.contrast_block(s, names, n_cm3)
    t = np.asarray(s.t, float)
    cmax = np.asarray(s.contrast_max, float)
    crms = np.asarray(s.contrast_rms, float)
    cols = {"t": t, "t_ns": t * units.time_ns(1.0, n_cm3)}
    for j, name in enumerate(names + ["total"]):
        cols[f"max_{name}"] = cmax[:, j]
    for j, name in enumerate(names + ["total"]):
        cols[f"rms_{name}"] = crms[:, j]
    table = Table("contrast", cols, units={"t": "1/omega_p", "t_ns": "ns"},
                  attrs={"columns": ",".join(names + ["total"])})
    return BlockResult(NAME, {"contrast": block}, {"contrast": table},
                       [Figure("contrast.png", "max and rms delta n/n vs time per species and "
                               "for the total", _draw)], [_line(block)])


def _line(c: dict) -> str:
    if c.get("max") is None:
        return "density contrast: not recorded"
    if c.get("t_unity") is not None:
        return (f"clumps form (max dn/n >= 1) at t = {fmt(c['t_unity'])} /w_p = "
                f"{fmt(c.get('t_unity_ns'))} ns; max dn/n = {fmt(c['max'], '.3g')} "
                f"at t = {fmt(c.get('t_max'))} /w_p")
    return (f"no clump formation: max dn/n = {fmt(c['max'], '.3g')} < 1 "
            f"(at t = {fmt(c.get('t_max'))} /w_p)")


def _draw(res: BlockResult, data):
    from ...plots import plt
    tab = res.tables["contrast"]
    t = tab.col("t")
    fig, ax = plt.subplots(figsize=(7, 4.5))
    for name in tab.attrs["columns"].split(","):
        cmax, crms = tab.col(f"max_{name}"), tab.col(f"rms_{name}")
        line, = ax.semilogy(t, np.where(cmax > 0, cmax, np.nan), lw=1.2, label=f"max, {name}")
        ax.semilogy(t, np.where(crms > 0, crms, np.nan), "--", lw=0.9, color=line.get_color(),
                    label=f"rms, {name}")
    ax.axhline(1.0, color="0.5", lw=0.8, ls=":")
    c = res.summary["contrast"]
    if c.get("t_unity") is not None:
        ax.axvline(c["t_unity"], color="0.5", lw=0.8)
        ax.text(c["t_unity"], 1.05, f" max dn/n = 1 at t = {c['t_unity']:.4g} /w_p "
                f"({c['t_unity_ns']:.3g} ns)", fontsize=8)
    ax.set_xlabel("t [1/w_p]")
    ax.set_ylabel("delta n / n")
    ax.set_title("density contrast")
    ax.legend(fontsize=7, ncol=2)
    return fig
