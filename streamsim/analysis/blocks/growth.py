"""Growth block: the growth rate of every recorded box mode beside its linear theory, the
headline mode (largest theoretical growth) and the field-energy fit.

Summary keys: ``growth`` (the headline mode), ``modes`` (every mode), ``field_energy_growth``.
Table: ``growth_modes``. Figures: ``field_energy.png``, ``growth_rates.png``.
"""
from __future__ import annotations

import math

import numpy as np

from ... import units
from ...numbers import finite_or_none
from .. import growth as _gr
from ..base import BlockResult, Context, Figure, ScanColumn, Table, fmt, rate_ns

NAME = "growth"
from ..noise_growth import TARGET_EFOLDS as _TARGET  # noqa: E402

SCAN_COLUMNS = [
    ScanColumn(("growth", "mode"), "", "box mode of the headline growth fit (largest theoretical "
               "growth)"),
    ScanColumn(("growth", "fit"), "", "which fit gave growth.measured", text=True),
    ScanColumn(("growth", "k"), "omega_p/c", "its wavenumber"),
    ScanColumn(("growth", "measured"), "omega_p", "measured field-amplitude growth rate"),
    ScanColumn(("growth", "measured_err"), "omega_p", "1-sigma error of the fit"),
    ScanColumn(("growth", "theory"), "omega_p", "linear theory for the same box mode"),
    ScanColumn(("growth", "ratio"), "", "measured / theory"),
    ScanColumn(("growth", "growth_time_ns"), "ns", "measured e-folding time 1/growth.measured"),
    ScanColumn(("growth", "growth_time_err_ns"), "ns", "its 1-sigma error from the fit"),
    ScanColumn(("growth", "theory_growth_time_ns"), "ns",
               "theory e-folding time of the same box mode"),
    ScanColumn(("theory", "fastest", "growth"), "omega_p", "theory growth rate of the fastest mode "
               "(any k)"),
    ScanColumn(("theory", "fastest", "growth_time_ns"), "ns", "its e-folding time"),
]

#: the field-energy fit of a noise-seeded run sums the modes whose theory rate is at least this
#: fraction of the headline mode's (the top of the unstable band, whose energy grows nearly at
#: 2 gamma; slower band modes would hold the sum back) - common practice
_BAND = 0.8

_MODE_COLUMNS = ("mode", "k", "k_per_cm", "measured", "measured_err", "systematic", "theory",
                 "ratio")
_TEXT_COLUMNS = ("status", "fit")


def _theory_rates(disp) -> tuple[dict[int, float], float | None, float | None]:
    """(box mode -> linear growth, largest linear rate, fastest root's rate) of a Dispersion."""
    if disp is None:
        return {}, None, None
    rates = {m.mode: m.growth for m in disp.box_modes}
    fast = disp.fastest.growth if disp.fastest is not None else None
    vals = [v for v in [*rates.values(), fast] if finite_or_none(v) is not None]
    return rates, (max(vals) if vals else None), fast


def _headline(modes: list[dict]) -> dict:
    with_theory = [r for r in modes if r["theory"] is not None and r["theory"] > 0]
    if with_theory:
        return dict(max(with_theory, key=lambda r: r["theory"]),
                    selected_by="largest theoretical growth")
    fitted = [r for r in modes if r["measured"] is not None]
    if fitted:
        return dict(max(fitted, key=lambda r: r["measured"]),
                    selected_by="largest measured growth (no growing theory mode)")
    if modes:
        return dict(modes[0], selected_by="no theory and no fit")
    return {"mode": None, "k": None, "measured": None, "measured_err": None, "theory": None,
            "ratio": None, "window": None, "status": _gr.NO_PHASE}


def _bases(disp, deck) -> dict:
    """box mode -> normal-mode basis of the theory at its growing root (growing modes only)."""
    if disp is None:
        return {}
    from ... import theory
    out = {}
    for b in disp.box_modes:
        if b.growth and b.growth > 0 and b.omega_r is not None:
            try:
                basis = theory.mode_basis(b.k, complex(b.omega_r, b.growth), deck.species,
                                          disp.model)
            except (ValueError, ArithmeticError):
                basis = None
            if basis is not None:
                out[b.mode] = basis
    return out


def compute(ctx: Context) -> BlockResult:
    data, n_cm3 = ctx.data, ctx.density_cm3
    s = data.series
    deck = data.deck
    rates, g_max, g_fast = _theory_rates(ctx.theory)
    ppc = max((sp.particles_per_cell for sp in deck.species), default=None)
    seeded = _gr.is_seeded_quiet_start(deck)
    if seeded:
        modes = _gr.fit_modes(s.t, s.mode_amplitude, data.length, rates, g_max)
        for row in modes:
            row["fit"] = _gr.STRAIGHT if row["measured"] is not None else None
            row["reason"] = None
            row["particles_per_cell_needed"] = None
    else:
        dens = s.density_modes if "density_modes" in s else None
        modes = _gr.fit_modes_noise(
            s.t, s.mode_amplitude, data.length, rates, g_max, density_modes=dens,
            charges=[sp.charge for sp in deck.species],
            bases=_bases(ctx.theory, deck) if dens is not None else {},
            particles_per_cell=ppc)
    for row in modes:
        row["k_per_cm"] = units.wavenumber_per_cm(row["k"], n_cm3)
    head = _headline(modes)
    head.setdefault("fit", None)
    if head.get("mode") is not None and head.get("measured") is None and seeded:
        from .. import noise_growth as ng
        lv = ng.levels(s.t, np.abs(np.asarray(s.mode_amplitude)[:, head["mode"] - 1]) ** 2)
        head["reason"] = ng.reason_text(lv, _gr.MIN_EFOLDS) + " (seeded quiet start)"
    head.setdefault("reason", None)
    head.setdefault("particles_per_cell_needed", None)
    head["start"] = "seeded quiet start" if seeded else "noise-seeded"
    meas, err, th = (finite_or_none(head.get(k)) for k in ("measured", "measured_err", "theory"))
    head["growth_time_ns"] = units.growth_time_ns(meas, n_cm3) if meas and meas > 0 else None
    head["growth_time_err_ns"] = (head["growth_time_ns"] * err / meas
                                  if head["growth_time_ns"] is not None and err is not None
                                  else None)
    head["theory_growth_time_ns"] = units.growth_time_ns(th, n_cm3) if th and th > 0 else None
    head["theory_fastest"] = g_fast
    g_head = finite_or_none(head.get("theory"))
    band = [m for m, g in rates.items() if g is not None and g_head and g >= _BAND * g_head]
    if seeded or not band:
        fe = _gr.fit_field_energy(s.t, s.field_energy, head.get("theory") or None)
        fe["fit"] = _gr.STRAIGHT + " (total field energy)"
    else:
        fe = _gr.fit_band_energy(s.t, s.mode_amplitude, data.length, band,
                                 head.get("theory") or None)
    _gr.flag_field_energy(fe)
    fe["mode"] = head.get("mode")
    table = Table("growth_modes", {
        **{c: _col([r.get(c) for r in modes]) for c in _MODE_COLUMNS},
        "t0": _col([(r["window"] or [None, None])[0] for r in modes]),
        "t1": _col([(r["window"] or [None, None])[1] for r in modes]),
        **{c: np.array([r.get(c) or "" for r in modes], dtype=object) for c in _TEXT_COLUMNS}},
        units={"k": "omega_p/c", "k_per_cm": "1/cm", "measured": "omega_p",
               "measured_err": "omega_p", "systematic": "omega_p", "theory": "omega_p",
               "t0": "1/omega_p", "t1": "1/omega_p"})
    return BlockResult(NAME, {"growth": head, "modes": modes, "field_energy_growth": fe},
                       {"growth_modes": table},
                       [Figure("field_energy.png", "field energy vs time (log) with the fitted "
                               "and theoretical slopes", _draw_field_energy),
                        Figure("growth_rates.png", "measured growth rate per box mode with "
                               "error bars, on the theory curve", _draw_growth_rates)],
                       _lines(head, modes, fe, n_cm3))


def _col(values) -> np.ndarray:
    return np.array([np.nan if finite_or_none(v) is None else float(v) for v in values], float)


def _lines(g: dict, modes: list[dict], fe: dict, n_cm3: float) -> list[str]:
    lines = []
    stable = g.get("measured") is None and g.get("theory") is not None and g["theory"] <= 0
    if g.get("mode") is None:
        lines.append("growth: no box mode recorded")
    elif stable:
        lines.append("growth: no box mode grows in the linear theory of this deck (a stable "
                     "plasma): nothing grows to fit; seeded stable modes, if any, are fitted as "
                     "oscillations")
    elif g.get("measured") is None:
        th = (f" (theory {fmt(g.get('theory'))} omega_p, e-folding time "
              f"{rate_ns(g.get('theory'), n_cm3)})" if g.get("theory") is not None else "")
        lines.append(f"growth, mode {g['mode']} (k = {fmt(g.get('k'))} omega_p/c): "
                     f"{g.get('status') or _gr.NO_PHASE}{th}")
        if g.get("reason"):
            lines.append(f"  why: {g['reason']}")
        if g.get("particles_per_cell_needed"):
            lines.append(f"  advice: about {g['particles_per_cell_needed']} particles per cell "
                         f"(noise amplitude ~ 1/sqrt(N)) would give "
                         f"{fmt(_TARGET, '.0f')} e-folds from noise to saturation; or seed the "
                         f"mode with a quiet start")
    else:
        w = g.get("window") or [None, None]
        th = (f" vs theory {fmt(g['theory'])} (ratio {fmt(g.get('ratio'), '.3f')})"
              if g.get("theory") is not None else " (no theory for this mode)")
        if str(g.get("selected_by", "")).startswith("largest measured"):
            th += (" -- no box mode grows in the deck's linear theory, so this is the fastest "
                   "measured mode, not a linear rate")
        tau = (f"; e-folding time {fmt(g.get('growth_time_ns'), '.3g')} +- "
               f"{fmt(g.get('growth_time_err_ns'), '.1g')} ns (theory "
               f"{rate_ns(g.get('theory'), n_cm3)})")
        sy = finite_or_none(g.get("systematic"))
        syst = (f" (incl. systematic {fmt(sy, '.2g')}: half the slope change between the "
                "window's halves)" if sy is not None else "")
        lines.append(f"growth, mode {g['mode']} (k = {fmt(g.get('k'))} omega_p/c): measured "
                     f"{fmt(g['measured'])} +- {fmt(g.get('measured_err'), '.2g')} omega_p{syst}"
                     f"{th}{tau}, "
                     f"fitted over t = {fmt(w[0], '.3g')}..{fmt(w[1], '.3g')} /omega_p "
                     f"[{g.get('fit')}]")
    if fe.get("measured") is not None:
        th = (f" (theory 2*gamma = {fmt(fe['theory'])}, {rate_ns(fe['theory'], n_cm3)})"
              if fe.get("theory") else "")
        lines.append(f"field energy grows at {fmt(fe['measured'])} +- "
                     f"{fmt(fe.get('measured_err'), '.2g')} omega_p, e-folding time "
                     f"{rate_ns(fe['measured'], n_cm3)}{th} [{fe.get('fit')}]")
        if fe.get("flag"):
            lines.append(f"  warning: {fe['flag']}")
    if modes:
        n_fit = sum(1 for r in modes if r.get("measured") is not None)
        lines.append(f"modes with a linear phase: {n_fit} of {len(modes)}")
    return lines


# -- figures ----------------------------------------------------------------------------------
def _draw_field_energy(res: BlockResult, data):
    from ...plots import T_LABEL, WP, legend, plt, say_empty, time_ns_axis
    s = data.series
    t = np.asarray(s.t, float)
    W = np.asarray(s.field_energy, float)
    fig, ax = plt.subplots(figsize=(7.5, 4.8))
    ok = W > 0
    if ok.any():
        ax.semilogy(t[ok], W[ok], color="0.2", lw=1.2, label="field energy")
    else:
        say_empty(ax, "the field stayed zero")
        if t.size:
            ax.set_xlim(t[0], t[-1])
    fe = res.summary["field_energy_growth"]
    g = res.summary["growth"]
    if fe.get("window"):
        t0, t1 = fe["window"]
        sel = (t >= t0) & (t <= t1) & ok
        if sel.any():
            tt = t[sel]
            b = float(np.mean(np.log(W[sel]) - fe["measured"] * tt))
            ax.semilogy(tt, np.exp(b + fe["measured"] * tt), "--", lw=2,
                        label=f"fit: {fe['measured']:.4g} {WP} "
                              f"(= 2 $\\times$ {fe['measured'] / 2:.4g})")
            if fe.get("theory"):
                tm = 0.5 * (t0 + t1)
                Wm = math.exp(b + fe["measured"] * tm)
                ax.semilogy(tt, Wm * np.exp(fe["theory"] * (tt - tm)), ":", lw=2,
                            label=f"theory: 2 $\\times$ {fe['theory'] / 2:.4g} {WP}")
            ax.axvspan(t0, t1, color="0.9", zorder=0)
    elif g.get("theory"):
        ax.text(0.02, 0.95, _gr.NO_PHASE, transform=ax.transAxes, va="top")
    ax.set_xlabel(T_LABEL)
    time_ns_axis(ax, data.deck.units.density_cm3)
    ax.set_ylabel(r"field energy [$n_{ref} m_e c^2 \, c/\omega_p$]")
    ax.set_title(f"field energy (mode {g.get('mode')} has the largest theoretical growth)",
                 fontsize=10, pad=32)
    legend(ax, loc="lower right", fontsize=8)
    return fig


def _draw_growth_rates(res: BlockResult, data):
    from ...plots import K_LABEL, legend, plt
    fig, ax = plt.subplots(figsize=(7, 4.5))
    disp = data.theory
    if disp is not None and len(disp.k):
        ax.plot(disp.k, disp.growth, "-", color="0.4", lw=1.2, label="linear theory")
    tab = res.tables["growth_modes"]
    k, th, gm, em = (tab.col(c) for c in ("k", "theory", "measured", "measured_err"))
    has_th = np.isfinite(th)
    if has_th.any():
        ax.plot(k[has_th], th[has_th], "o", mfc="none", color="0.4", ms=5,
                label="theory, box modes")
    fit = np.isfinite(gm)
    if fit.any():
        ax.errorbar(k[fit], gm[fit], yerr=np.nan_to_num(em[fit]), fmt="s", ms=4, capsize=3,
                    label="measured (PIC)")
    if (~fit).any():
        ax.plot(k[~fit], np.zeros(int((~fit).sum())), "x", color="0.6", ms=4,
                label=_gr.NO_PHASE)
    ax.axhline(0, color="0.8", lw=0.8)
    ax.set_xlabel(K_LABEL)
    ax.set_ylabel(r"growth rate [$\omega_p$]")
    ax.set_title("growth rate per box mode", fontsize=10)
    legend(ax, fontsize=8)
    return fig
