"""Contrast block: max and rms delta n/n against time per species and for the pair total,
the saturation level and the clump-formation time t_unity (first max delta n/n >= 1).

Summary key: ``contrast``. Table: ``contrast``. Figure: ``contrast.png``.
"""
from __future__ import annotations

import numpy as np

from ... import units
from .. import contrast as _ct
from ..base import BlockResult, Context, Figure, ScanColumn, Table, at_ns, fmt

NAME = "contrast"

SCAN_COLUMNS = [
    ScanColumn(("contrast", "t_unity_ns"), "ns",
               "first time max delta n/n reaches 1 (clump formation)"),
    ScanColumn(("contrast", "max"), "", "maximum delta n/n over the run"),
    ScanColumn(("contrast", "initial_level"), "",
               "delta n/n the growth started from (fitted, at its start)"),
    ScanColumn(("contrast", "t_unity_for_level_ns"), "ns",
               "formation time from analysis.initial_level"),
]


def compute(ctx: Context) -> BlockResult:
    data, n_cm3 = ctx.data, ctx.density_cm3
    s = data.series
    names = list(data.names)
    block = _ct.contrast_block(s, names, n_cm3)
    cold = [sp.name for sp in data.deck.species if sp.is_cold]
    block["cold_species"] = cold
    block["max_grid_limited"] = bool(cold)
    block["max_note"] = ("cold beams form caustics after saturation (density ~ |x - x0|^-1/2 at "
                         "the turning points of trapped orbits), so max delta n/n has no "
                         "converged value: the grid sets it; give the beams a temperature"
                         if cold else None)
    block["uniform"] = _ct.stayed_uniform(block.get("max"))
    warnings = _start(block, ctx)
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
                               "for the total", _draw)], _lines(block, n_cm3), warnings,
                       values={"uniform": block["uniform"]})


def _seed_level(deck) -> float:
    """max |delta n/n| over the box of the loaded perturbation (the seed), 0 without one."""
    from ...loading import seed_phases, seeded_density
    p = deck.perturbation
    if not p.amplitude or not p.modes:
        return 0.0
    x = np.linspace(0.0, deck.box.length, 16 * deck.box.cells, endpoint=False)
    return float(np.max(np.abs(seeded_density(x, deck.box.length, p.modes, p.amplitude,
                                              seed_phases(deck)) - 1.0)))


def _start(block: dict, ctx: Context) -> list[str]:
    """contrast.initial_level, efolds_to_unity, t_unity_for_level_ns; the warning when the
    seed lies below the loading's own noise."""
    from ...loading import seed_phases
    data, n_cm3 = ctx.data, ctx.density_cm3
    deck = data.deck
    s = data.series
    S = len(data.names)
    cmax = np.nanmax(np.asarray(s.contrast_max, float)[:, :S], axis=1)
    fit = _ct.initial_level(s.t, cmax)
    p = deck.perturbation
    seed = _seed_level(deck)
    block["seed"] = {"modes": list(p.modes), "amplitude": p.amplitude, "phases": p.phases,
                     "phase_values": [float(v) for v in seed_phases(deck)],
                     "band": bool(p.band), "max_delta": seed}
    block.update({"initial_level": None, "initial_level_t": None, "growth_rate": None,
                  "efolds_to_unity": None, "t_unity_for_level": None,
                  "t_unity_for_level_ns": None, "level_asked": ctx.options.initial_level,
                  "seed_below_noise": None})
    block["initial_level_definition"] = (
        f"max delta n/n of the fitted exponential phase (ln fit below {_ct.LINEAR_TOP:g}, rms "
        f"<= {_ct.FIT_RMS:g}, >= {_ct.MIN_EFOLDS:g} e-folds) at its start, after the loading "
        "has phase-mixed")
    warnings = []
    if fit is None:
        return warnings
    lvl, rate = fit["level_t0"], fit["rate"]
    block.update({"initial_level": lvl, "initial_level_t": fit["t0"],
                  "initial_level_t_ns": units.time_ns(fit["t0"], n_cm3), "growth_rate": rate,
                  "efolds_to_unity": float(np.log(1.0 / lvl)) if lvl < 1 else 0.0})
    asked = ctx.options.initial_level
    tu = block.get("t_unity")
    if asked is not None and tu is not None:
        gam, gam_err, source = _linear_rate(ctx)
        if gam is None:
            gam, gam_err, source = rate, None, ("the fitted rate of max delta n/n (no linear "
                                                "rate of the fastest mode, measured or theory)")
        tl, tl_err = _ct.t_unity_for_level_err(tu, lvl, gam, asked, gam_err, fit["rms"])
        block.update({"t_unity_for_level": tl, "t_unity_for_level_err": tl_err,
                      "t_unity_for_level_ns": units.time_ns(tl, n_cm3),
                      "t_unity_for_level_err_ns": (units.time_ns(tl_err, n_cm3)
                                                   if tl_err is not None else None),
                      "extrapolation_rate": gam, "extrapolation_rate_err": gam_err,
                      "extrapolation_rate_source": source})
        block["extrapolation"] = (f"t_unity + ln(initial_level / {asked:g}) / gamma with gamma = "
                                  f"{gam:.4g} /omega_p, {source}: the stretch below the measured "
                                  "start is linear growth of the fastest mode; error from gamma's "
                                  "error and the fit rms of ln(max delta n/n) at the start")
    t = np.asarray(s.t, float)
    early = (t > 0) & (t < fit["t0"])
    if seed > 0 and early.sum() >= 3:
        noise = float(np.nanmedian(cmax[early]))     # the loading's own level before growth
        block["loading_noise"] = noise
        below = bool(noise > _ct.NOISE_MARGIN * seed)
        block["seed_below_noise"] = below
        if below:
            warnings.append(f"the seed (max delta n/n = {seed:.2g}) lies below the loading's own "
                            f"noise (median max delta n/n = {noise:.2g} before the growth), so "
                            "t_unity is set by the loading, not by perturbation.amplitude; "
                            + ("contrast.t_unity_for_level_ns extrapolates from "
                               f"analysis.initial_level = {asked:g}; raise the amplitude or the "
                               "particles per cell to measure it directly"
                               if asked is not None else
                               "raise the amplitude, or set analysis.initial_level to "
                               "extrapolate from a level of your own"))
    return warnings


def _linear_rate(ctx: Context):
    """(gamma, its error, which) of the fastest mode's linear growth: the growth block's
    measured rate when it has one, else the linear theory's (no error)."""
    g = ctx.results.get("growth")
    head = g.summary.get("growth", {}) if g is not None else {}
    meas, err, th = (head.get(k) for k in ("measured", "measured_err", "theory"))
    if meas is not None and meas > 0:
        return float(meas), (float(err) if err is not None else None), \
            f"measured linear growth rate of the fastest mode (mode {head.get('mode')})"
    if th is not None and th > 0:
        return float(th), None, (f"linear theory's growth rate of the fastest mode (mode "
                                 f"{head.get('mode')}; not measured in this run, no error)")
    return None, None, None


def _lines(c: dict, n_cm3: float) -> list[str]:
    if c.get("max") is None:
        return ["density contrast: not recorded"]
    if c.get("uniform"):
        return [f"the plasma stayed uniform: max delta n/n = {fmt(c['max'], '.2g')} over the run "
                f"(round-off, <= {_ct.UNIFORM_LEVEL:g}): nothing seeded the instability; add a "
                "[perturbation] (a Vlasov run has no particle noise to grow from)"]
    if c.get("t_unity") is not None:
        out = [f"clumps form (max delta n/n >= 1) at t = {fmt(c['t_unity'])} /omega_p = "
               f"{fmt(c.get('t_unity_ns'))} ns; max delta n/n = {fmt(c['max'], '.3g')} "
               f"at t = {at_ns(c.get('t_max'), n_cm3)}"
               + (" (not converged: cold-beam caustics, set by the grid; give the beams a "
                  "temperature)" if c.get("max_grid_limited") else "")]
    else:
        out = [f"no clump formation: max delta n/n = {fmt(c['max'], '.3g')} < 1 "
               f"(at t = {at_ns(c.get('t_max'), n_cm3)})"]
    if c.get("initial_level") is not None:
        line = (f"  grown from delta n/n = {fmt(c['initial_level'], '.2g')} at t = "
                f"{at_ns(c.get('initial_level_t'), n_cm3, '.3g')} "
                f"({fmt(c.get('efolds_to_unity'), '.3g')} e-folds to unity)")
        if c.get("t_unity_for_level_ns") is not None:
            e = c.get("t_unity_for_level_err_ns")
            line += (f"; from delta n/n = {fmt(c.get('level_asked'), '.2g')}: t_unity = "
                     f"{fmt(c['t_unity_for_level_ns'])}"
                     + (f" +- {e:.2g}" if e is not None else " (no error: theory rate)")
                     + f" ns (extrapolated at gamma = {fmt(c.get('extrapolation_rate'), '.3g')}"
                     f" omega_p, {(c.get('extrapolation_rate_source') or '').split(' (')[0]})")
        out.append(line)
    return out


#: a contrast below this is round-off of a uniform density (float64 sums over the grid)
ROUND_OFF = 1e-12


def _draw(res: BlockResult, data):
    from ...plots import (DN, T_LABEL, WP, legend, log_limits, plt, positive, say_empty,
                          summary_value, time_ns_axis, top_positive)
    tab = res.tables["contrast"]
    t = tab.col("t")
    fig, ax = plt.subplots(figsize=(7.5, 4.8))
    curves = []
    for name in tab.attrs["columns"].split(","):
        cmax, crms = tab.col(f"max_{name}"), tab.col(f"rms_{name}")
        curves += [cmax, crms]
        line, = ax.plot(t, positive(cmax), lw=1.2, label=f"max, {name}")
        ax.plot(t, positive(crms), "--", lw=0.9, color=line.get_color(), label=f"rms, {name}")
    ax.axhline(1.0, color="0.5", lw=0.8, ls=":")
    if log_limits(ax, curves, decades=8.0, percentile=2.0):
        ax.set_yscale("log")
        top = top_positive(curves)
        if top < ROUND_OFF:
            say_empty(ax, f"the density stayed uniform to round-off (max {DN} = {top:.2g})",
                      y=0.8)
    else:
        say_empty(ax, "the density stayed uniform: no contrast above zero")
    tu, tu_ns = summary_value(res.summary, "t_unity"), summary_value(res.summary, "t_unity_ns")
    if tu is not None:
        ns = f" = {tu_ns:.3g} ns" if tu_ns is not None else ""
        ax.axvline(tu, color="0.5", lw=0.8, label=f"max {DN} = 1 at $t$ = {tu:.4g}/{WP}{ns}")
    ax.set_xlabel(T_LABEL)
    time_ns_axis(ax, data.deck.units.density_cm3)
    ax.set_ylabel(f"density contrast {DN} [dimensionless]")
    ax.set_title("density contrast", fontsize=10, pad=32)
    legend(ax, fontsize=7, ncol=2, loc="lower right")
    return fig
