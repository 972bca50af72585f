"""Emission block: the form factor, k_c, nu_c and the clump sizes at every emission record
through the run, and their values over the saturated window (see
:mod:`streamsim.analysis.emission`): the cutoff of the time-averaged form factor <|F(k)|^2>_W and
the clump-size distribution pooled over the window, with the error budget (mode-to-mode,
window, replica). The coherence and clumps blocks take their headline numbers from here.

Records: a particle run's emission records (``emission_*`` of the time series: |F_s(k)|^2 of all
macro-particles and the fine CIC density, :mod:`streamsim.emission_snapshots`); a continuum
(Vlasov) run's grid densities at the field cadence (form factor of the density, floor 0). A
particle run folder without emission records (written before they existed) has no window: the
coherence and clumps headlines then stay at the peak snapshot and say so.

Summary key: ``emission``. Tables: ``emission_series``, ``form_factor_window``,
``emission_clumps``. Figure: ``emission.png``. Value for later blocks: ``values["window"]``
(the window, its headline numbers and budgets, as in the summary entry).
"""
from __future__ import annotations

import math

import numpy as np

from ... import units
from .. import clumps as _cl
from .. import coherence as _co
from .. import continuum as _cn
from .. import emission as _em
from ..base import BlockResult, Context, Figure, ScanColumn, Table, fmt

NAME = "emission"

#: bootstrap resamples of the modes for each record's k_c (the history; the window's own
#: cutoff uses the coherence module's full BOOTSTRAP)
SERIES_BOOTSTRAP = 50

SCAN_COLUMNS = [
    ScanColumn(("emission", "window", "t0_ns"), "ns",
               "start of the saturated window the emission numbers average over"),
    ScanColumn(("emission", "window", "long_enough"), "",
               "1 when the saturated window is long enough"),
]


def _records(data):
    """(t, F2 (n, S, M) or None, density (n, S, nodes), floors (S,), nodes, how)."""
    s = data.series
    if "emission_t" in s and len(s.emission_t):
        n_part = np.asarray(s.emission_particles, float)
        dens = np.asarray(s.emission_density, float)
        return (np.asarray(s.emission_t, float), np.asarray(s.emission_F2, float), dens,
                1.0 / n_part, dens.shape[-1],
                "emission records: |F|^2 of all macro-particles and their CIC density on "
                f"{dens.shape[-1]} nodes")
    sn = data.snapshots
    dens = np.asarray(sn.density, float)
    continuum = data.peak is None and getattr(data, "peak_density", None) is not None
    if not continuum:   # a particle run folder from before the emission records
        S = len(data.names)
        return (np.zeros(0), None, np.zeros((0, S, data.cells)), np.zeros(S), data.cells,
                "no emission records in this run (a run folder written before they were "
                "recorded): the headline numbers stay at the peak snapshot; rerun to get them")
    floors = np.zeros(len(data.names))
    how = "continuum density at the field cadence (form factor of the density, floor 0)"
    return np.asarray(sn.t, float), None, dens, floors, data.cells, how


def _spectrum(F2, dens, i, s, length, modes):
    """(k, |F|^2) of species s at record i."""
    if F2 is not None:
        P = F2[i, s]
        return 2.0 * math.pi * np.arange(1, P.size + 1) / length, P
    return _cn.density_form_factor(dens[i, s], length, modes)


def _cutoff(k, P, floor, opt, bootstrap, seed):
    return _co.envelope_cutoff(k, P, floor if floor else 0.0, opt.coherence_drop,
                               opt.coherence_bins_per_decade, bootstrap=bootstrap, seed=seed)


def _best(cuts: dict) -> tuple[str | None, dict | None]:
    """The species with the largest k_c (the one that sets the emission cutoff)."""
    have = [(n, c) for n, c in cuts.items() if c["k_cutoff"] is not None]
    if not have:
        return None, None
    return max(have, key=lambda nc: nc[1]["k_cutoff"])


def compute(ctx: Context) -> BlockResult:
    data, opt, n_cm3 = ctx.data, ctx.options, ctx.density_cm3
    names = list(data.names)
    L = data.length
    modes = _co.form_factor_modes(data.cells, opt.coherence_kmax_factor)
    t_rec, F2, dens, floors, nodes, how = _records(data)
    n = t_rec.size
    to_ns = units.time_ns(1.0, n_cm3)
    bg = ctx.results.get("bulk_gamma")
    gam_arr, gam_const, gam_how = _em.gamma_at(
        data, opt, t_rec, bg.values.get("bulk_gamma") if bg is not None else None)

    def nu(kc, i_or_none, species):
        if kc is None:
            return None
        if gam_arr is None:
            G = gam_const
        elif i_or_none is None:   # the window: the mean over its records
            G = float(np.nanmean(gam_arr[win_idx, names.index(species)]))
        else:
            G = float(gam_arr[i_or_none, names.index(species)])
        return _co.emission_cutoff_hz(kc, G, n_cm3)

    # -- the history --------------------------------------------------------------------------
    rows = {k: [] for k in ("t", "k_c", "k_c_err", "species", "lower_bound", "nu_c_hz",
                            "nu_c_hz_err", "clumps", "size_median", "max_dn")}
    widths_by_record, clump_rows = [], []
    for i in range(n):
        cuts = {}
        for s, name in enumerate(names):
            k, P = _spectrum(F2, dens, i, s, L, modes)
            cuts[name] = _cutoff(k, P, floors[s], opt, SERIES_BOOTSTRAP, seed=s)
        who, c = _best(cuts)
        widths = []
        dmax = -math.inf
        for s, name in enumerate(names):
            prof = dens[i, s]
            mean = prof.mean()
            if mean > 0:
                dmax = max(dmax, float(prof.max() / mean - 1.0))
            for c_ in _cl.find_clumps(prof, L, opt.clump_threshold):
                widths.append(c_["width"])
                clump_rows.append((i, t_rec[i], name, c_["width"]))
        widths_by_record.append(widths)
        rows["t"].append(t_rec[i])
        rows["k_c"].append(c["k_cutoff"] if c else np.nan)
        rows["k_c_err"].append(c["k_cutoff_err"] if c and c["k_cutoff_err"] is not None
                               else np.nan)
        rows["species"].append(who or "")
        rows["lower_bound"].append(bool(c and c["lower_bound"]))
        v = nu(c["k_cutoff"], i, who) if c else None
        rows["nu_c_hz"].append(v if v is not None else np.nan)
        ve = nu(c["k_cutoff_err"], i, who) if c and c["k_cutoff_err"] is not None else None
        rows["nu_c_hz_err"].append(ve if ve is not None else np.nan)
        rows["clumps"].append(len(widths))
        rows["size_median"].append(float(np.median(widths)) if widths else np.nan)
        rows["max_dn"].append(dmax if math.isfinite(dmax) else np.nan)

    # -- the window ---------------------------------------------------------------------------
    s = data.series
    S = len(names)
    cmax_any = np.nanmax(np.asarray(s.contrast_max, float)[:, :S], axis=1) if S else np.zeros(0)
    cres = ctx.results.get("contrast")
    t_u = (cres.summary.get("contrast", {}).get("t_unity") if cres is not None else None)
    rec_dt = float(np.median(np.diff(t_rec))) if n > 1 else None
    win = _em.saturated_window(s.t, cmax_any, t_u, rec_dt, t_rec)
    win_idx = np.flatnonzero((t_rec >= (win["t0"] or 0) - 1e-9)) if win["t0"] is not None \
        else np.zeros(0, int)
    win.update({"t0_ns": _ns(win["t0"], to_ns), "t1_ns": _ns(win["t1"], to_ns),
                "end_needed_ns": _ns(win["end_needed"], to_ns),
                "criterion": f"window >= {_em.MIN_SPAN:g} x t0 long and >= {_em.MIN_RECORDS} "
                             "records"})
    head = {"window": win, "records": {"count": int(n), "interval": rec_dt,
                                      "interval_ns": _ns(rec_dt, to_ns), "source": how,
                                      "nodes": int(nodes)},
            "bulk_gamma": gam_const, "bulk_gamma_source": gam_how}
    head.update(_window_cutoff(F2, dens, floors, win_idx, names, L, modes, opt, nu, n_cm3))
    if gam_arr is not None and win_idx.size:
        head["bulk_gamma_measured"] = {n: float(np.nanmean(gam_arr[win_idx, j]))
                                       for j, n in enumerate(names)}
        if head.get("bulk_gamma_window") is None:   # no species sets k_c: the largest
            head["bulk_gamma_window"] = max(head["bulk_gamma_measured"].values())
    head.update(_window_clumps(widths_by_record, win_idx, n_cm3))
    hist = {}
    if win["t0"] is not None:
        for key, col, conv in (("k_cutoff", "k_c", 1.0), ("frequency_cutoff_hz", "nu_c_hz", 1.0),
                               ("size_median_cm", "size_median", units.length_cm(1.0, n_cm3))):
            st = _em.window_stats(t_rec, np.asarray(rows[col], float) * conv, win["t0"],
                                  win["t1"])
            hist[key] = st
    head["history"] = hist
    head["history_note"] = ("mean, spread (sample standard deviation over the window's "
                            "records) and block-jackknife error of each record's own value: the "
                            "evolution the window average covers")
    head["replica_note"] = ("single run: the replica term is filled by `streamsim run "
                            "--replicas N` (the scatter over seeds)")
    warnings = []
    if n and win["t0"] is not None and not win["long_enough"]:
        need = win["end_needed"]
        warnings.append(f"the saturated window [{win['t0']:.4g}, {win['t1']:.4g}] /omega_p is too "
                        f"short for emission numbers ({win['records']} records; "
                        f"{win['criterion']}): set time.end >= {need:.4g} "
                        f"({_ns(need, to_ns):.3g} ns)")
    head["warning"] = warnings[0] if warnings else None

    in_win = np.zeros(n, bool)
    in_win[win_idx] = True
    skin = units.skin_depth_cm(n_cm3)
    series_tab = Table("emission_series", {
        "t": np.asarray(rows["t"], float), "t_ns": np.asarray(rows["t"], float) * to_ns,
        "k_cutoff": np.asarray(rows["k_c"], float),
        "k_cutoff_err": np.asarray(rows["k_c_err"], float),
        "species": np.array(rows["species"], dtype=object),
        "lower_bound": np.asarray(rows["lower_bound"], int),
        "frequency_cutoff_hz": np.asarray(rows["nu_c_hz"], float),
        "frequency_cutoff_err_hz": np.asarray(rows["nu_c_hz_err"], float),
        "clumps": np.asarray(rows["clumps"], int),
        "size_median": np.asarray(rows["size_median"], float),
        "size_median_cm": np.asarray(rows["size_median"], float) * skin,
        "max_dn": np.asarray(rows["max_dn"], float), "in_window": in_win.astype(int)},
        units={"t": "1/omega_p", "t_ns": "ns", "k_cutoff": "omega_p/c",
               "k_cutoff_err": "omega_p/c", "frequency_cutoff_hz": "Hz",
               "frequency_cutoff_err_hz": "Hz", "size_median": "c/omega_p",
               "size_median_cm": "cm"},
        attrs={"source": how})
    ffw = head.pop("_window_spectrum")
    tables = {"emission_series": series_tab, "form_factor_window": ffw,
              "emission_clumps": Table("emission_clumps", {
                  "record": np.array([r[0] for r in clump_rows], int),
                  "t": np.array([r[1] for r in clump_rows], float),
                  "species": np.array([r[2] for r in clump_rows], dtype=object),
                  "width": np.array([r[3] for r in clump_rows], float),
                  "width_cm": np.array([r[3] * skin for r in clump_rows], float),
                  "in_window": np.array([int(in_win[r[0]]) for r in clump_rows], int)},
                  units={"t": "1/omega_p", "width": "c/omega_p", "width_cm": "cm"})}
    if _stayed_uniform(ctx):
        _blank_uniform(head)
    return BlockResult(NAME, {"emission": head}, tables,
                       [Figure("emission.png", "nu_c(t), clump size(t) and max delta n/n(t) "
                               "with the saturated window", _draw)], _lines(head), warnings,
                       values={"window": head})


def _stayed_uniform(ctx: Context) -> bool:
    """The contrast block found no structure at all (max delta n/n at round-off)."""
    c = ctx.results.get("contrast")
    return bool(c is not None and c.values.get("uniform"))


#: the emission numbers a uniform plasma does not have
_UNIFORM_NONE = ("k_cutoff", "k_cutoff_err", "k_cutoff_per_cm", "frequency_cutoff_hz",
                 "frequency_cutoff_err_hz", "species", "k_cutoff_budget",
                 "frequency_cutoff_budget_hz", "size_median", "size_median_cm",
                 "size_median_err", "size_median_err_cm", "size_median_budget_cm")


def _blank_uniform(head: dict) -> None:
    """A plasma that stayed uniform has no saturated window and no cutoff: say so, never a
    bound set by the grid or the largest k computed."""
    for k in _UNIFORM_NONE:
        if k in head:
            head[k] = None
    head.update({"lower_bound": False, "status": "uniform", "by_species": {},
                 "history": {}, "warning": None})
    head["window"] = {k: (None if k not in ("how", "criterion") else v)
                      for k, v in head["window"].items()}
    head["window"]["how"] = "none: the plasma stayed uniform (contrast.uniform)"
    head["window"]["long_enough"] = False


def _ns(t, to_ns):
    return None if t is None else float(t) * to_ns


def _window_cutoff(F2, dens, floors, idx, names, L, modes, opt, nu, n_cm3) -> dict:
    """k_c and nu_c of the window-averaged form factor, with the mode-to-mode (bootstrap) and
    window (block jackknife over the records) terms; the averaged spectrum as a table."""
    out = {"k_cutoff": None, "k_cutoff_err": None, "frequency_cutoff_hz": None,
           "frequency_cutoff_err_hz": None, "species": None, "lower_bound": False,
           "noise_floor": None, "status": "no records in the window", "by_species": {}}
    empty = Table("form_factor_window", {"mode": np.zeros(0, int), "k": np.zeros(0)})
    if idx.size == 0:
        out["_window_spectrum"] = empty
        return out

    def mean_spectra(sel):
        res = {}
        for s, name in enumerate(names):
            k = None
            acc = None
            for i in sel:
                k, P = _spectrum(F2, dens, int(i), s, L, modes)
                acc = P.copy() if acc is None else acc + P
            res[name] = (k, acc / len(sel))
        return res

    spec = mean_spectra(idx)
    cuts = {name: _cutoff(k, P, floors[s], opt, _co.BOOTSTRAP, seed=s)
            for s, (name, (k, P)) in enumerate(spec.items())}
    for name, c in cuts.items():
        kb, Eb, nb = c.pop("envelope")
        c["envelope"] = {"k": kb, "mean_F2": Eb, "modes": nb}
        c["noise_floor"] = float(floors[names.index(name)])
        c["frequency_cutoff_hz"] = nu(c["k_cutoff"], None, name)
        c["frequency_cutoff_err_hz"] = nu(c.get("k_cutoff_err"), None, name)
        g1 = nu(1.0, None, name)
        c["bulk_gamma"] = g1 / _co.emission_cutoff_hz(1.0, 1.0, n_cm3) if g1 else None
        out["by_species"][name] = c
    who, c = _best(cuts)
    k0 = next(iter(spec.values()))[0]
    skin = units.skin_depth_cm(n_cm3)
    out["_window_spectrum"] = Table("form_factor_window", {
        "mode": np.arange(1, k0.size + 1), "k": k0, "k_per_cm": k0 / skin,
        **{f"F2_{name}": P for name, (_, P) in spec.items()}},
        units={"k": "omega_p/c", "k_per_cm": "1/cm"},
        attrs={"records": int(idx.size), **{f"noise_floor_{nm}": float(floors[j])
                                            for j, nm in enumerate(names)}})
    if c is None:
        out["status"] = "no cutoff above the noise floor"
        out["noise_floor"] = float(max(floors)) if len(floors) else None
        return out

    def stat(sub):
        sp = mean_spectra(idx[sub])
        kk = [_cutoff(k, P, floors[s], opt, 0, seed=s)["k_cutoff"]
              for s, (_, (k, P)) in enumerate(sp.items())]
        kk = [v for v in kk if v is not None]
        return max(kk) if kk else None

    win_err = _em.block_jackknife(idx.size, stat)
    kb = _em.budget({"mode_to_mode": c["k_cutoff_err"], "window": win_err, "replica": None})
    G = nu(1.0, None, who) / _co.emission_cutoff_hz(1.0, 1.0, n_cm3)
    scale = _co.emission_cutoff_hz(1.0, G, n_cm3)
    fb = _scaled(kb, scale)
    out.update({"k_cutoff": c["k_cutoff"], "k_cutoff_err": kb["combined"],
                "frequency_cutoff_hz": c["k_cutoff"] * scale,
                "frequency_cutoff_err_hz": fb["combined"], "species": who,
                "lower_bound": c["lower_bound"], "noise_floor": c["noise_floor"],
                "status": c["status"], "bulk_gamma_window": G,
                "k_cutoff_budget": kb, "frequency_cutoff_budget_hz": fb,
                "k_cutoff_per_cm": units.wavenumber_per_cm(c["k_cutoff"], n_cm3)})
    return out


def _window_clumps(widths_by_record, idx, n_cm3) -> dict:
    """The clump sizes pooled over the window's records: median, the clump-to-clump bootstrap
    and the window (block jackknife over records) terms."""
    cm = units.length_cm(1.0, n_cm3)
    pooled = [w for i in idx for w in widths_by_record[int(i)]]
    out = {"clump_count_pooled": len(pooled), "size_median": None, "size_median_cm": None,
           "size_median_err": None, "size_median_err_cm": None, "size_median_budget_cm": None}
    if not pooled:
        return out
    med = float(np.median(pooled))

    def stat(sub):
        p = [w for i in idx[sub] for w in widths_by_record[int(i)]]
        return float(np.median(p)) if p else None

    b = _em.budget({"clump_to_clump": _cl.median_bootstrap(pooled),
                    "window": _em.block_jackknife(idx.size, stat), "replica": None})
    out.update({"size_median": med, "size_median_cm": med * cm,
                "size_median_err": b["combined"],
                "size_median_err_cm": b["combined"] * cm if b["combined"] is not None else None,
                "size_median_budget_cm": _scaled(b, cm)})
    return out


def _scaled(b: dict, factor: float) -> dict:
    """An error budget (:func:`streamsim.analysis.emission.budget`) in another unit: its terms
    and combined error times ``factor``."""
    return {**b, "terms": {k: (v * factor if v is not None else None)
                           for k, v in b["terms"].items()},
            "combined": b["combined"] * factor if b["combined"] is not None else None}


def _lines(head: dict) -> list[str]:
    w = head["window"]
    if head.get("status") == "uniform":
        return ["emission: none, the plasma stayed uniform (no saturated window, no cutoff)"]
    if w.get("t0") is None or not head["records"]["count"]:
        return [f"emission: {head['records']['source']}"]
    out = [f"emission window [{w['t0']:.4g}, {w['t1']:.4g}] /omega_p = "
           f"[{fmt(w.get('t0_ns'), '.3g')}, {fmt(w.get('t1_ns'), '.3g')}] ns "
           f"({w['records']} records, {w['how']})"]
    fb = head.get("frequency_cutoff_budget_hz")
    if fb and fb.get("dominant"):
        terms = ", ".join(f"{k} {v / 1e9:.2g}" for k, v in fb["terms"].items() if v is not None)
        out.append(f"  nu_c error budget [GHz]: {terms}; combined {fb['combined'] / 1e9:.2g} "
                   f"(dominant: {fb['dominant']}; replica: run with --replicas N to add it)")
    sb = head.get("size_median_budget_cm")
    if sb and sb.get("dominant"):
        terms = ", ".join(f"{k} {v:.2g}" for k, v in sb["terms"].items() if v is not None)
        out.append(f"  clump size error budget [cm]: {terms}; combined {sb['combined']:.2g} "
                   f"(dominant: {sb['dominant']})")
    if head.get("warning"):
        out.append(f"  {head['warning']}")
    return out


def _draw(res: BlockResult, data):
    from ...plots import (DN, NUC, T_LABEL, legend, log_limits, message_figure, plt, positive,
                          say_empty, summary_value, time_ns_axis, top_positive)
    tab = res.tables["emission_series"]
    head = res.summary["emission"]
    if not len(tab):
        return message_figure("no emission records in this run", (7, 4.5))
    t = tab.col("t")
    w = head["window"]
    fig, (a1, a2, a3) = plt.subplots(3, 1, figsize=(7.5, 8.4), sharex=True)
    nu = tab.col("frequency_cutoff_hz") / 1e9
    err = tab.col("frequency_cutoff_err_hz") / 1e9
    lb = tab.col("lower_bound").astype(bool)
    a1.errorbar(t[~lb], nu[~lb], yerr=np.where(np.isfinite(err[~lb]), err[~lb], 0), fmt="o",
                ms=3, lw=0.8, label=f"{NUC} at each record")
    # the axis holds the values and their error bars; a grid-limited lower bound far above them
    # (e.g. the still-uniform density of the first records) is drawn at the top edge
    vals = np.concatenate([nu[~lb] - np.nan_to_num(err[~lb]), nu[~lb] + np.nan_to_num(err[~lb])])
    vals = vals[np.isfinite(vals)]
    hi = float(vals.max()) * 1.15 if vals.size and vals.max() > 0 else None
    if lb.any():
        off = lb & np.isfinite(nu) & (nu > hi) if hi is not None else np.zeros_like(lb)
        on = lb & ~off
        if on.any():
            a1.plot(t[on], nu[on], "^", ms=5, color="C1", label="lower bound (grid)")
        if off.any():
            a1.plot(t[off], np.full(int(off.sum()), hi * 0.97), "^", ms=6, color="C3",
                    label=f"lower bound above the axis (grid): up to {np.nanmax(nu[off]):.3g} GHz")
    if summary_value(res.summary, "emission_nu_c_hz") is not None:
        v = summary_value(res.summary, "emission_nu_c_hz") / 1e9
        e = (summary_value(res.summary, "emission_nu_c_err_hz") or 0) / 1e9
        a1.axhspan(v - e, v + e, color="C1", alpha=0.25,
                   label=f"window: {v:.3g} $\\pm$ {e:.2g} GHz")
        a1.axhline(v, color="C1", lw=1)
        if hi is not None:
            hi = max(hi, (v + e) * 1.05)
    if hi is not None:
        a1.set_ylim(min(0.0, float(vals.min())), hi)
    a1.set_ylabel(f"{NUC} [GHz]")
    a1.ticklabel_format(axis="y", useOffset=False)
    if not np.isfinite(nu).any():
        say_empty(a1, "no coherence cutoff at any record")
    legend(a1, fontsize=7)
    a2.plot(t, tab.col("size_median_cm"), "o-", ms=3, lw=0.8, label="median FWHM at each record")
    if summary_value(res.summary, "emission_size_cm") is not None:
        v = summary_value(res.summary, "emission_size_cm")
        e = summary_value(res.summary, "emission_size_err_cm") or 0
        a2.axhspan(v - e, v + e, color="C1", alpha=0.25,
                   label=f"window: {v:.3g} $\\pm$ {e:.2g} cm")
    if not np.isfinite(np.asarray(tab.col("size_median_cm"), float)).any():
        say_empty(a2, "no clump at any record")
    a2.set_ylabel("clump size (FWHM) [cm]")
    a2.ticklabel_format(axis="y", useOffset=False)
    legend(a2, fontsize=7)
    s = data.series
    cm = np.asarray(s.contrast_max, float)
    cols = [cm[:, j] for j in range(min(cm.shape[1], len(data.names)))] if cm.ndim == 2 else []
    for j, name in enumerate(data.names[:len(cols)]):
        a3.plot(s.t, positive(cols[j]), lw=1, label=name)
    a3.axhline(1.0, color="0.5", ls=":", lw=1)
    if log_limits(a3, cols, decades=4.0, percentile=2.0):
        a3.set_yscale("log")
        if top_positive(cols) < 1e-12:
            say_empty(a3, "the density stayed uniform to round-off", y=0.8)
    else:
        say_empty(a3, "the density stayed uniform")
    a3.set_ylabel(f"max {DN} [dimensionless]")
    a3.set_xlabel(T_LABEL)
    legend(a3, fontsize=7)
    for a in (a1, a2, a3):
        if w.get("t0") is not None:
            a.axvspan(w["t0"], w["t1"], color="0.9", zorder=0)
    time_ns_axis(a1, data.deck.units.density_cm3)
    a1.set_title("emission numbers through the run (shaded: the saturated window)", fontsize=9,
                 pad=32)
    return fig
