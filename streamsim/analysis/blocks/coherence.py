"""Coherence block: the emission cutoff nu_c = Gamma c k_c / 2 pi of the run.

Headline (``coherence.k_cutoff``, ``frequency_cutoff_hz`` and their errors): the cutoff of the
form factor averaged over the saturated window, <|F(k)|^2>_W, from the emission block (its
window, history and error budget: mode-to-mode, window, replica). The single instants stay as
secondary entries: ``coherence.peak_snapshot`` (the particle positions at the time of maximum
contrast) and ``coherence.end_snapshot`` (at the end; also under ``coherence.end``), each with its
|F(k)|^2 of each species, 1/N noise floor, cutoff and bootstrap error.

Summary key: ``coherence``. Table: ``form_factor``. Figure: ``coherence.png``.
"""
from __future__ import annotations

import math

import numpy as np

from ... import units
from .. import coherence as _co
from .. import driven as _driven
from .. import continuum as _cn
from ..base import BlockResult, Context, Figure, ScanColumn, Table, fmt

NAME = "coherence"

SCAN_COLUMNS = [
    ScanColumn(("coherence", "frequency_cutoff_hz"), "Hz",
               "coherence cutoff frequency nu_c (see summary.json coherence)"),
    ScanColumn(("coherence", "frequency_cutoff_err_hz"), "Hz",
               "error of nu_c (window budget; see summary.json coherence)"),
    ScanColumn(("coherence", "frequency_cutoff_lower_bound_hz"), "Hz",
               "nu_c when it is only a lower bound (grid-limited)"),
    ScanColumn(("coherence", "k_cutoff"), "omega_p/c", "coherence cutoff k_c (value or lower bound)"),
    ScanColumn(("coherence", "k_cutoff_err"), "omega_p/c", "error of k_c (window budget)"),
    ScanColumn(("coherence", "bulk_gamma"), "", "bulk Lorentz factor assumed for nu_c"),
    ScanColumn(("coherence", "grid_limited"), "",
               "1 when k_c and nu_c are set by the grid (nu_c is then only the lower bound "
               "coherence.frequency_cutoff_lower_bound_hz): raise box.cells or warm the beams"),
]


def compute(ctx: Context) -> BlockResult:
    res = _window_headline(_instants(ctx), ctx)
    c = ctx.results.get("contrast")
    if c is not None and c.values.get("uniform"):
        _blank_uniform(res.summary["coherence"])
        res.lines = _lines(res.summary["coherence"])
    return res


#: the cutoff entries a uniform plasma does not have (no structure: no k_c, no bound)
_UNIFORM_NONE = ("k_cutoff", "k_cutoff_err", "k_cutoff_per_cm", "frequency_cutoff_hz",
                 "frequency_cutoff_err_hz", "frequency_cutoff_lower_bound_hz",
                 "species", "frequency_cutoff_budget_hz",
                 "k_cutoff_budget", "grid_limited_why")


def _blank_uniform(head: dict) -> None:
    """A plasma that stayed uniform (contrast.uniform) claims no cutoff, in the headline and in
    its snapshots: its |F(k)|^2 is round-off, never a value or a grid-limited bound."""
    for d in (head, head.get("peak_snapshot"), head.get("end_snapshot"), head.get("end")):
        if not isinstance(d, dict):
            continue
        for k in _UNIFORM_NONE:
            if k in d:
                d[k] = None
        d.update({"lower_bound": False, "status": "uniform"})
        if "grid_limited" in d:
            d["grid_limited"] = False
        if isinstance(d.get("by_species"), dict):
            d["by_species"] = {}


_INSTANT_KEYS = ("t", "t_ns", "k_cutoff", "k_cutoff_err", "k_cutoff_per_cm", "frequency_cutoff_hz",
                 "frequency_cutoff_err_hz", "frequency_cutoff_lower_bound_hz",
                 "noise_floor", "species",
                 "lower_bound", "status", "by_species", "bulk_gamma", "bulk_gamma_source",
                 "bulk_gamma_measured", "grid_limited", "grid_limited_why")


def _window_headline(res: BlockResult, ctx: Context) -> BlockResult:
    """The headline keys carry the saturated-window cutoff (emission block); the instant values
    move to ``peak_snapshot`` / ``end_snapshot``; the window's rows join the form-factor table
    (snapshot = "window")."""
    em = ctx.results.get("emission")
    head = res.summary["coherence"]
    e = em.values.get("window") or {} if em is not None else {}
    if not e or e.get("window", {}).get("t0") is None or not e.get("by_species"):
        head["headline"] = "peak snapshot (no emission records in the saturated window)"
        return res
    inst = {k: head.pop(k) for k in _INSTANT_KEYS if k in head}
    if inst.get("t") is not None:
        head["peak_snapshot"] = inst
    end = head.get("end")
    head["end_snapshot"] = end
    by = {n: {k: v for k, v in r.items()} for n, r in e["by_species"].items()}
    for n, r in by.items():
        if r.get("k_cutoff") is not None:
            r["k_cutoff_per_cm"] = units.wavenumber_per_cm(r["k_cutoff"], ctx.density_cm3)
    w = e["window"]
    head.update({"snapshot": "window", "window": {k: w.get(k) for k in
                                                  ("t0", "t1", "t0_ns", "t1_ns", "how",
                                                   "records", "long_enough", "end_needed",
                                                   "end_needed_ns")},
                 "t": w["t0"], "t_ns": w.get("t0_ns"),
                 "headline": "cutoff of the form factor averaged over the saturated window "
                             "<|F(k)|^2>_W (emission adds over time); peak_snapshot and "
                             "end_snapshot are single instants",
                 "k_cutoff": e.get("k_cutoff"), "k_cutoff_err": e.get("k_cutoff_err"),
                 "frequency_cutoff_hz": e.get("frequency_cutoff_hz"),
                 "frequency_cutoff_err_hz": e.get("frequency_cutoff_err_hz"),
                 "noise_floor": e.get("noise_floor"), "species": e.get("species"),
                 "lower_bound": bool(e.get("lower_bound")), "status": e.get("status"),
                 "by_species": by, "frequency_cutoff_budget_hz": e.get("frequency_cutoff_budget_hz"),
                 "k_cutoff_budget": e.get("k_cutoff_budget"),
                 "error_estimator": "quadrature sum of the mode-to-mode bootstrap of the "
                                    "window-averaged spectrum, the block jackknife over the "
                                    "window's records and (with replicas) the replica scatter; "
                                    "see frequency_cutoff_budget_hz",
                 "bulk_gamma": (e.get("bulk_gamma_window") if e.get("bulk_gamma") is None
                                else e.get("bulk_gamma")),
                 })
    if e.get("bulk_gamma_measured") is not None:   # analysis.bulk_gamma = "measured"
        head["bulk_gamma_measured"] = e["bulk_gamma_measured"]
        head["bulk_gamma_source"] = e.get("bulk_gamma_source")
    head.update(_grid_limit(head, ctx))
    _bound(head, ctx.density_cm3)
    ffw = em.tables.get("form_factor_window")
    tab = res.tables["form_factor"]
    if ffw is not None and len(ffw):
        n = len(ffw)
        cols = {}
        for c, v in tab.columns.items():
            if c == "snapshot":
                add = np.array(["window"] * n, dtype=object)
            elif c == "t":
                add = np.full(n, float(w["t0"]))
            elif c in ffw.columns:
                add = ffw.col(c)
            else:
                add = np.full(n, np.nan)
            cols[c] = np.concatenate([v, add]) if len(v) else add
        for c in ffw.columns:
            if c.startswith("F2_") and c not in cols:
                cols[c] = np.concatenate([np.full(len(tab), np.nan), ffw.col(c)])
        res.tables["form_factor"] = Table("form_factor", cols, tab.units,
                                          {**tab.attrs, **{k: v for k, v in ffw.attrs.items()
                                                           if k.startswith("noise_floor")}})
    res.lines = _lines(head)
    return res


def _bound(head: dict, n_cm3: float) -> None:
    """A grid-limited cutoff frequency is a lower bound, never a plain value."""
    if head.get("grid_limited") and head.get("frequency_cutoff_hz") is not None:
        head["frequency_cutoff_lower_bound_hz"] = head.pop("frequency_cutoff_hz")
        head["frequency_cutoff_hz"] = None
    else:
        head["frequency_cutoff_lower_bound_hz"] = None
    if head.get("k_cutoff") is not None:
        head["k_cutoff_per_cm"] = units.wavenumber_per_cm(head["k_cutoff"], n_cm3)


def _instants(ctx: Context) -> BlockResult:
    """The form factor and cutoff at the peak and end particle snapshots (single instants)."""
    data, n_cm3, opt = ctx.data, ctx.density_cm3, ctx.options
    drop, kmf = opt.coherence_drop, opt.coherence_kmax_factor
    measured = _measured_gamma(ctx)     # analysis.bulk_gamma = "measured": Gamma_s(t), typed
    bulk = 1.0 if measured is not None else opt.bulk_gamma
    modes = _co.form_factor_modes(data.cells, kmf)
    skin = units.skin_depth_cm(n_cm3)
    per = {}
    cols = {"snapshot": [], "t": [], "mode": [], "k": []}
    power: dict[str, list] = {}
    floors = {}
    sources = (("peak", data.peak), ("end", data.end))
    continuum = data.peak is None and getattr(data, "peak_density", None) is not None
    if continuum:   # a Vlasov run: the density's form factor, noise floor 0 (analysis.continuum)
        sources = (("peak", data.peak_density), ("end", data.end_density))
    for label, snap in sources:
        if snap is None:
            continue
        entry = {"t": float(snap.t), "t_ns": units.time_ns(float(snap.t), n_cm3),
                 "by_species": {}}
        # each species' Gamma at this snapshot's time: every frequency below scales with it
        gam = measured.at(float(snap.t)) if measured is not None else None
        k = None
        for s, name in enumerate(data.names):
            G = gam[name] if gam is not None else bulk
            if continuum:
                r = _cn.density_coherence(snap.density[s], data.length, modes, drop=drop,
                                          density_cm3=n_cm3, bulk_gamma=G,
                                          bins_per_decade=opt.coherence_bins_per_decade, seed=s)
            else:
                x = snap.x.get(name)
                if x is None or len(x) == 0:
                    continue
                r = _co.species_coherence(x, data.length, modes, drop=drop, density_cm3=n_cm3,
                                          bulk_gamma=G, max_particles=ctx.max_particles, seed=s,
                                          bins_per_decade=opt.coherence_bins_per_decade)
            if gam is not None:
                r["bulk_gamma"] = G
            k = r.pop("k")
            kb, Eb, nb = r.pop("envelope")
            r["envelope"] = {"k": kb, "mean_F2": Eb, "modes": nb}
            power.setdefault(name, []).append(r.pop("power"))
            floors[f"noise_floor_{label}_{name}"] = r["noise_floor"]
            if r["k_cutoff"] is not None:
                r["k_cutoff_per_cm"] = units.wavenumber_per_cm(r["k_cutoff"], n_cm3)
            entry["by_species"][name] = r
        if k is not None:
            cols["snapshot"] += [label] * k.size
            cols["t"] += [entry["t"]] * k.size
            cols["mode"] += list(range(1, k.size + 1))
            cols["k"] += list(k)
        best = [(n, r) for n, r in entry["by_species"].items() if r["k_cutoff"] is not None]
        if best:
            name, r = max(best, key=lambda nr: nr[1]["k_cutoff"])
            entry.update({"k_cutoff": r["k_cutoff"], "k_cutoff_err": r["k_cutoff_err"],
                          "frequency_cutoff_hz": r["frequency_cutoff_hz"],
                          "frequency_cutoff_err_hz": r["frequency_cutoff_err_hz"],
                          "noise_floor": r["noise_floor"], "species": name,
                          "lower_bound": r["lower_bound"], "status": r["status"]})
        else:
            fl = [r["noise_floor"] for r in entry["by_species"].values() if r["noise_floor"]]
            entry.update({"k_cutoff": None, "frequency_cutoff_hz": None,
                          "noise_floor": max(fl) if fl else None, "species": None,
                          "lower_bound": False, "status": "no cutoff above the noise floor"
                          if fl else "no particle positions"})
        if gam is not None:   # the headline Gamma: of the species that sets k_c, else the largest
            who = entry["species"]
            entry["bulk_gamma"] = gam[who] if who in gam else max(gam.values())
            entry["bulk_gamma_measured"] = gam
        per[label] = entry
    src = "peak" if "peak" in per else ("end" if "end" in per else None)
    head = {"k_cutoff": None, "k_cutoff_err": None, "frequency_cutoff_hz": None,
            "frequency_cutoff_err_hz": None, "bulk_gamma": bulk,
            "noise_floor": None, "status": "no particle snapshot"}
    if src:
        head.update(per[src])
    head.update(_grid_limit(head, ctx))
    head.update({"bulk_gamma": head["bulk_gamma"] if measured is not None else bulk,
                 "snapshot": src, "drop": drop,
                 "noise_safety": _co.NOISE_SAFETY, "k_max": 2 * math.pi * modes / data.length,
                 "kmax_factor": kmf, "assumption": _co.ASSUMPTION,
                 "bins_per_decade": opt.coherence_bins_per_decade,
                 "criterion": "k where the log-binned envelope of |F|^2 (mean over the modes "
                              "of each of bins_per_decade log bins per decade, at least "
                              f"{_co.MIN_MODES} modes a bin) falls below drop x its peak for "
                              "the last time; reported only if drop x peak >= noise_safety x "
                              "noise_floor (1/N_macro)",
                 "error_estimator": f"bootstrap over the modes of each bin ({_co.BOOTSTRAP} "
                                    "resamples): the standard deviation of k_c",
                 "grid_limit_test": f"k_c >= {_co.GRID_FRACTION:g} x the grid Nyquist k "
                                    "(wavelength <= 4 cells), or k_c only a lower bound, or the "
                                    "clumps grid-limited (clumps.grid_limited)"})
    _bound(head, n_cm3)
    if src == "peak" and "end" in per:
        head["end"] = {k: per["end"][k] for k in ("t", "k_cutoff", "frequency_cutoff_hz",
                                                  "noise_floor", "species", "status")}
        if measured is not None:
            head["end"]["bulk_gamma"] = per["end"]["bulk_gamma"]
    if measured is not None:
        head["bulk_gamma_source"] = ("measured: no particle snapshot" if src is None else
                                     measured.source(head.get("species"), head["t"], src))
    k_all = np.asarray(cols["k"], float)
    table = Table("form_factor", {
        "snapshot": np.array(cols["snapshot"], dtype=object),
        "t": np.asarray(cols["t"], float), "mode": np.asarray(cols["mode"], int), "k": k_all,
        "k_per_cm": k_all / skin,
        **{f"F2_{n}": np.concatenate(p) for n, p in power.items()
           if sum(len(a) for a in p) == k_all.size}},
        units={"k": "omega_p/c", "k_per_cm": "1/cm", "t": "1/omega_p"}, attrs=floors)
    return BlockResult(NAME, {"coherence": head}, {"form_factor": table},
                       [Figure("coherence.png", "form factor |F(k)|^2 per species with the "
                               "cutoff and the noise floor", _draw)], _lines(head))


def _measured_gamma(ctx: Context):
    """The typed measured Gamma_s(t) (:class:`streamsim.analysis.driven.BulkGamma`) of the
    ``bulk_gamma`` block, or None when ``analysis.bulk_gamma`` is a number."""
    if not _driven.is_measured(ctx.options):
        return None
    res = ctx.results.get("bulk_gamma")
    found = res.values.get("bulk_gamma") if res is not None else None
    return found if found is not None else _driven.measured_bulk_gamma(ctx.data)


def _grid_limit(head: dict, ctx: Context) -> dict:
    """coherence.grid_limited and why (see :func:`streamsim.analysis.coherence.grid_limited_cutoff`)."""
    data = ctx.data
    kc = head.get("k_cutoff")
    by_k = _co.grid_limited_cutoff(kc, bool(head.get("lower_bound")), data.cells, data.length)
    clumps = ctx.results.get("clumps")
    by_clumps = bool(clumps is not None and clumps.values.get("grid_limited")) and kc is not None
    why = []
    if kc is not None and head.get("lower_bound"):
        why.append("the envelope is still high at the largest k computed")
    elif by_k:
        why.append(f"k_c is at {kc / (math.pi * data.cells / data.length):.2g} of the grid "
                   "Nyquist k")
    if by_clumps:
        why.append("the clumps that set it are grid-limited")
    cold = [s.name for s in data.deck.species if s.is_cold]
    return {"grid_limited": bool(by_k or by_clumps), "grid_limited_why": "; ".join(why) or None,
            "k_nyquist": math.pi * data.cells / data.length, "cold_species": cold}


def _where(co: dict) -> str:
    """Which numbers a line reports: the window or an instant."""
    w = co.get("window")
    if co.get("snapshot") == "window" and w:
        return (f"averaged over the saturated window [{fmt(w.get('t0'), '.4g')}, "
                f"{fmt(w.get('t1'), '.4g')}] /omega_p")
    return f"at t = {fmt(co.get('t'), '.4g')} /omega_p ({co.get('snapshot')} snapshot)"


def _pm(co: dict, key: str) -> str:
    """+- err GHz of the cutoff, with the error budget's dominant term."""
    err = co.get(key)
    if err is None:
        return " GHz (no error estimate)"
    dom = (co.get("frequency_cutoff_budget_hz") or {}).get("dominant")
    return f" +- {err / 1e9:.2g} GHz" + (f" (largest error term: {dom})" if dom else "")


def _lines(co: dict) -> list[str]:
    out = _main_lines(co)
    src = co.get("bulk_gamma_source")
    if src is not None:     # analysis.bulk_gamma = "measured"
        G = co.get("bulk_gamma")
        out.append(f"  bulk Gamma = {G:.4g} {src}" if G is not None and math.isfinite(G)
                   else f"  {src}")
    return out


def _main_lines(co: dict) -> list[str]:
    if co.get("status") == "uniform":
        return ["coherence: no cutoff, the plasma stayed uniform (no density structure to "
                "emit coherently)"]
    G = co.get("bulk_gamma", 1.0)
    G = 1.0 if G is None else G
    note = ("  assumes particles on the same trajectory emitting along the motion; "
            "nu_c = Gamma c k_c / 2 pi (a bunching estimate, not a radiation calculation)")
    if co.get("frequency_cutoff_lower_bound_hz") is not None:
        cold = co.get("cold_species") or []
        fix = ("give the beams a temperature (a cold beam has no intrinsic clump scale) or "
               "raise box.cells" if cold else "raise box.cells")
        err = co.get("frequency_cutoff_err_hz")
        pm = f" (+- {err / 1e9:.2g} GHz at this grid)" if err is not None else ""
        return [f"coherent emission up to at least nu_c >= "
                f"{co['frequency_cutoff_lower_bound_hz'] / 1e9:.3g} GHz{pm} {_where(co)}: a "
                f"lower bound, grid-limited ({co.get('grid_limited_why')}); {fix}", note]
    if co.get("frequency_cutoff_hz") is not None:
        lb = (" (lower bound: the spectrum is still high at the largest k computed; raise "
              "analysis.coherence_kmax_factor)" if co.get("lower_bound") else "")
        return [f"coherent emission up to nu_c = {co['frequency_cutoff_hz'] / 1e9:.3g}"
                f"{_pm(co, 'frequency_cutoff_err_hz')} {_where(co)} "
                f"(k_c = {fmt(co.get('k_cutoff'), '.3g')} omega_p/c = "
                f"{fmt(co.get('k_cutoff_per_cm'), '.3g')} /cm, {co.get('species')}, "
                f"bulk Gamma = {G:.4g}, noise floor 1/N = {fmt(co.get('noise_floor'), '.2g')})"
                f"{lb}", note]
    if co.get("snapshot") is None:
        return ["coherence: no particle snapshot in this run"]
    return [f"coherence: no cutoff above the noise floor (1/N = "
            f"{fmt(co.get('noise_floor'), '.2g')}, bulk Gamma = {G:.4g}) {_where(co)}; more "
            "particles per cell lower the floor"]


def _draw(res: BlockResult, data):
    from ...plots import (K_LABEL, KC, NUC, WP, ghz_axis, legend, log_limits, message_figure,
                          plot_positive, plt, quiet_log_minor, say_empty, summary_value)
    co = res.summary["coherence"]
    src = co.get("snapshot")
    tab = res.tables["form_factor"]
    part = tab.where("snapshot", src) if src else None
    if part is None or not len(part):
        return message_figure("no particle snapshot in this run", (7, 4.5))
    fig, ax = plt.subplots(figsize=(8, 5))
    k = part.col("k")
    by = co.get("by_species") or {}
    curves = []
    for name in data.names:
        if f"F2_{name}" not in part.columns:
            continue
        P = part.col(f"F2_{name}")
        curves.append(P)
        line, = plot_positive(ax, k, P, lw=0.8, label=f"$|F(k)|^2$, {name}")
        floor = (by.get(name) or {}).get("noise_floor")
        if floor:
            ax.axhline(floor, color=line.get_color(), ls=":", lw=1,
                       label=f"noise floor $1/N$, {name}")
        kc = (by.get(name) or {}).get("k_cutoff")
        if kc:
            ax.axvline(kc, color=line.get_color(), ls="--", lw=1, label=f"{KC}, {name}")
    fl = [v.get("noise_floor") for v in by.values() if v.get("noise_floor")]
    ax.axvline(math.pi * data.cells / data.length, color="0.6", lw=0.8, ls="-.",
               label="grid Nyquist")
    ax.set_xlabel(K_LABEL)
    ax.set_ylabel(r"form factor $|F(k)|^2$ [dimensionless]")
    nu = summary_value(res.summary, "nu_c_hz")
    lb = summary_value(res.summary, "nu_c_lower_bound_hz")
    gamma = summary_value(res.summary, "bulk_gamma") or 1.0
    env = (by.get(co.get("species")) or {}).get("envelope") if co.get("species") else None
    if env is not None and len(env["k"]):
        plot_positive(ax, env["k"], env["mean_F2"], "k.-", lw=1, ms=3,
                      label="log-binned envelope")
    txt = (f"{NUC} = {nu / 1e9:.3g} GHz" if nu
           else f"{NUC} $\\geq$ {lb / 1e9:.3g} GHz (grid-limited)" if lb
           else "no cutoff above the noise floor")
    when = (f"averaged over [{co['window']['t0']:.4g}, {co['window']['t1']:.4g}]/{WP}"
            if src == "window" and co.get("window") else f"at $t$ = {co.get('t') or 0:.4g}/{WP}")
    if log_limits(ax, curves, decades=8.0, percentile=1.0, floor=min(fl) if fl else None):
        ax.set_xscale("log")
        ax.set_yscale("log")
        quiet_log_minor(ax)
        ghz_axis(ax, float(gamma), data.deck.units.density_cm3)
        legend(ax, fontsize=7, loc="lower left")
    else:
        say_empty(ax, "the density stayed uniform: no form factor above zero")
        if k.size:
            ax.set_xlim(float(k.min()), float(k.max()))
    ax.set_title(f"form factor {when}; {txt}", fontsize=9, pad=32)
    return fig
