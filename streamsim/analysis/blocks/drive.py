"""Drive block (runs with a ``[drive]`` block only): the imposed current against the carrying
limit, the mean parallel field it needed, the Lorentz factors it gave, the energy balance, and
the linear theory at the driven state beside the measured growth.

Summary key: ``drive``. Tables: ``drive_series``, ``gamma_histogram``. Figures: ``drive.png``,
``gamma_histogram.png``. An undriven run gets nothing from this block (no key, no file).

Theory at the driven state: at a time t* (``drive.theory_time``; else the middle of the growth
block's fit window; else the end of the run) each species' drift is replaced by the measured
drift four-velocity of its mean flow (:func:`streamsim.analysis.driven.bulk_drift_u`), its
temperature kept from the deck, and the deck's dispersion model is solved again for the fastest
mode and for every recorded box mode (the instantaneous roots; a slowly changing drift is
assumed). Each mode's growth is then fitted (:func:`streamsim.analysis.growth.fit_modes`) with
these rates as its theory; the headline is the mode of largest driven-state growth.
"""
from __future__ import annotations

import dataclasses

import numpy as np

from ... import units
from ...drive import carrying_limit, max_abs_current
from .. import driven as _dv
from .. import growth as _gr
from ..base import BlockResult, Context, Figure, ScanColumn, Table, fmt

NAME = "drive"

SCAN_COLUMNS = [
    ScanColumn(("drive", "ratio"), "", "max |J_ext| / carrying limit"),
    ScanColumn(("drive", "e0_max"), "m_e c omega_p / e", "max |E0| over the run"),
    ScanColumn(("drive", "energy_balance_error"), "", "energy-balance residual / energy gained"),
]


def compute(ctx: Context) -> BlockResult:
    data = ctx.data
    deck, s = data.deck, data.series
    if deck.drive is None or "drive_e0" not in s:
        return BlockResult(NAME, {})
    n_cm3 = ctx.density_cm3
    names = list(data.names)
    t = np.asarray(s.t, float)
    e0 = np.asarray(s.drive_e0, float)
    lim = carrying_limit(deck.species)
    jmax = max_abs_current(deck.drive, float(t[-1]) if t.size else deck.time.end)
    residual, balance = _dv.energy_balance(s)
    e_max = float(np.max(np.abs(e0))) if e0.size else 0.0
    gmax = np.asarray(s.drive_gamma_max)
    gbulk = np.asarray(s.drive_gamma_bulk)
    rate = _dv.late_rate(t, e0)
    jx_end = float(s.drive_current_ext[-1]) if t.size else None
    sign = 1.0 if (jx_end or 0.0) >= 0 else -1.0
    entry = {
        "current": deck.drive.current, "profile": deck.drive.profile,
        "current_statA_cm2": units.current_statA_cm2(deck.drive.current, n_cm3),
        "current_A_m2": units.current_A_m2(deck.drive.current, n_cm3),
        "carrying_limit": lim,
        "carrying_limit_statA_cm2": units.current_statA_cm2(lim, n_cm3),
        "current_max": jmax, "ratio": jmax / lim, "charge_starved": bool(jmax > lim),
        "e0_max": e_max, "e0_max_statv_cm": units.efield_statv_cm(e_max, n_cm3),
        "e0_final": float(e0[-1]) if e0.size else None,
        "current_final": float(s.drive_current[-1]) if t.size else None,
        "current_ext_final": jx_end,
        "e0_rate_final": rate,
        "e0_rate_starved": (jx_end - sign * lim) if jx_end is not None else None,
        "gamma_max": {n: float(gmax[:, i].max()) for i, n in enumerate(names)},
        "gamma_bulk_final": {n: float(gbulk[-1, i]) for i, n in enumerate(names)},
        "gamma_mean_final": {n: float(s.drive_gamma_mean[-1, i]) for i, n in enumerate(names)},
        "gamma_rms_final": {n: float(s.drive_gamma_rms[-1, i]) for i, n in enumerate(names)},
        "energy_balance_error": balance,
        "units": {"current": "e n_ref c", "e0_max": "m_e c omega_p / e",
                  "e0_max_statv_cm": "statV/cm"},
        "assumptions": "uniform imposed current J_ext(t); periodic box; no transverse fields; "
                       "E0 by Ampere's law dE0/dt = -(<J> - J_ext), k != 0 by Poisson",
        "theory_driven": _theory_at_driven_state(ctx),
    }
    cols = {"t": t, "e0": e0, "current": s.drive_current, "current_ext": s.drive_current_ext,
            "work": s.drive_work, "energy_residual": residual}
    for i, n in enumerate(names):
        for k in ("mean", "rms", "max", "bulk"):
            cols[f"gamma_{k}_{n}"] = getattr(s, f"drive_gamma_{k}")[:, i]
    series_tab = Table("drive_series", cols, units={"t": "1/omega_p", "e0": "m_e c omega_p/e",
                                                    "current": "e n_ref c",
                                                    "current_ext": "e n_ref c"})
    hist_tab = _histogram_table(s, names)
    return BlockResult(NAME, {"drive": entry}, {"drive_series": series_tab,
                                                "gamma_histogram": hist_tab},
                       [Figure("drive.png", "E0, <J>, J_ext and the Lorentz factors vs time",
                               _draw),
                        Figure("gamma_histogram.png", "distribution of log10(gamma - 1) per "
                               "species at the field cadence", _draw_hist)],
                       _lines(entry, names))


def _histogram_table(s, names) -> Table:
    ht = np.asarray(s.drive_gamma_hist_t, float)
    H = np.asarray(s.drive_gamma_hist, float)
    edges = np.asarray(s.drive_gamma_hist_edges, float)
    B = edges.size - 1
    cols = {"t": np.repeat(ht, B), "log10_gamma_m1_lo": np.tile(edges[:-1], ht.size),
            "log10_gamma_m1_hi": np.tile(edges[1:], ht.size)}
    for i, n in enumerate(names):
        cols[f"fraction_{n}"] = H[:, i, :].reshape(-1) if ht.size else np.zeros(0)
    return Table("gamma_histogram", cols, units={"t": "1/omega_p"})


def _theory_time(ctx) -> tuple[float, str]:
    d, t = ctx.data.deck.drive, np.asarray(ctx.data.series.t, float)
    if d.theory_time is not None:
        return float(d.theory_time), "drive.theory_time"
    growth = ctx.results.get("growth")
    win = (growth.summary.get("growth") or {}).get("window") if growth is not None else None
    if win and None not in win:
        return 0.5 * (float(win[0]) + float(win[1])), "middle of the growth fit window"
    return float(t[-1]), "end of the run"


def _theory_at_driven_state(ctx) -> dict:
    from ... import theory
    data = ctx.data
    t_star, why = _theory_time(ctx)
    g, u = _dv.mean_four_velocity(data)
    tt = np.asarray(data.series.t, float)
    ud = np.atleast_2d(_dv.bulk_drift_u(g, u))
    drifts = {n: float(np.interp(t_star, tt, ud[:, i])) for i, n in enumerate(data.names)}
    out = {"t": t_star, "t_chosen_by": why, "drift_u": drifts, "fastest": None,
           "headline_mode": None}
    species = tuple(dataclasses.replace(sp, drift_u=drifts[sp.name])
                    for sp in data.deck.species)
    try:
        fast = theory.fastest_mode(species)
        if fast is not None:
            out["fastest"] = {"k": fast[0], "growth": fast[1], "omega_r": fast[2]}
        amp = np.asarray(data.series.mode_amplitude)
        if amp.ndim == 2 and amp.shape[1]:
            k = 2.0 * np.pi * np.arange(1, amp.shape[1] + 1) / data.length
            rates = np.asarray(theory.growth_curve(species, k)[0], float)
            th = {m + 1: float(r) for m, r in enumerate(rates) if np.isfinite(r)}
            g_top = max([*th.values(), fast[1] if fast is not None else 0.0])
            rows = _gr.fit_modes(tt, amp, data.length, th, g_top if g_top > 0 else None)
            best = max(rows, key=lambda r: r["theory"] if r["theory"] is not None else -np.inf)
            out["headline_mode"] = {key: best.get(key) for key in
                                    ("mode", "k", "theory", "measured", "measured_err", "ratio",
                                     "window", "status")}
            out["modes"] = [{key: r.get(key) for key in ("mode", "theory", "measured", "ratio")}
                            for r in rows]
    except Exception as ex:  # noqa: BLE001 - the block reports the failure and goes on
        out["error"] = f"{ex.__class__.__name__}: {ex}"
    return out


def _lines(e: dict, names) -> list[str]:
    lines = [f"drive: max |J_ext| = {fmt(e['current_max'])} e n_ref c = {fmt(e['ratio'], '.3g')}"
             f" x the carrying limit {fmt(e['carrying_limit'])}"
             + (" (charge-starved)" if e["charge_starved"] else ""),
             f"  max |E0| = {fmt(e['e0_max'])} m_e c omega_p/e = "
             f"{fmt(e['e0_max_statv_cm'])} statV/cm; energy balance error "
             f"{fmt(e['energy_balance_error'], '.2e')} of the energy gained",
             "  Lorentz factors at the end: " + ", ".join(
                 f"{n} bulk {fmt(e['gamma_bulk_final'][n])} (max {fmt(e['gamma_max'][n])})"
                 for n in names)]
    th = e.get("theory_driven") or {}
    hm = th.get("headline_mode")
    if hm:
        lines.append(f"  theory at the driven state (t = {fmt(th['t'], '.4g')}, "
                     f"{th['t_chosen_by']}): mode {hm['mode']} grows at {fmt(hm['theory'])} omega_p"
                     f", measured {fmt(hm['measured'])}"
                     + (f" (ratio {fmt(hm['ratio'], '.3f')})" if hm.get("ratio") else
                        f" ({hm.get('status')})" if hm.get("measured") is None else ""))
    elif th.get("fastest"):
        lines.append(f"  theory at the driven state (t = {fmt(th['t'], '.4g')}): fastest growth "
                     f"{fmt(th['fastest']['growth'])} omega_p at k = "
                     f"{fmt(th['fastest']['k'])} omega_p/c")
    return lines


def _draw(res: BlockResult, data):
    from ...plots import T_LABEL, legend, plt, positive, time_ns_axis
    tab = res.tables["drive_series"]
    t = tab.col("t")
    fig, (a1, a2, a3) = plt.subplots(3, 1, figsize=(7.5, 8.4), sharex=True)
    a1.plot(t, tab.col("e0"), lw=1)
    a1.set_ylabel(r"$E_0$ [$m_e c \omega_p/e$]")
    time_ns_axis(a1, data.deck.units.density_cm3)
    a2.plot(t, tab.col("current"), lw=1, label=r"$\langle J \rangle$")
    a2.plot(t, tab.col("current_ext"), lw=1, ls="--", label=r"$J_{ext}$")
    lim = res.summary["drive"]["carrying_limit"]
    a2.axhline(lim, color="0.5", lw=0.8, ls=":", label="carrying limit")
    a2.axhline(-lim, color="0.5", lw=0.8, ls=":")
    a2.set_ylabel(r"$J$ [$e n_{ref} c$]")
    legend(a2, fontsize=7)
    for n in data.names:
        line, = a3.plot(t, positive(tab.col(f"gamma_bulk_{n}")), lw=1,
                        label=f"bulk $\\Gamma$, {n}")
        a3.plot(t, positive(tab.col(f"gamma_max_{n}")), lw=0.8, ls=":", color=line.get_color(),
                label=f"max $\\gamma$, {n}")
    a3.set_yscale("log")
    a3.set_ylabel(r"Lorentz factor $\gamma$ [dimensionless]")
    a3.set_xlabel(T_LABEL)
    legend(a3, fontsize=7)
    return fig


def _draw_hist(res: BlockResult, data):
    """The distribution of log10(gamma - 1) against time, one panel per species: colour is the
    fraction of the species' particles in each bin (log scale, with its colour bar)."""
    from matplotlib.colors import LogNorm

    from ...plots import T_LABEL, message_figure, plt, say_empty, time_ns_axis
    tab = res.tables["gamma_histogram"]
    if not len(tab):
        return message_figure("no gamma histogram in this run", (7, 4.5))
    times = np.unique(tab.col("t"))
    first = tab.where("t", times[0])
    edges = np.append(first.col("log10_gamma_m1_lo"), first.col("log10_gamma_m1_hi")[-1])
    B = edges.size - 1
    # time edges halfway between the recorded times (the first and last padded by half a step)
    if times.size > 1:
        mid = 0.5 * (times[1:] + times[:-1])
        t_edges = np.concatenate([[times[0] - (mid[0] - times[0])], mid,
                                  [times[-1] + (times[-1] - mid[-1])]])
    else:
        t_edges = np.array([times[0] - 0.5, times[0] + 0.5])
    fig, axes = plt.subplots(len(data.names), 1, figsize=(7.5, 3.2 * len(data.names)),
                             squeeze=False, sharex=True)
    for ax, n in zip(axes[:, 0], data.names):
        frac = np.full((B, times.size), np.nan)
        for j, tv in enumerate(times):
            part = tab.where("t", tv)
            f = np.asarray(part.col(f"fraction_{n}"), float)[:B]
            frac[:f.size, j] = np.where(f > 0, f, np.nan)
        ok = np.isfinite(frac)
        if not ok.any():
            say_empty(ax, f"no {n} particle recorded")
            continue
        # colour over at least three decades below 1 (a cold beam fills one bin: fraction 1)
        lo = min(max(float(np.nanmin(frac)), 1e-6), 1e-3)
        mesh = ax.pcolormesh(t_edges, edges, np.ma.masked_invalid(frac), cmap="viridis",
                             norm=LogNorm(vmin=lo, vmax=1.0), shading="flat")
        fig.colorbar(mesh, ax=ax, pad=0.02, label=f"fraction of {n} per bin")
        used = np.where(ok.any(axis=1))[0]
        pad = 2
        ax.set_ylim(edges[max(0, used[0] - pad)], edges[min(B, used[-1] + 1 + pad)])
        ax.set_ylabel(r"$\log_{10}(\gamma - 1)$" + f", {n} [dimensionless]")
    axes[-1, 0].set_xlabel(T_LABEL)
    time_ns_axis(axes[0, 0], data.deck.units.density_cm3)
    axes[0, 0].set_title(r"distribution of the Lorentz factor $\gamma$ (blank: no particle)",
                         fontsize=10, pad=32)
    return fig
