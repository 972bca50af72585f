"""Analysis of a run: growth fits, density contrast, clumps, coherence (see the modules).

    blocks = streamsim.analysis.analyze(run_data_or_folder, folder=None, bulk_gamma=None,
                                        clump_threshold=None, coherence_drop=None, write=True)
    print(streamsim.analysis.human_summary(blocks, density_cm3))

Options left at None come from the run's deck, section [analysis].  ``blocks`` is plain JSON data
(no NaN/inf), the summary.json blocks "growth", "modes", "field_energy_growth", "contrast",
"clumps", "coherence".  With ``write=True`` and a folder, the tables go to
``<folder>/analysis/*.csv`` and ``<folder>/analysis.h5``, the figures to ``<folder>/figures/``,
and an existing ``<folder>/summary.json`` is updated with the blocks.
"""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np

from .. import units
from . import clumps as _cl
from . import coherence as _co
from . import contrast as _ct
from . import growth as _gr
from . import oscillation as _os
from .output import atomic_write_text, jsonable, write_csv, write_h5

__all__ = ["analyze", "human_summary", "compute", "write_outputs"]


def _deck_option(deck: dict, key: str, given, default):
    if given is not None:
        return float(given)
    try:
        return float(deck["analysis"][key])
    except (KeyError, TypeError, ValueError):
        return default


def _density_cm3(data) -> float:
    try:
        return float(data.deck["units"]["density_cm3"])
    except (KeyError, TypeError, ValueError):
        return 1.0e10


def _growth_blocks(data, options) -> tuple[dict, list[dict], dict]:
    s = data.series
    theory = data.theory or None
    modes = _gr.fit_modes(s.t, s.mode_amplitude, data.length, theory)
    n_cm3 = _density_cm3(data)
    for row in modes:
        row["k_per_cm"] = units.wavenumber_per_cm(row["k"], n_cm3)
    # the headline mode: largest theoretical growth among the recorded modes
    with_theory = [r for r in modes if r["theory"] is not None and r["theory"] > 0]
    if with_theory:
        head = max(with_theory, key=lambda r: r["theory"])
        head = dict(head, selected_by="largest theoretical growth")
    else:
        fitted = [r for r in modes if r["measured"] is not None]
        if fitted:
            head = dict(max(fitted, key=lambda r: r["measured"]),
                        selected_by="largest measured growth (no growing theory mode)")
        elif modes:
            head = dict(modes[0], selected_by="no theory and no fit")
        else:
            head = {"mode": None, "k": None, "measured": None, "measured_err": None,
                    "theory": None, "ratio": None, "window": None, "status": _gr.NO_PHASE}
    if head.get("measured") is not None and head.get("window"):
        head["growth_time_ns"] = units.growth_time_ns(head["measured"], n_cm3)
    g_fast = None
    if theory and isinstance(theory.get("fastest"), dict):
        g_fast = theory["fastest"].get("growth")
    head["theory_fastest"] = g_fast
    g_ref = head.get("theory") or None
    fe = _gr.fit_field_energy(s.t, s.field_energy, g_ref)
    fe["mode"] = head.get("mode")
    return head, modes, fe


def _snapshot_choice(snaps, names):
    """Indices of the density snapshot with the largest max delta n/n of any species, and the last."""
    dens = np.asarray(snaps.density, float)
    if dens.ndim != 3 or dens.shape[0] == 0:
        return []
    mean = dens.mean(axis=2, keepdims=True)
    with np.errstate(divide="ignore", invalid="ignore"):
        dmax = np.nanmax(np.where(mean > 0, dens / mean - 1.0, np.nan), axis=2)
    score = np.nanmax(np.where(np.isfinite(dmax), dmax, -np.inf), axis=1)
    i_pk = int(np.argmax(score))
    out = [("peak", i_pk), ("end", dens.shape[0] - 1)]
    return out


def _clump_blocks(data, threshold) -> tuple[dict, dict]:
    """Summary block and tables for clumps and density spectra."""
    n_cm3 = _density_cm3(data)
    snaps = data.snapshots
    dx = data.length / data.cells
    tables = {"clumps": [], "sizes": [], "spectra": []}
    per = {}
    for label, i in _snapshot_choice(snaps, data.names):
        t = float(snaps.t[i])
        dens = np.asarray(snaps.density[i], float)
        entry = {"t": t, "t_ns": units.time_ns(t, n_cm3), "index": i, "by_species": {}}
        widths_all = []
        spectra = {}
        for s, name in enumerate(data.names):
            cl = _cl.find_clumps(dens[s], data.length, threshold)
            for j, c in enumerate(cl):
                c["width_cm"] = units.length_cm(c["width"], n_cm3)
                c["position_cm"] = units.length_cm(c["position"], n_cm3)
                tables["clumps"].append((label, t, name, j, c))
            w = [c["width"] for c in cl]
            widths_all += w
            entry["by_species"][name] = {
                "count": len(cl),
                "size_median": float(np.median(w)) if w else None,
                "size_median_cm": units.length_cm(float(np.median(w)), n_cm3) if w else None,
                "peak_max": max((c["peak"] for c in cl), default=None)}
            spectra[name] = _cl.density_power_spectrum(dens[s], data.length)
        k, P_tot = _cl.density_power_spectrum(dens.sum(axis=0), data.length)
        spectra["total"] = (k, P_tot)
        edges, counts = _cl.size_histogram(widths_all, dx, data.length)
        tables["sizes"].append((label, t, edges, counts))
        tables["spectra"].append((label, t, spectra))
        med = float(np.median(widths_all)) if widths_all else None
        entry.update({"count": len(widths_all), "size_median": med,
                      "size_median_cm": units.length_cm(med, n_cm3) if med is not None else None,
                      "histogram": {"edges": edges, "edges_cm": edges * units.skin_depth_cm(n_cm3),
                                    "counts": counts}})
        per[label] = entry
    head = dict(per.get("peak") or {"count": 0, "size_median": None, "size_median_cm": None})
    head["threshold"] = threshold
    head["snapshot"] = "peak" if "peak" in per else None
    head["definition"] = ("connected grid regions with delta n/n > threshold (periodic), any "
                          "species, at the density snapshot of maximum contrast; size = FWHM")
    head["end"] = per.get("end")
    return head, tables


def _coherence_blocks(data, drop, bulk_gamma, kmax_factor, max_particles) -> tuple[dict, dict]:
    n_cm3 = _density_cm3(data)
    modes = int(math.ceil(kmax_factor * data.cells / 2))
    per, tables = {}, {}
    for label, snap in (("peak", data.peak), ("end", data.end)):
        if snap is None:
            continue
        entry = {"t": float(snap.t), "t_ns": units.time_ns(float(snap.t), n_cm3),
                 "by_species": {}}
        spec = {}
        for s, name in enumerate(data.names):
            x = snap.x.get(name) if isinstance(snap.x, dict) else None
            if x is None or len(x) == 0:
                continue
            r = _co.species_coherence(x, data.length, modes, drop=drop, density_cm3=n_cm3,
                                      bulk_gamma=bulk_gamma, max_particles=max_particles,
                                      seed=s)
            spec[name] = (r.pop("k"), r.pop("power"), r["noise_floor"])
            if r["k_cutoff"] is not None:
                r["k_cutoff_per_cm"] = units.wavenumber_per_cm(r["k_cutoff"], n_cm3)
            entry["by_species"][name] = r
        tables[label] = (entry["t"], spec)
        best = [(n, r) for n, r in entry["by_species"].items() if r["k_cutoff"] is not None]
        if best:
            name, r = max(best, key=lambda nr: nr[1]["k_cutoff"])
            entry.update({"k_cutoff": r["k_cutoff"], "frequency_cutoff_hz": r["frequency_cutoff_hz"],
                          "noise_floor": r["noise_floor"], "species": name,
                          "lower_bound": r["lower_bound"], "status": r["status"]})
        else:
            floors = [r["noise_floor"] for r in entry["by_species"].values() if r["noise_floor"]]
            entry.update({"k_cutoff": None, "frequency_cutoff_hz": None,
                          "noise_floor": max(floors) if floors else None, "species": None,
                          "lower_bound": False, "status": "no cutoff above the noise floor"
                          if floors else "no particle positions"})
        per[label] = entry
    src = "peak" if "peak" in per else ("end" if "end" in per else None)
    head = {"k_cutoff": None, "frequency_cutoff_hz": None, "bulk_gamma": bulk_gamma,
            "noise_floor": None, "status": "no particle snapshot"}
    if src:
        head.update(per[src])
    head.update({"bulk_gamma": bulk_gamma, "snapshot": src, "drop": drop,
                 "noise_safety": _co.NOISE_SAFETY, "k_max": 2 * math.pi * modes / data.length,
                 "kmax_factor": kmax_factor, "assumption": _co.ASSUMPTION,
                 "criterion": "largest k with |F|^2 >= drop x its peak; reported only if "
                              "drop x peak >= noise_safety x noise_floor (1/N_macro)"})
    if head.get("k_cutoff") is not None:
        head["k_cutoff_per_cm"] = units.wavenumber_per_cm(head["k_cutoff"], n_cm3)
        head["frequency_cutoff_ghz"] = head["frequency_cutoff_hz"] / 1e9
    if src == "peak" and "end" in per:
        head["end"] = {k: per["end"][k] for k in ("t", "k_cutoff", "frequency_cutoff_hz",
                                                  "noise_floor", "species", "status")}
    return head, tables


def compute(data, *, bulk_gamma=None, clump_threshold=None, coherence_drop=None,
            coherence_kmax_factor=None, max_particles: int | None = None):
    """(blocks, tables): the summary blocks and the arrays behind them (for files and figures)."""
    deck = data.deck or {}
    bulk = _deck_option(deck, "bulk_gamma", bulk_gamma, 1.0)
    thr = _deck_option(deck, "clump_threshold", clump_threshold, _cl.DEFAULT_THRESHOLD)
    drop = _deck_option(deck, "coherence_drop", coherence_drop, 0.5)
    kmf = _deck_option(deck, "coherence_kmax_factor", coherence_kmax_factor, 4.0)
    if not (math.isfinite(bulk) and bulk >= 1):
        raise ValueError(f"bulk_gamma must be >= 1 (got {bulk:g})")
    if not (math.isfinite(thr) and thr > 0):
        raise ValueError(f"clump_threshold must be > 0 (got {thr:g})")
    if not 0 < drop < 1:
        raise ValueError(f"coherence_drop must be in (0, 1) (got {drop:g})")
    if not kmf >= 1:
        raise ValueError(f"coherence_kmax_factor must be >= 1 (got {kmf:g})")
    n_cm3 = _density_cm3(data)
    head, modes, fe = _growth_blocks(data, {})
    contrast = _ct.contrast_block(data.series, list(data.names), n_cm3)
    clumps, cl_tables = _clump_blocks(data, thr)
    coh, co_tables = _coherence_blocks(data, drop, bulk, kmf, max_particles)
    blocks = {"growth": head, "modes": modes, "field_energy_growth": fe, "contrast": contrast,
              "clumps": clumps, "coherence": coh, "oscillation": _os.oscillation_block(data),
              "analysis_options": {"bulk_gamma": bulk, "clump_threshold": thr,
                                   "coherence_drop": drop, "coherence_kmax_factor": kmf,
                                   "max_particles": max_particles}}
    tables = {"clumps": cl_tables, "coherence": co_tables}
    return jsonable(blocks), tables


def analyze(source, folder=None, bulk_gamma=None, clump_threshold=None, coherence_drop=None,
            write=True, *, coherence_kmax_factor=None, max_particles=None, figures=True) -> dict:
    """Analyse a run (a RunData, or a run folder path read with :func:`streamsim.io.read_run`).

    Returns the JSON-safe summary blocks; with ``write`` and a folder (given, or the source
    folder) also writes the CSV/HDF5 tables, the figures and updates summary.json if present.
    """
    if isinstance(source, (str, Path)):
        from ..io import read_run
        folder = Path(source) if folder is None else folder
        data = read_run(source)
    else:
        data = getattr(source, "data", source)  # a Result is accepted too
        if folder is None and getattr(source, "folder", None) is not None:
            folder = source.folder
    blocks, tables = compute(data, bulk_gamma=bulk_gamma, clump_threshold=clump_threshold,
                             coherence_drop=coherence_drop,
                             coherence_kmax_factor=coherence_kmax_factor,
                             max_particles=max_particles)
    if write and folder is not None:
        write_outputs(data, blocks, tables, folder, figures=figures)
    return blocks


def _col(values):
    return np.array([np.nan if v is None else v for v in values], dtype=float)


def write_outputs(data, blocks, tables, folder, figures: bool = True) -> list[Path]:
    """CSV tables under <folder>/analysis/, <folder>/analysis.h5, figures, summary.json update."""
    folder = Path(folder)
    out_dir = folder / "analysis"
    n_cm3 = _density_cm3(data)
    skin = units.skin_depth_cm(n_cm3)
    written = []
    h5 = {}
    # growth per mode
    m = blocks["modes"]
    cols = ["mode", "k", "k_per_cm", "measured", "measured_err", "systematic", "theory", "ratio"]
    rows = [[r.get(c) for c in cols] + [(r["window"] or [None, None])[0],
                                         (r["window"] or [None, None])[1], r["status"]] for r in m]
    written.append(write_csv(out_dir / "growth_modes.csv", cols + ["t0", "t1", "status"], rows))
    h5["growth/modes"] = {c: _col([r.get(c) for r in m]) for c in cols}
    h5["growth/modes"]["t0"] = _col([(r["window"] or [None])[0] for r in m])
    h5["growth/modes"]["t1"] = _col([(r["window"] or [None, None])[1] for r in m])
    h5["growth/modes"]["status"] = np.array([r["status"] for r in m], dtype=object)
    # contrast time series
    s = data.series
    t = np.asarray(s.t, float)
    names = list(data.names) + ["total"]
    header = ["t", "t_ns"] + [f"max_{n}" for n in names] + [f"rms_{n}" for n in names]
    cmax = np.asarray(s.contrast_max, float)
    crms = np.asarray(s.contrast_rms, float)
    tns = t * units.time_ns(1.0, n_cm3)
    written.append(write_csv(out_dir / "contrast.csv", header,
                             (np.concatenate([[t[i], tns[i]], cmax[i], crms[i]]).tolist()
                              for i in range(t.size))))
    h5["contrast"] = {"t": t, "t_ns": tns, "max": cmax, "rms": crms,
                      "@attrs": {"columns": ",".join(names)}}
    # clumps
    ct = tables["clumps"]
    ccols = ["position", "position_cm", "width", "width_cm", "extent", "peak", "mass",
             "fraction", "excess"]
    written.append(write_csv(out_dir / "clumps.csv", ["snapshot", "t", "species", "index"] + ccols,
                             ([lab, tt, sp, j] + [c.get(k) for k in ccols]
                              for lab, tt, sp, j, c in ct["clumps"])))
    for lab in ("peak", "end"):
        sel = [(tt, sp, j, c) for L_, tt, sp, j, c in ct["clumps"] if L_ == lab]
        g = {k: _col([c.get(k) for *_, c in sel]) for k in ccols}
        g["species"] = np.array([sp for _, sp, _, _ in sel], dtype=object)
        g["t"] = _col([tt for tt, *_ in sel])
        h5[f"clumps/{lab}"] = g
    rows = []
    for lab, tt, edges, counts in ct["sizes"]:
        for i, c in enumerate(counts):
            rows.append([lab, tt, edges[i], edges[i + 1], edges[i] * skin, edges[i + 1] * skin,
                         int(c)])
        h5[f"clump_sizes/{lab}"] = {"edges": edges, "edges_cm": edges * skin, "counts": counts,
                                    "@attrs": {"t": tt}}
    written.append(write_csv(out_dir / "clump_sizes.csv", ["snapshot", "t", "width_lo", "width_hi",
                             "width_lo_cm", "width_hi_cm", "count"], rows))
    rows = []
    sp_names = None
    for lab, tt, spectra in ct["spectra"]:
        sp_names = list(spectra)
        k = spectra[sp_names[0]][0]
        for i in range(k.size):
            rows.append([lab, tt, i, k[i], k[i] / skin] + [spectra[n][1][i] for n in sp_names])
        h5[f"density_spectrum/{lab}"] = {"k": k, "k_per_cm": k / skin,
                                         **{f"P_{n}": spectra[n][1] for n in sp_names},
                                         "@attrs": {"t": tt}}
    if sp_names:
        written.append(write_csv(out_dir / "density_spectrum.csv",
                                 ["snapshot", "t", "mode", "k", "k_per_cm"]
                                 + [f"P_{n}" for n in sp_names], rows))
    # form factors
    rows = []
    ff_names = []
    for lab, (tt, spec) in tables["coherence"].items():
        ff_names = list(spec)
        if not ff_names:
            continue
        k = spec[ff_names[0]][0]
        for i in range(k.size):
            rows.append([lab, tt, i + 1, k[i], k[i] / skin]
                        + [spec[n][1][i] for n in ff_names])
        h5[f"form_factor/{lab}"] = {"k": k, "k_per_cm": k / skin,
                                    **{f"F2_{n}": spec[n][1] for n in ff_names},
                                    "@attrs": {"t": tt, **{f"noise_floor_{n}": spec[n][2]
                                                           for n in ff_names}}}
    if rows:
        written.append(write_csv(out_dir / "form_factor.csv",
                                 ["snapshot", "t", "mode", "k", "k_per_cm"]
                                 + [f"F2_{n}" for n in ff_names], rows))
    h5["summary"] = {"@attrs": {"json": json.dumps(blocks)}}
    written.append(write_h5(folder / "analysis.h5", h5))
    if figures:
        from ..plots import make_figures
        written += make_figures(data, blocks, folder)
    summ = folder / "summary.json"
    if summ.is_file():
        try:
            current = json.loads(summ.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            current = None
        if isinstance(current, dict):
            current.update(blocks)
            atomic_write_text(summ, json.dumps(jsonable(current), indent=2) + "\n")
            written.append(summ)
    return written


def _f(v, fmt=".4g"):
    return "n/a" if v is None else format(v, fmt)


def human_summary(blocks: dict, density_cm3: float) -> str:
    """A few plain lines for the terminal: growth, clump formation, clumps, coherence cutoff.

    ``density_cm3`` converts what the blocks do not already carry in physical units."""
    lines = []
    g = blocks.get("growth") or {}
    if g.get("mode") is None:
        lines.append("growth: no box mode recorded")
    elif g.get("measured") is None:
        th = f" (theory {_f(g.get('theory'))} w_p)" if g.get("theory") is not None else ""
        lines.append(f"growth, mode {g['mode']} (k = {_f(g.get('k'))} w_p/c): "
                     f"no linear phase found{th}")
    else:
        w = g.get("window") or [None, None]
        th = (f" vs theory {_f(g['theory'])} (ratio {_f(g.get('ratio'), '.3f')})"
              if g.get("theory") is not None else " (no theory for this mode)")
        lines.append(f"growth, mode {g['mode']} (k = {_f(g.get('k'))} w_p/c): measured "
                     f"{_f(g['measured'])} +- {_f(g.get('measured_err'), '.2g')} w_p{th}, "
                     f"fitted over t = {_f(w[0], '.3g')}..{_f(w[1], '.3g')} /w_p")
    fe = blocks.get("field_energy_growth") or {}
    if fe.get("measured") is not None:
        th = f" (theory 2*gamma = {_f(fe['theory'])})" if fe.get("theory") else ""
        lines.append(f"field energy grows at {_f(fe['measured'])} +- "
                     f"{_f(fe.get('measured_err'), '.2g')} w_p{th}")
    for o in blocks.get("oscillation") or []:
        if o.get("omega_r") is None:
            lines.append(f"seeded mode {o['mode']}: {o.get('note', 'no oscillation to fit')}")
            continue
        th = (f" vs {o['theory_model']} root {_f(o['theory_omega_r'], '.4f')} "
              f"{'+' if o['theory_rate'] >= 0 else '-'} {_f(abs(o['theory_rate']), '.4f')}i"
              if o.get("theory_omega_r") is not None else "")
        lines.append(f"seeded mode {o['mode']} (k = {_f(o['k'])} w_p/c) rings at "
                     f"{_f(o['omega_r'], '.4f')} +- {_f(o.get('omega_r_err'), '.1g')} w_p, "
                     f"rate {_f(o['rate'], '.4f')} +- {_f(o.get('rate_err'), '.1g')} w_p{th}")
    n_fit = sum(1 for r in blocks.get("modes") or [] if r.get("measured") is not None)
    n_all = len(blocks.get("modes") or [])
    if n_all:
        lines.append(f"modes with a linear phase: {n_fit} of {n_all}")
    c = dict(blocks.get("contrast") or {})
    if c.get("t_unity") is not None and c.get("t_unity_ns") is None:
        c["t_unity_ns"] = units.time_ns(c["t_unity"], density_cm3)
    if c.get("max") is None:
        lines.append("density contrast: not recorded")
    else:
        if c.get("t_unity") is not None:
            lines.append(f"clumps form (max dn/n >= 1) at t = {_f(c['t_unity'], '.4g')} /w_p = "
                         f"{_f(c.get('t_unity_ns'), '.4g')} ns; max dn/n = {_f(c['max'], '.3g')} "
                         f"at t = {_f(c.get('t_max'), '.4g')} /w_p")
        else:
            lines.append(f"no clump formation: max dn/n = {_f(c['max'], '.3g')} < 1 "
                         f"(at t = {_f(c.get('t_max'), '.4g')} /w_p)")
    cl = blocks.get("clumps") or {}
    if cl.get("count"):
        lines.append(f"clumps (dn/n > {_f(cl.get('threshold'), 'g')}): {cl['count']} at "
                     f"t = {_f(cl.get('t'), '.4g')} /w_p, median FWHM "
                     f"{_f(cl.get('size_median'), '.3g')} c/w_p = "
                     f"{_f(cl.get('size_median_cm'), '.3g')} cm")
    else:
        lines.append(f"no clump above dn/n > {_f(cl.get('threshold'), 'g')}")
    co = blocks.get("coherence") or {}
    G = co.get("bulk_gamma", 1.0)
    if co.get("frequency_cutoff_hz") is not None:
        lb = " (lower bound: the spectrum is still high at the largest k computed)" \
            if co.get("lower_bound") else ""
        lines.append(f"coherent emission up to nu_c = {co['frequency_cutoff_hz'] / 1e9:.4g} GHz "
                     f"(k_c = {_f(co.get('k_cutoff'), '.4g')} w_p/c, {co.get('species')}, "
                     f"bulk Gamma = {G:g}, noise floor 1/N = {_f(co.get('noise_floor'), '.2g')})"
                     f"{lb}")
        lines.append("  assumes particles on the same trajectory emitting along the motion; "
                     "nu_c = Gamma c k_c / 2 pi")
    elif co.get("snapshot") is None:
        lines.append("coherence: no particle snapshot in this run")
    else:
        lines.append(f"coherence: no cutoff above the noise floor (1/N = "
                     f"{_f(co.get('noise_floor'), '.2g')}, bulk Gamma = {G:g})")
    return "\n".join(lines)
