"""Clumps block: connected overdense regions (delta n/n above ``analysis.clump_threshold``) at
the maximum contrast and at the end, from the particle positions kept at those instants
(deposited CIC on a grid finer than the simulation grid, the same instant as the form factor); their widths (FWHM), masses and
positions, the size spectrum and the density power spectrum P(k).

Summary key: ``clumps``. Tables: ``clumps``, ``clump_sizes``, ``density_spectrum``.
Figure: ``clumps.png``.
"""
from __future__ import annotations

import numpy as np

from ... import units
from .. import clumps as _cl
from ..base import BlockResult, Context, Figure, ScanColumn, Table, at_ns, fmt

NAME = "clumps"

SCAN_COLUMNS = [
    ScanColumn(("clumps", "count"), "", "clumps at the analysed snapshot"),
    ScanColumn(("clumps", "size_median_cm"), "cm", "median clump size"),
    ScanColumn(("clumps", "size_median_err_cm"), "cm", "error of the median clump size (window "
               "budget: clump-to-clump and window terms)"),
    ScanColumn(("clumps", "grid_limited"), "", "1 when the median clump is narrower than "
               "analysis.clump_grid_cells cells: the size is set by the grid (an upper bound)"),
]

_CLUMP_COLUMNS = ("position", "position_cm", "width", "width_cm", "extent", "peak", "mass",
                  "fraction", "excess")


def _snapshot_choice(density: np.ndarray) -> list[tuple[str, int]]:
    """(label, index): the density snapshot with the largest max delta n/n of any species, and
    the last one."""
    dens = np.asarray(density, float)
    if dens.ndim != 3 or dens.shape[0] == 0:
        return []
    mean = dens.mean(axis=2, keepdims=True)
    with np.errstate(divide="ignore", invalid="ignore"):
        dmax = np.nanmax(np.where(mean > 0, dens / mean - 1.0, np.nan), axis=2)
    score = np.nanmax(np.where(np.isfinite(dmax), dmax, -np.inf), axis=1)
    return [("peak", int(np.argmax(score))), ("end", dens.shape[0] - 1)]


def _sources(data):
    """(label, t, {species: density on the measuring grid}, nodes, how) for the maximum contrast
    and the end: from the particle positions (deposited CIC on a grid ``refinement`` times finer
    than the simulation grid) when the run kept them, the continuum density at the contrast
    maximum for a Vlasov run, else the field-cadence density snapshot of maximum contrast."""
    out = []
    snaps = {"peak": data.peak, "end": data.end}
    if data.peak is not None:
        ppc = min((s.particles_per_cell for s in data.deck.species), default=1)
        r = _cl.refinement(ppc)
        nodes = data.cells * r
        for label, snap in snaps.items():
            if snap is None:
                continue
            dens = {}
            for name in data.names:
                x = snap.x.get(name)
                if x is not None and len(x):
                    dens[name] = _cl.deposit_cic(x, data.length, nodes,
                                                 float(snap.weight.get(name, 1.0)))
            out.append((label, float(snap.t), dens, nodes,
                        f"particle positions deposited (CIC) on {nodes} nodes "
                        f"({r} per simulation cell)"))
        return out
    if getattr(data, "peak_density", None) is not None:   # a continuum run: its own density
        for label, prof in (("peak", data.peak_density), ("end", data.end_density)):
            if prof is None:
                continue
            dens = {name: np.asarray(prof.density[s], float) for s, name in enumerate(data.names)}
            out.append((label, float(prof.t), dens, data.cells,
                        "continuum density at the contrast maximum (grid nodes)"))
        return out
    sn = data.snapshots
    for label, i in _snapshot_choice(sn.density):
        dens = {name: np.asarray(sn.density[i][s], float) for s, name in enumerate(data.names)}
        out.append((label, float(sn.t[i]), dens, data.cells,
                    "field-cadence density snapshot nearest the maximum (no particle positions)"))
    return out


def compute(ctx: Context) -> BlockResult:
    data, n_cm3 = ctx.data, ctx.density_cm3
    threshold = ctx.options.clump_threshold
    grid_cells = ctx.options.clump_grid_cells
    dx = data.length / data.cells
    skin = units.skin_depth_cm(n_cm3)
    clump_rows, size_rows, spec_rows = [], [], []
    per = {}
    for label, t, dens, nodes, how in _sources(data):
        h = data.length / nodes
        entry = {"t": t, "t_ns": units.time_ns(t, n_cm3), "measured_on": how, "nodes": nodes,
                 "by_species": {}}
        widths_all = []
        spectra = {}
        for name, n_s in dens.items():
            cl = _cl.find_clumps(n_s, data.length, threshold)
            for j, c in enumerate(cl):
                c["width_cm"] = units.length_cm(c["width"], n_cm3)
                c["position_cm"] = units.length_cm(c["position"], n_cm3)
                clump_rows.append((label, t, name, j, c))
            w = [c["width"] for c in cl]
            widths_all += w
            med = float(np.median(w)) if w else None
            entry["by_species"][name] = {
                "count": len(cl), "size_median": med,
                "size_median_cm": units.length_cm(med, n_cm3) if med is not None else None,
                "peak_max": max((c["peak"] for c in cl), default=None)}
            spectra[name] = _cl.density_power_spectrum(n_s, data.length)[1]
        if not dens:
            continue
        total = sum(dens.values())
        k, spectra["total"] = _cl.density_power_spectrum(total, data.length)
        for name in data.names:
            spectra.setdefault(name, np.full(k.size, np.nan))
        spectra = {n: spectra[n] for n in list(data.names) + ["total"]}
        edges, counts = _cl.size_histogram(widths_all, h, data.length)
        for b, c in enumerate(counts):
            size_rows.append((label, t, edges[b], edges[b + 1], int(c)))
        for m in range(k.size):
            spec_rows.append((label, t, m, k[m], *(spectra[n][m] for n in spectra)))
        med = float(np.median(widths_all)) if widths_all else None
        err = _cl.median_bootstrap(widths_all)
        entry.update({"count": len(widths_all), "size_median": med,
                      "size_median_cm": units.length_cm(med, n_cm3) if med is not None else None,
                      "size_median_err": err,
                      "size_median_err_cm": units.length_cm(err, n_cm3) if err is not None
                      else None,
                      "size_median_cells": med / dx if med is not None else None,
                      "histogram": {"edges": edges, "edges_cm": edges * skin, "counts": counts}})
        per[label] = entry
    head = dict(per.get("peak") or {"count": 0, "size_median": None, "size_median_cm": None,
                                    "size_median_err": None, "size_median_err_cm": None})
    head["threshold"] = threshold
    head["snapshot"] = "peak" if "peak" in per else None
    head["definition"] = ("connected regions with delta n/n > threshold (periodic), any "
                          "species, at the maximum contrast; size = FWHM")
    head["error_estimator"] = (f"bootstrap over the clumps ({_cl.BOOTSTRAP} resamples): the "
                               "standard deviation of the median FWHM")
    win = _window(ctx, skin, dx)
    if win is not None:
        head = {"peak_snapshot": per.get("peak"), **win[0]}
        head["threshold"] = threshold
        size_rows += win[1]
    med = head.get("size_median")
    head["grid_cells_limit"] = grid_cells
    head["grid_limited"] = bool(med is not None and med < grid_cells * dx)
    head["grid_limit_test"] = (f"median FWHM < analysis.clump_grid_cells = {grid_cells:g} "
                               f"simulation cells ({grid_cells * dx:.3g} c/omega_p)")
    cold = [s.name for s in data.deck.species if s.is_cold]
    head["cold_species"] = cold
    head["cold_note"] = ("a cold beam has no intrinsic clump scale: its caustics are as thin as "
                         "the grid allows, so clump widths and k_c of cold species are set by "
                         "box.cells") if cold else None
    head["end"] = per.get("end")
    head["end_snapshot"] = per.get("end")
    tables = {
        "clumps": Table("clumps", {
            "snapshot": np.array([r[0] for r in clump_rows], dtype=object),
            "t": np.array([r[1] for r in clump_rows], float),
            "species": np.array([r[2] for r in clump_rows], dtype=object),
            "index": np.array([r[3] for r in clump_rows], int),
            **{c: np.array([r[4].get(c, np.nan) for r in clump_rows], float)
               for c in _CLUMP_COLUMNS}},
            units={"t": "1/omega_p", "position": "c/omega_p", "width": "c/omega_p",
                   "extent": "c/omega_p", "position_cm": "cm", "width_cm": "cm"}),
        "clump_sizes": Table("clump_sizes", {
            "snapshot": np.array([r[0] for r in size_rows], dtype=object),
            "t": np.array([r[1] for r in size_rows], float),
            "width_lo": np.array([r[2] for r in size_rows], float),
            "width_hi": np.array([r[3] for r in size_rows], float),
            "width_lo_cm": np.array([r[2] * skin for r in size_rows], float),
            "width_hi_cm": np.array([r[3] * skin for r in size_rows], float),
            "count": np.array([r[4] for r in size_rows], int)},
            units={"width_lo": "c/omega_p", "width_hi": "c/omega_p", "width_lo_cm": "cm",
                   "width_hi_cm": "cm"}),
    }
    spec_names = list(data.names) + ["total"]
    tables["density_spectrum"] = Table("density_spectrum", {
        "snapshot": np.array([r[0] for r in spec_rows], dtype=object),
        "t": np.array([r[1] for r in spec_rows], float),
        "mode": np.array([r[2] for r in spec_rows], int),
        "k": np.array([r[3] for r in spec_rows], float),
        "k_per_cm": np.array([r[3] / skin for r in spec_rows], float),
        **{f"P_{n}": np.array([r[4 + j] for r in spec_rows], float)
           for j, n in enumerate(spec_names)}},
        units={"k": "omega_p/c", "k_per_cm": "1/cm"})
    return BlockResult(NAME, {"clumps": head}, tables,
                       [Figure("clumps.png", "clump size spectrum and density power spectrum "
                               "P(k)", _draw)], _lines(head, n_cm3),
                       values={"grid_limited": bool(head.get("grid_limited"))})


def _window(ctx: Context, skin: float, dx: float):
    """(headline entries, size-histogram rows) of the clump sizes pooled over the saturated
    window (emission block), or None when it has no clumps there."""
    em = ctx.results.get("emission")
    e = em.values.get("window") or {} if em is not None else {}
    if not e or e.get("size_median") is None:
        return None
    tab = em.tables["emission_clumps"]
    sel = tab.col("in_window").astype(bool)
    widths = tab.col("width")[sel]
    per_rec = ctx.results["emission"].tables["emission_series"]
    counts = per_rec.col("clumps")[per_rec.col("in_window").astype(bool)]
    w = e["window"]
    data = ctx.data
    h = data.length / max(1, int(e.get("records", {}).get("nodes") or data.cells))
    edges, hist = _cl.size_histogram(list(widths), h, data.length)
    rows = [("window", float(w["t0"]), edges[b], edges[b + 1], int(c))
            for b, c in enumerate(hist)]
    med = e["size_median"]
    return ({"snapshot": "window", "t": w["t0"], "t_ns": w.get("t0_ns"),
             "window": {k: w.get(k) for k in ("t0", "t1", "t0_ns", "t1_ns", "records",
                                              "long_enough", "end_needed", "end_needed_ns")},
             "count": int(round(float(np.mean(counts)))) if counts.size else 0,
             "count_pooled": int(widths.size),
             "size_median": med, "size_median_cm": e["size_median_cm"],
             "size_median_err": e["size_median_err"],
             "size_median_err_cm": e["size_median_err_cm"],
             "size_median_budget_cm": e.get("size_median_budget_cm"),
             "size_median_cells": med / dx,
             "histogram": {"edges": edges, "edges_cm": edges * skin, "counts": hist},
             "measured_on": e.get("records", {}).get("source"),
             "definition": "connected regions with delta n/n > threshold (periodic), any "
                           "species, at every emission record of the saturated window, pooled; "
                           "size = FWHM; count = the mean number per record (rounded)",
             "error_estimator": "quadrature sum of the clump-to-clump bootstrap of the pooled "
                                "median and the block jackknife over the window's records (and "
                                "the replica scatter with replicas); see size_median_budget_cm",
             "headline": "clump sizes pooled over the saturated window; peak_snapshot and "
                         "end_snapshot are single instants"}, rows)


def _lines(cl: dict, n_cm3: float) -> list[str]:
    out = []
    if cl.get("count"):
        err = cl.get("size_median_err_cm")
        pm = f" +- {err:.2g}" if err is not None else ""
        w = cl.get("window")
        when = (f"per record over the saturated window [{fmt(w.get('t0'), '.4g')}, "
                f"{fmt(w.get('t1'), '.4g')}] /omega_p" if cl.get("snapshot") == "window" and w
                else f"at t = {at_ns(cl.get('t'), n_cm3)}")
        dom = (cl.get("size_median_budget_cm") or {}).get("dominant")
        line = (f"clumps (delta n/n > {fmt(cl.get('threshold'), 'g')}): {cl['count']} {when}, "
                f"median FWHM {fmt(cl.get('size_median'), '.3g')} "
                f"c/omega_p = {fmt(cl.get('size_median_cm'), '.3g')}{pm} cm"
                + (f" (largest error term: {dom})" if dom else ""))
        if cl.get("grid_limited"):
            fix = ("give the beams a temperature or raise box.cells" if cl.get("cold_species")
                   else "raise box.cells")
            line += (f" -- grid-limited: {fmt(cl.get('size_median_cells'), '.2g')} cells wide "
                     f"(< {fmt(cl.get('grid_cells_limit'), 'g')}), the size is set by the grid; "
                     f"{fix}")
        out.append(line)
    else:
        out.append(f"no clump above delta n/n > {fmt(cl.get('threshold'), 'g')}")
    if cl.get("cold_species"):
        out.append(f"  cold species ({', '.join(cl['cold_species'])}): {cl['cold_note']}")
    return out


def _draw(res: BlockResult, data):
    from ...plots import (DN, K_LABEL, WP, legend, log_limits, plot_positive, plt,
                          quiet_log_minor, say_empty)
    n_cm3 = float(data.deck.units.density_cm3)
    skin = units.skin_depth_cm(n_cm3)
    cl = res.summary["clumps"]
    fig, (a1, a2) = plt.subplots(1, 2, figsize=(12, 4.6))
    sizes = res.tables["clump_sizes"]
    for lab, text in (("window", "saturated window (pooled)"), ("peak", "max contrast"),
                      ("end", "end")):
        part = sizes.where("snapshot", lab)
        if len(part) and part.col("count").sum() > 0:
            edges = np.append(part.col("width_lo"), part.col("width_hi")[-1]) * skin
            a1.stairs(part.col("count"), edges, lw=1.5,
                      label=f"{text}, $t$ = {part.col('t')[0]:.4g}/{WP}")
    a1.set_xlabel("clump width (FWHM) [cm]")
    a1.set_ylabel("clumps per bin")
    if cl.get("threshold") is not None:
        a1.set_title(f"clump sizes ({DN} > {cl['threshold']:g})", fontsize=10, pad=32)
    sec = a1.secondary_xaxis("top", functions=(lambda x: x / skin, lambda x: x * skin))
    sec.set_xlabel(r"width [$c/\omega_p$]")
    if a1.get_legend_handles_labels()[0]:
        lo, hi = a1.get_xlim()
        if hi > 0 and lo > 0 and hi / lo > 30:
            a1.set_xscale("log")
        legend(a1, fontsize=8)
    else:
        say_empty(a1, "no clump above the threshold")
    spec = res.tables["density_spectrum"]
    curves = []
    for lab, text in (("peak", "max contrast"), ("end", "end")):
        part = spec.where("snapshot", lab)
        if not len(part):
            continue
        k = part.col("k")
        for name in data.names:
            P = part.col(f"P_{name}")[1:]
            curves.append(P)
            plot_positive(a2, k[1:], P, lw=1, ls="-" if lab != "end" else "--",
                          label=f"{name}, {text}")
    a2.set_xlabel(K_LABEL)
    a2.set_ylabel(f"$P(k)$ of {DN} [dimensionless]")
    a2.set_title("density power spectrum", fontsize=10)
    # six decades below the strongest mode: below that lies round-off, not the plasma
    if log_limits(a2, curves, decades=6.0, percentile=5.0):
        a2.set_xscale("log")
        a2.set_yscale("log")
        quiet_log_minor(a2)
        legend(a2, fontsize=8)
    else:
        say_empty(a2, "the density stayed uniform: no power above zero")
    return fig
