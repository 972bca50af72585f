"""Figures of a run (matplotlib, Agg, PNG) in <folder>/figures/.

    make_figures(data: RunData, blocks: dict, folder) -> list[Path]

``blocks`` are the analysis blocks of :func:`streamsim.analysis.analyze`; spectra that are not in
the blocks (density power spectra, form factors) are recomputed from ``data``.  Every file is
written atomically.
"""
from __future__ import annotations

import io
import math
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

from . import units  # noqa: E402

__all__ = ["make_figures", "FIGURES"]

#: file name -> what it shows
FIGURES = {
    "field_energy.png": "field energy vs time (log) with the fitted and theoretical slopes",
    "growth_rates.png": "measured growth rate per box mode with error bars, on the theory curve",
    "phase_space.png": "x-u phase space of each species at a few times",
    "contrast.png": "max and rms delta n/n vs time per species and for the total",
    "clumps.png": "clump size spectrum and density power spectrum P(k)",
    "coherence.png": "form factor |F(k)|^2 per species with the cutoff and the noise floor",
}


def _save(fig, path: Path) -> Path:
    from .analysis.output import atomic_write_bytes
    buf = io.BytesIO()
    fig.tight_layout()
    fig.savefig(buf, format="png", dpi=110)
    plt.close(fig)
    return atomic_write_bytes(path, buf.getvalue())


def _n_cm3(data) -> float:
    try:
        return float(data.deck["units"]["density_cm3"])
    except (KeyError, TypeError, ValueError):
        return 1.0e10


def _field_energy(data, blocks, path):
    s = data.series
    t = np.asarray(s.t, float)
    W = np.asarray(s.field_energy, float)
    fig, ax = plt.subplots(figsize=(7, 4.5))
    ok = W > 0
    ax.semilogy(t[ok], W[ok], color="0.2", lw=1.2, label="field energy")
    fe = blocks.get("field_energy_growth") or {}
    g = blocks.get("growth") or {}
    if fe.get("window"):
        t0, t1 = fe["window"]
        sel = (t >= t0) & (t <= t1) & ok
        if sel.any():
            tt = t[sel]
            a = np.log(W[sel]) - fe["measured"] * tt
            b = float(np.mean(a))
            ax.semilogy(tt, np.exp(b + fe["measured"] * tt), "--", lw=2,
                        label=f"fit: {fe['measured']:.4g} w_p (= 2 x {fe['measured'] / 2:.4g})")
            if fe.get("theory"):
                tm = 0.5 * (t0 + t1)
                Wm = math.exp(b + fe["measured"] * tm)
                ax.semilogy(tt, Wm * np.exp(fe["theory"] * (tt - tm)), ":", lw=2,
                            label=f"theory: 2 x {fe['theory'] / 2:.4g} w_p")
            ax.axvspan(t0, t1, color="0.9", zorder=0)
    elif g.get("theory"):
        ax.text(0.02, 0.95, "no linear phase found", transform=ax.transAxes, va="top")
    ax.set_xlabel("t [1/w_p]")
    ax.set_ylabel("field energy [normalised]")
    ax.set_title(f"field energy (mode {g.get('mode')} has the largest theoretical growth)")
    ax.legend(loc="lower right", fontsize=8)
    return _save(fig, path)


def _growth_rates(data, blocks, path):
    fig, ax = plt.subplots(figsize=(7, 4.5))
    th = data.theory or {}
    curve = th.get("curve") if isinstance(th, dict) else None
    if isinstance(curve, dict) and curve.get("k") is not None and curve.get("growth") is not None:
        ax.plot(curve["k"], curve["growth"], "-", color="0.4", lw=1.2, label="linear theory")
    rows = blocks.get("modes") or []
    kt = [r["k"] for r in rows if r.get("theory") is not None]
    gt = [r["theory"] for r in rows if r.get("theory") is not None]
    if kt:
        ax.plot(kt, gt, "o", mfc="none", color="0.4", ms=5, label="theory, box modes")
    km = [r["k"] for r in rows if r.get("measured") is not None]
    gm = [r["measured"] for r in rows if r.get("measured") is not None]
    em = [r.get("measured_err") or 0.0 for r in rows if r.get("measured") is not None]
    if km:
        ax.errorbar(km, gm, yerr=em, fmt="s", ms=4, capsize=3, label="measured (PIC)")
    none = [r["k"] for r in rows if r.get("measured") is None]
    if none:
        ax.plot(none, np.zeros(len(none)), "x", color="0.6", ms=4,
                label="no linear phase found")
    ax.axhline(0, color="0.8", lw=0.8)
    ax.set_xlabel("k [w_p/c]")
    ax.set_ylabel("growth rate [w_p]")
    ax.set_title("growth rate per box mode")
    ax.legend(fontsize=8)
    return _save(fig, path)


def _phase_space(data, blocks, path):
    ps = data.phase_space
    names = list(data.names)
    t = np.asarray(getattr(ps, "t", []), float) if ps is not None else np.array([])
    n_t = min(4, t.size)
    if n_t == 0:
        fig, ax = plt.subplots(figsize=(6, 3))
        ax.text(0.5, 0.5, "no phase-space samples in this run", ha="center", va="center")
        ax.set_axis_off()
        return _save(fig, path)
    pick = np.unique(np.linspace(0, t.size - 1, n_t).round().astype(int))
    fig, axes = plt.subplots(len(pick), 1, figsize=(7, 2.2 * len(pick)), sharex=True,
                             squeeze=False)
    for ax, i in zip(axes[:, 0], pick):
        for name in names:
            x = np.asarray(ps.x.get(name, []))
            u = np.asarray(ps.u.get(name, []))
            if x.ndim == 2 and x.shape[0] > i:
                ax.plot(x[i], u[i], ",", alpha=0.6, label=name)
        ax.set_ylabel("u = gamma beta")
        ax.text(0.01, 0.9, f"t = {t[i]:.4g} /w_p", transform=ax.transAxes, fontsize=8)
    axes[0, 0].legend(loc="upper right", fontsize=8, markerscale=20)
    axes[-1, 0].set_xlabel("x [c/w_p]")
    axes[-1, 0].set_xlim(0, data.length)
    fig.suptitle("phase space")
    return _save(fig, path)


def _contrast(data, blocks, path):
    s = data.series
    t = np.asarray(s.t, float)
    cmax = np.asarray(s.contrast_max, float)
    crms = np.asarray(s.contrast_rms, float)
    names = list(data.names) + ["total"]
    fig, ax = plt.subplots(figsize=(7, 4.5))
    for j, name in enumerate(names[:cmax.shape[1]]):
        line, = ax.semilogy(t, np.where(cmax[:, j] > 0, cmax[:, j], np.nan), lw=1.2,
                            label=f"max, {name}")
        ax.semilogy(t, np.where(crms[:, j] > 0, crms[:, j], np.nan), "--", lw=0.9,
                    color=line.get_color(), label=f"rms, {name}")
    ax.axhline(1.0, color="0.5", lw=0.8, ls=":")
    c = blocks.get("contrast") or {}
    if c.get("t_unity") is not None:
        ax.axvline(c["t_unity"], color="0.5", lw=0.8)
        ax.text(c["t_unity"], 1.05, f" max dn/n = 1 at t = {c['t_unity']:.4g} /w_p "
                f"({c['t_unity_ns']:.3g} ns)", fontsize=8)
    ax.set_xlabel("t [1/w_p]")
    ax.set_ylabel("delta n / n")
    ax.set_title("density contrast")
    ax.legend(fontsize=7, ncol=2)
    return _save(fig, path)


def _clumps(data, blocks, path):
    from .analysis.clumps import density_power_spectrum
    n_cm3 = _n_cm3(data)
    skin = units.skin_depth_cm(n_cm3)
    cl = blocks.get("clumps") or {}
    fig, (a1, a2) = plt.subplots(1, 2, figsize=(11, 4.2))
    for lab, entry in (("max contrast", cl), ("end", cl.get("end") or {})):
        h = entry.get("histogram") if isinstance(entry, dict) else None
        if h and entry.get("count"):
            e = np.asarray(h["edges"], float)
            a1.stairs(np.asarray(h["counts"]), e, label=f"{lab}, t = {entry.get('t', 0):.4g}")
    a1.set_xlabel("clump width (FWHM) [c/w_p]")
    a1.set_ylabel("clumps")
    if cl.get("threshold") is not None:
        a1.set_title(f"clump sizes (dn/n > {cl['threshold']:g})")
    sec = a1.secondary_xaxis("top", functions=(lambda x: x * skin, lambda x: x / skin))
    sec.set_xlabel("cm")
    if a1.get_legend_handles_labels()[0]:
        a1.legend(fontsize=8)
    else:
        a1.text(0.5, 0.5, "no clump above the threshold", ha="center", transform=a1.transAxes)
    snaps = data.snapshots
    dens = np.asarray(snaps.density, float)
    for lab, entry in (("max contrast", cl), ("end", cl.get("end") or {})):
        i = entry.get("index") if isinstance(entry, dict) else None
        if i is None or dens.ndim != 3 or i >= dens.shape[0]:
            continue
        for s, name in enumerate(data.names):
            k, P = density_power_spectrum(dens[i, s], data.length)
            a2.loglog(k[1:], np.where(P[1:] > 0, P[1:], np.nan), lw=1,
                      ls="-" if lab != "end" else "--", label=f"{name}, {lab}")
    a2.set_xlabel("k [w_p/c]")
    a2.set_ylabel("P(k) of delta n/n")
    a2.set_title("density power spectrum")
    if a2.get_legend_handles_labels()[0]:
        a2.legend(fontsize=8)
    return _save(fig, path)


def _coherence(data, blocks, path):
    from .analysis.coherence import form_factor
    co = blocks.get("coherence") or {}
    fig, ax = plt.subplots(figsize=(7, 4.5))
    snap = data.peak if co.get("snapshot") == "peak" else data.end
    modes = int(math.ceil(float(co.get("kmax_factor") or 4.0) * data.cells / 2))
    if snap is None:
        ax.text(0.5, 0.5, "no particle snapshot in this run", ha="center", va="center")
        ax.set_axis_off()
        return _save(fig, path)
    by = co.get("by_species") or {}
    k = 2 * math.pi * np.arange(1, modes + 1) / data.length
    for name in data.names:
        x = snap.x.get(name) if isinstance(snap.x, dict) else None
        if x is None or len(x) == 0:
            continue
        P = np.abs(form_factor(np.asarray(x, float), data.length, modes)[1:]) ** 2
        line, = ax.loglog(k, np.where(P > 0, P, np.nan), lw=0.8, label=f"|F|^2, {name}")
        floor = (by.get(name) or {}).get("noise_floor") or 1.0 / len(x)
        ax.axhline(floor, color=line.get_color(), ls=":", lw=1,
                   label=f"noise floor 1/N, {name}")
        kc = (by.get(name) or {}).get("k_cutoff")
        if kc:
            ax.axvline(kc, color=line.get_color(), ls="--", lw=1, label=f"k_c, {name}")
    floors = [v.get("noise_floor") for v in by.values() if v.get("noise_floor")]
    if floors:
        lo, hi = ax.get_ylim()
        ax.set_ylim(max(lo, 1e-4 * min(floors)), hi)
    ax.axvline(math.pi * data.cells / data.length, color="0.6", lw=0.8, ls="-.",
               label="grid Nyquist")
    ax.set_xlabel("k [w_p/c]")
    ax.set_ylabel("|F(k)|^2")
    nu = co.get("frequency_cutoff_hz")
    txt = (f"nu_c = {nu / 1e9:.4g} GHz (bulk Gamma = {co.get('bulk_gamma', 1):g})" if nu
           else "no cutoff above the noise floor")
    ax.set_title(f"form factor at t = {snap.t:.4g} /w_p; {txt}", fontsize=9)
    ax.legend(fontsize=7)
    return _save(fig, path)


def make_figures(data, blocks: dict, folder) -> list[Path]:
    """Write every figure of :data:`FIGURES` into <folder>/figures/; returns their paths."""
    out = Path(folder) / "figures"
    out.mkdir(parents=True, exist_ok=True)
    makers = {"field_energy.png": _field_energy, "growth_rates.png": _growth_rates,
              "phase_space.png": _phase_space, "contrast.png": _contrast,
              "clumps.png": _clumps, "coherence.png": _coherence}
    paths = []
    for name, fn in makers.items():
        try:
            paths.append(fn(data, blocks, out / name))
        finally:
            plt.close("all")
    return paths
