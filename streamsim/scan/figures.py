"""Figures of a scan (matplotlib, Agg, PNG, written atomically) in <scan>/figures/.

- ``growth_time_vs_<axis>.png``: measured e-folding time (ns) against the axis, one line per
  combination of the other axes; markers are the mean over replicas with the standard deviation
  of the replicas as error bars (one replica: the fit's 1-sigma error); the line is the linear
  theory for the same box mode, the dashed line the theory's fastest mode.
- ``nu_c_vs_<axis>.png``: the coherence cutoff frequency nu_c (GHz) against the axis; where it is
  grid-limited, its lower bound as an upward arrow.
- ``growth_time_map.png`` (two axes, product scan): measured growth time and measured/theory
  over the two axes.
"""
from __future__ import annotations

import re
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

__all__ = ["make_figures", "replica_stats", "draw_growth_vs_axis", "draw_nu_c_vs_axis",
           "draw_map", "axis_label", "COLUMNS"]

MAX_LINES = 12

# The scan-table columns the figures read, in one place (a renamed column is fixed here alone).
COLUMNS = {
    "growth_time": "growth.growth_time_ns",
    "growth_time_err": "growth.growth_time_err_ns",
    "theory_growth_time": "growth.theory_growth_time_ns",
    "theory_fastest_growth_time": "theory.fastest.growth_time_ns",
    "growth_ratio": "growth.ratio",
    "nu_c": "coherence.frequency_cutoff_hz",
    "nu_c_err": "coherence.frequency_cutoff_err_hz",
    "nu_c_lower_bound": "coherence.frequency_cutoff_lower_bound_hz",
    "bulk_gamma": "coherence.bulk_gamma",
}

# Units of the deck keys a scan axis may name, by the end of the key (the unit is part of the
# physical keys' names) or by the whole key (normalised keys); mathtext.
_UNIT_SUFFIXES = (("_cm3", r"cm$^{-3}$"), ("_kev", "keV"), ("_cm", "cm"), ("_ns", "ns"),
                  ("_hz", "Hz"), ("_beta", r"$c$"), ("beta", r"$c$"), ("drift_u", r"$m_e c$"),
                  ("_u", r"$m_e c$"))
_UNIT_KEYS = {"box.length": r"$c/\omega_p$", "time.end": r"$1/\omega_p$",
              "time.dt": r"$1/\omega_p$", "drive.current": r"$e n_{ref} c$",
              "drive.angular_frequency": r"$\omega_p$", "theta": r"$m_e c^2$",
              "temperature": r"$m_e c^2$"}


def axis_label(axis) -> str:
    """The label of a scan axis: its name and, where the key has one, its unit."""
    keys = list(getattr(axis, "keys", None) or []) + [axis.name]
    for k in keys:
        if k in _UNIT_KEYS:
            return f"{axis.name} [{_UNIT_KEYS[k]}]"
        leaf = k.rsplit(".", 1)[-1]
        if leaf in _UNIT_KEYS:
            return f"{axis.name} [{_UNIT_KEYS[leaf]}]"
        for suffix, unit in _UNIT_SUFFIXES:
            if leaf.endswith(suffix):
                return f"{axis.name} [{unit}]"
    return f"{axis.name} [dimensionless]"


def _save(fig, path: Path) -> Path:
    from ..io import save_figure
    return save_figure(fig, path)


def _slug(name: str) -> str:
    return re.sub(r"[^A-Za-z0-9]+", "_", name).strip("_") or "axis"


def replica_stats(rows: list[dict], column: str, err_column: str | None = None,
                  scale: float = 1.0) -> dict:
    """{point: (mean, error, n)} over the completed replicas of each point with a value.

    error: the sample standard deviation of the replicas (n >= 2), else the row's own error
    column (the fit's 1-sigma), else None."""
    by_point: dict[int, list[dict]] = {}
    for r in rows:
        if r.get("status") == "completed" and r.get(column) is not None:
            by_point.setdefault(r["point"], []).append(r)
    out = {}
    for p, rs in by_point.items():
        v = np.array([r[column] for r in rs], dtype=float)
        if v.size >= 2:
            err = float(np.std(v, ddof=1))
        else:
            err = rs[0].get(err_column) if err_column else None
        out[p] = (float(v.mean()) * scale, None if err is None else float(err) * scale,
                  int(v.size))
    return out


def _first(rows: list[dict], column: str, scale: float = 1.0) -> dict:
    """{point: value} of a column that is the same for every replica (theory)."""
    out = {}
    for r in rows:
        if r.get(column) is not None and r["point"] not in out:
            out[r["point"]] = r[column] * scale
    return out


def _groups(scan, rows, i: int):
    """Points grouped by the values of the other axes -> {label: [(x, point), ...]}."""
    groups: dict[tuple, list] = {}
    seen = set()
    for r in rows:
        if r["point"] in seen:
            continue
        seen.add(r["point"])
        others = tuple((a.name, r[a.name]) for j, a in enumerate(scan.axes) if j != i)
        groups.setdefault(others, []).append((r[scan.axes[i].name], r["point"]))
    out = {}
    for others, pts in groups.items():
        label = ", ".join(f"{n} = {_fmt(v)}" for n, v in others) or None
        out[label] = sorted(pts, key=lambda t: t[0])
    return out


def _fmt(v) -> str:
    return format(v, ".3g") if isinstance(v, float) else str(v)


def _line_plot(scan, rows, i, ax, column, err_column, theory_columns, ylabel, scale=1.0,
               extra=()):
    axis = scan.axes[i]
    stats = replica_stats(rows, column, err_column, scale)
    theories = [(_first(rows, c, scale), style, lab) for c, style, lab in theory_columns]
    groups = _groups(scan, rows, i)
    colours = plt.rcParams["axes.prop_cycle"].by_key()["color"]
    drawn = 0
    for g, (label, pts) in enumerate(list(groups.items())[:MAX_LINES]):
        col = colours[g % len(colours)]
        xs = [x for x, p in pts if p in stats]
        if xs:
            ys = [stats[p][0] for x, p in pts if p in stats]
            es = [stats[p][1] if stats[p][1] is not None else 0.0 for x, p in pts if p in stats]
            ax.errorbar(xs, ys, yerr=es, fmt="o", color=col, capsize=3, ms=5,
                        label=("measured" + (f" ({label})" if label else "")))
            drawn += 1
        for values, style, tlabel in theories:
            tx = [x for x, p in pts if p in values]
            ty = [values[p] for x, p in pts if p in values]
            if tx:
                ax.plot(tx, ty, style, color=col, lw=1.2,
                        label=tlabel if g == 0 else None)
                drawn += 1
    if len(groups) > MAX_LINES:
        ax.set_title(f"first {MAX_LINES} of {len(groups)} lines", fontsize=8)
    ax.set_xlabel(axis_label(axis))
    ax.set_ylabel(ylabel)
    if axis.log:
        ax.set_xscale("log")
    ys_all = ([s[0] for s in stats.values()] + [v for vals, _, _ in theories for v in vals.values()]
              + list(extra))
    if ys_all and min(ys_all) > 0 and max(ys_all) / min(ys_all) > 10:
        ax.set_yscale("log")
    else:
        ax.ticklabel_format(axis="y", useOffset=False, style="plain")
    if drawn:   # beside the axes: the lines often fill the whole frame
        ax.legend(fontsize=7, loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0)
    else:
        ax.text(0.5, 0.5, "no completed run has this value", ha="center", va="center",
                transform=ax.transAxes)


def draw_growth_vs_axis(scan, rows, i):
    """The figure growth_time_vs_<axis>.png (returned, not saved)."""
    fig, ax = plt.subplots(figsize=(9.5, 4.5))
    _line_plot(scan, rows, i, ax, COLUMNS["growth_time"], COLUMNS["growth_time_err"],
               [(COLUMNS["theory_growth_time"], "-", "theory, same box mode"),
                (COLUMNS["theory_fastest_growth_time"], "--", "theory, fastest mode")],
               r"growth time $1/\gamma$ [ns]")
    fig.suptitle(f"{scan.title}: e-folding time of the field vs {scan.axes[i].name}", fontsize=10)
    return fig


def _growth_vs_axis(scan, rows, i, folder) -> Path:
    return _save(draw_growth_vs_axis(scan, rows, i),
                 folder / f"growth_time_vs_{_slug(scan.axes[i].name)}.png")


def _lower_bounds(scan, rows, i, ax, column: str, scale: float = 1.0) -> int:
    """Draw the grid-limited lower bounds of ``column`` as upward arrows (a bound, not a value);
    returns how many points were drawn."""
    stats = replica_stats(rows, column, scale=scale)
    if not stats:
        return 0
    xs = {}
    for r in rows:
        xs.setdefault(r["point"], r[scan.axes[i].name])
    px = [xs[p] for p in stats]
    py = [stats[p][0] for p in stats]
    ax.errorbar(px, py, yerr=[[0.0] * len(py), [0.3 * y for y in py]], lolims=True, fmt="^",
                color="0.3", ms=6, capsize=0, ls="none",
                label="lower bound (grid-limited: raise box.cells or warm the beams)")
    return len(py)


def draw_nu_c_vs_axis(scan, rows, i):
    """The figure nu_c_vs_<axis>.png (returned, not saved): nu_c in GHz."""
    fig, ax = plt.subplots(figsize=(9.5, 4.5))
    bounds = [v[0] for v in replica_stats(rows, COLUMNS["nu_c_lower_bound"], scale=1e-9).values()]
    _line_plot(scan, rows, i, ax, COLUMNS["nu_c"], COLUMNS["nu_c_err"], [],
               r"coherence cutoff $\nu_c$ [GHz]", scale=1e-9, extra=bounds)
    if _lower_bounds(scan, rows, i, ax, COLUMNS["nu_c_lower_bound"], scale=1e-9):
        for t in ax.texts:
            if t.get_text() == "no completed run has this value":
                t.remove()
        ax.legend(fontsize=7, loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0)
    gb = COLUMNS["bulk_gamma"]
    gammas = sorted({r[gb] for r in rows if r.get(gb) is not None})
    g = ", ".join(_fmt(v) for v in gammas) if gammas else "n/a"
    fig.suptitle(f"{scan.title}: " + r"$\nu_c = \Gamma c k_c / 2\pi$" + f" ($\\Gamma$ = {g}) "
                 f"vs {scan.axes[i].name}", fontsize=10)
    return fig


def _nu_c_vs_axis(scan, rows, i, folder) -> Path:
    return _save(draw_nu_c_vs_axis(scan, rows, i),
                 folder / f"nu_c_vs_{_slug(scan.axes[i].name)}.png")


def _edges(values, log: bool) -> np.ndarray:
    v = np.asarray(values, dtype=float)
    if v.size == 1:
        return np.array([v[0] * 0.5, v[0] * 1.5]) if log else np.array([v[0] - 0.5, v[0] + 0.5])
    w = np.log(v) if log else v
    mid = 0.5 * (w[1:] + w[:-1])
    e = np.concatenate([[w[0] - (mid[0] - w[0])], mid, [w[-1] + (w[-1] - mid[-1])]])
    return np.exp(e) if log else e


def _map(scan, rows, folder) -> Path | None:
    fig = draw_map(scan, rows)
    return None if fig is None else _save(fig, folder / "growth_time_map.png")


def draw_map(scan, rows):
    """The figure growth_time_map.png (returned, not saved), or None for a non-numeric axis."""
    a, b = scan.axes
    if not (a.numeric and b.numeric):
        return None
    order_a = np.argsort(a.values)
    order_b = np.argsort(b.values)
    stats = replica_stats(rows, COLUMNS["growth_time"])
    ratio = replica_stats(rows, COLUMNS["growth_ratio"])
    point_of = {}
    for r in rows:
        point_of[(r[f"{a.name}#index"], r[f"{b.name}#index"])] = r["point"]
    fig, axes = plt.subplots(1, 2, figsize=(11, 4.5))
    for ax, st, title, cmap, norm in (
            (axes[0], stats, r"growth time $1/\gamma$ [ns]", "viridis", "log"),
            (axes[1], ratio, "measured / theory growth [dimensionless]", "coolwarm", None)):
        grid = np.full((len(b.values), len(a.values)), np.nan)
        for ia, ja in enumerate(order_a):
            for ib, jb in enumerate(order_b):
                p = point_of.get((int(ja), int(jb)))
                if p in st:
                    grid[ib, ia] = st[p][0]
        xe = _edges(np.asarray(a.values, float)[order_a], a.log)
        ye = _edges(np.asarray(b.values, float)[order_b], b.log)
        finite = grid[np.isfinite(grid)]
        kw = {}
        if norm == "log" and finite.size and finite.min() > 0:
            kw["norm"] = matplotlib.colors.LogNorm(vmin=finite.min(), vmax=finite.max())
        if norm is None and finite.size:
            d = max(abs(finite.max() - 1.0), abs(finite.min() - 1.0), 1e-3)
            kw["vmin"], kw["vmax"] = 1.0 - d, 1.0 + d
        mesh = ax.pcolormesh(xe, ye, np.ma.masked_invalid(grid), cmap=cmap, shading="flat", **kw)
        fig.colorbar(mesh, ax=ax, label=title)
        if a.log:
            ax.set_xscale("log")
        if b.log:
            ax.set_yscale("log")
        ax.set_xlabel(axis_label(a))
        ax.set_ylabel(axis_label(b))
        ax.set_title(title + " (blank: no fit)", fontsize=9)
        if not finite.size:
            ax.text(0.5, 0.5, "no completed run has this value", ha="center", va="center",
                    transform=ax.transAxes)
    fig.suptitle(f"{scan.title}: mean over replicas", fontsize=10)
    return fig


def make_figures(scan, rows: list[dict], folder) -> list[Path]:
    folder = Path(folder)
    written = []
    for i, a in enumerate(scan.axes):
        if not a.numeric:
            continue
        written.append(_growth_vs_axis(scan, rows, i, folder))
        written.append(_nu_c_vs_axis(scan, rows, i, folder))
    if len(scan.axes) == 2 and scan.combine == "product":
        m = _map(scan, rows, folder)
        if m is not None:
            written.append(m)
    return written
