"""Resolution study: one deck at L levels of resolution, on the scan machinery.

Level l (l = 0..L-1) multiplies ``box.cells`` and every species' ``particles_per_cell`` by F^l
(F = ``factor``); ``time.dt`` is kept unless the numerical-health rules
(:func:`streamsim.health.auto_dt` at the level's cell size) ask for a shorter step
(``dt = "auto"`` decks stay "auto"). Decks with random loading or random phases run R replicas
per level (``random_seed`` + replica). The runs form a zip-mode :class:`streamsim.scan.Scan`, so a
study runs on a process pool or Dask and resumes exactly like a scan.

For each headline output, at each level: the mean over the replicas and its error (the larger of
the replicas' standard error of the mean and the runs' own error bars combined, sqrt(sum e_i^2)/R);
the change between the two finest levels; where the three finest levels are monotone, the observed
order p = ln((f_1 - f_2)/(f_2 - f_3)) / ln F and the Richardson estimate
f_3 + (f_3 - f_2)/(F^p - 1) (Richardson 1911; e.g. Roache 1998, Verification and Validation in
Computational Science and Engineering, ch. 5); and a verdict:

- ``grid-limited``: the run flags the output as set by the grid at the finest level;
- ``converged``: every level has a value, the finest level's error is below its value, and
  both |change| and |Richardson estimate - finest value| (when there is one) are <= the
  combined error of the two finest levels or <= ``tolerance`` x |finest value|;
- ``not converged``: otherwise, with the ``reason``.

The Richardson gap is also an error term of the finest value: ``error_terms`` holds it beside
the statistical error, ``total_err`` their quadrature sum.
"""
from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path

from ..numbers import finite_or_none

__all__ = ["OUTPUTS", "Output", "build_study", "assess_output", "collect_study",
           "write_study", "study_levels", "richardson", "DEFAULT_TOLERANCE", "draw_figure"]

DEFAULT_TOLERANCE = 0.10


@dataclass(frozen=True)
class Output:
    unit: str
    value: tuple[str, ...]             # summary.json path of the value
    err: tuple[str, ...] | None        # path of its error bar, if any
    limited: tuple[str, ...] | None    # path of a grid-limit flag
    bound: tuple[str, ...] | None = None   # path of the value when only a bound is reported

    @property
    def name(self) -> str:
        """Named after the summary.json key of its value, as a scan-table column is."""
        return ".".join(self.value)


OUTPUTS = (
    Output("omega_p", ("growth", "measured"), ("growth", "measured_err"), None),
    Output("ns", ("contrast", "t_unity_ns"), None, None),
    Output("", ("contrast", "max"), None, ("contrast", "max_grid_limited")),
    Output("cm", ("clumps", "size_median_cm"), ("clumps", "size_median_err_cm"),
           ("clumps", "grid_limited")),
    Output("omega_p/c", ("coherence", "k_cutoff"), ("coherence", "k_cutoff_err"),
           ("coherence", "grid_limited")),
    Output("Hz", ("coherence", "frequency_cutoff_hz"), ("coherence", "frequency_cutoff_err_hz"),
           ("coherence", "grid_limited"), ("coherence", "frequency_cutoff_lower_bound_hz")),
)


def study_levels(deck, factor: float, levels: int) -> list[dict]:
    """[{"cells", "particles_per_cell": {species: n}, "dt" (number or "auto")}] per level."""
    from ..health import auto_dt
    out = []
    for lev in range(levels):
        f = factor ** lev
        cells = int(round(deck.box.cells * f))
        ppc = {s.name: int(round(s.particles_per_cell * f)) for s in deck.species}
        if deck.time.dt_auto:
            dt = "auto"
        else:
            import dataclasses
            box = dataclasses.replace(deck.box, cells=cells)
            dt = min(deck.time.dt, auto_dt(box, deck.species, deck.time.end))
            if dt < deck.time.dt:
                dt = deck.time.end / math.ceil(deck.time.end / dt * (1 - 1e-12))
        out.append({"cells": cells, "particles_per_cell": ppc, "dt": dt})
    return out


def is_random(deck) -> bool:
    """Replicas differ only for random loading or random phases."""
    return any(s.loading == "random" for s in deck.species) or (
        deck.perturbation.phases == "random" and bool(deck.perturbation.modes))


def build_study(deck_path, *, factor: float = 2.0, levels: int = 3, replicas: int | None = None,
                overrides: list[str] | None = None, title: str | None = None):
    """The study as a zip-mode :class:`Scan` (axes box.cells, particles_per_cell per species,
    time.dt) and its levels. Raises DeckError (the deck) or ScanError."""
    from ..deck import load_deck
    from .spec import ScanError, load_scan
    if not factor > 1:
        raise ScanError("--factor", "must be > 1", factor)
    if not 2 <= levels <= 8:
        raise ScanError("--levels", "must be an integer from 2 to 8", levels)
    if replicas is not None and not 1 <= replicas <= 1000:
        raise ScanError("--replicas", "must be an integer from 1 to 1000", replicas)
    deck = load_deck(deck_path, overrides)
    lev = study_levels(deck, factor, levels)
    reps = replicas if replicas is not None else (3 if is_random(deck) else 1)
    if not is_random(deck):
        reps = 1
    axes = [{"name": "cells", "key": "box.cells", "values": [v["cells"] for v in lev]}]
    for s in deck.species:
        axes.append({"name": f"ppc_{s.name}", "key": f"species.{s.name}.particles_per_cell",
                     "values": [v["particles_per_cell"][s.name] for v in lev]})
    if not deck.time.dt_auto:
        axes.append({"name": "dt", "key": "time.dt", "values": [v["dt"] for v in lev]})
    raw = {"title": title or f"resolution study of {deck.title}", "combine": "zip",
           "replicas": max(reps, 1), "set": list(overrides or []), "axis": axes}
    if reps < 2:
        raw["replicas"] = 1
    if deck_path is not None:
        raw["base"] = str(Path(deck_path).resolve())
    if len(axes) and reps == 1 and levels < 2:
        raise ScanError("--levels", "must be >= 2", levels)
    scan = load_scan(raw)
    return scan, deck, lev, reps


def richardson(f1: float, f2: float, f3: float, factor: float):
    """(observed order p, extrapolated value) from three levels f1 (coarsest) .. f3 (finest)
    refined by ``factor`` each, or (None, None) when they are not monotone (Richardson 1911;
    Roache 1998, ch. 5)."""
    d1, d2 = f1 - f2, f2 - f3
    if d1 == 0 or d2 == 0 or (d1 > 0) != (d2 > 0):
        return None, None
    p = math.log(d1 / d2) / math.log(factor)
    denom = factor ** p - 1.0
    if not denom > 0:
        return p, None
    return p, f3 + (f3 - f2) / denom


def assess_output(levels: list[dict], factor: float, tolerance: float = DEFAULT_TOLERANCE,
                  limited: bool = False) -> dict:
    """change, order, extrapolated, error terms and verdict of one output from its levels
    [{"value", "err", ...}] (coarse to fine); ``limited``: grid-limited at the finest level.

    Verdict "converged" only when every level has a value, the error of the finest level is
    smaller than the value itself, and both the last change and the gap between the finest level
    and the Richardson estimate (where the three finest levels give one) lie within the
    statistical error of the two finest levels or within ``tolerance`` x |finest value|."""
    vals = [finite_or_none(lv.get("value")) for lv in levels]
    errs = [finite_or_none(lv.get("err")) for lv in levels]
    out = {"change": None, "relative_change": None, "combined_err": None, "order": None,
           "extrapolated": None, "richardson_gap": None, "error_terms": None,
           "total_err": None, "verdict": "not converged", "reason": None}
    reasons = []
    missing = [i for i, v in enumerate(vals) if v is None]
    if missing:
        reasons.append("no value at level " + ", ".join(str(i) for i in missing))
    comb = None
    within = []
    if len(vals) >= 2 and vals[-1] is not None and vals[-2] is not None:
        ch = vals[-1] - vals[-2]
        out["change"] = ch
        out["relative_change"] = ch / abs(vals[-1]) if vals[-1] else None
        if errs[-1] is not None or errs[-2] is not None:
            comb = math.sqrt((errs[-1] or 0.0) ** 2 + (errs[-2] or 0.0) ** 2)
        out["combined_err"] = comb
        within.append(("last change", ch))
    if len(vals) >= 3 and None not in vals[-3:]:
        out["order"], out["extrapolated"] = richardson(*vals[-3:], factor)
        if out["extrapolated"] is not None:
            out["richardson_gap"] = out["extrapolated"] - vals[-1]
            within.append(("Richardson gap", out["richardson_gap"]))
    terms = {"statistical": comb, "richardson_gap": (abs(out["richardson_gap"])
                                                      if out["richardson_gap"] is not None
                                                      else None)}
    have = [v for v in terms.values() if v is not None]
    out["error_terms"] = terms
    out["total_err"] = math.sqrt(sum(v * v for v in have)) if have else None
    f3 = vals[-1] if vals else None
    for what, d in within:
        if not (abs(d) <= (comb or 0.0) or (f3 is not None and abs(d) <= tolerance * abs(f3))):
            reasons.append(f"{what} {d:.3g} exceeds both the statistical error "
                           f"{'n/a' if comb is None else format(comb, '.2g')} and the tolerance "
                           f"{tolerance:g} x |finest value|")
    if f3 is not None and errs[-1] is not None and errs[-1] >= abs(f3):
        reasons.append(f"the finest level's error {errs[-1]:.2g} is not smaller than its value")
    if not within:
        reasons.append("fewer than two levels with a value")
    if not reasons:
        out["verdict"] = "converged"
    out["reason"] = "; ".join(reasons) or None
    if limited:
        out["verdict"] = "grid-limited"
        out["reason"] = "the finest level flags the output as set by the grid"
    return out


def collect_study(scan, out: Path, levels: list[dict], factor: float, replicas: int,
                  tolerance: float = DEFAULT_TOLERANCE) -> dict:
    """converge.json's content from the run folders of a finished (or partial) study."""
    from .tables import _get, run_folder
    from .worker import _read_json, read_state
    per_level: list[list[dict]] = [[] for _ in levels]
    for p in scan.points:
        folder = run_folder(out, p)
        state, _ = read_state(folder)
        if state != "completed":
            continue
        s = _read_json(folder / "summary.json") or {}
        per_level[p.point].append(s)
    outputs = {}
    for o in OUTPUTS:
        rows = []
        lim_last = False
        for li, lv in enumerate(levels):
            runs = per_level[li]
            vs, es, lims = [], [], []
            for s in runs:
                v = finite_or_none(_get(s, *o.value))
                if v is None and o.bound is not None:
                    v = finite_or_none(_get(s, *o.bound))
                if v is not None:
                    vs.append(v)
                    e = finite_or_none(_get(s, *o.err)) if o.err else None
                    if e is not None:
                        es.append(e)
                lims.append(bool(_get(s, *o.limited)) if o.limited else False)
            value = sum(vs) / len(vs) if vs else None
            err = None
            if vs:
                own = math.sqrt(sum(e * e for e in es)) / len(vs) if es else None
                sem = None
                if len(vs) >= 2:
                    m = value
                    sem = math.sqrt(sum((v - m) ** 2 for v in vs) / (len(vs) - 1) / len(vs))
                cands = [c for c in (own, sem) if c is not None]
                err = max(cands) if cands else None
            limited = bool(lims) and any(lims)
            rows.append({"cells": lv["cells"], "particles_per_cell": lv["particles_per_cell"],
                         "dt": lv["dt"], "value": value, "err": err, "runs": len(runs),
                         "grid_limited": limited})
            lim_last = limited
        res = assess_output(rows, factor, tolerance, limited=lim_last)
        outputs[o.name] = {"unit": o.unit, "levels": rows, **res}
    return {"deck": scan.title, "factor": factor, "levels": len(levels), "replicas": replicas,
            "tolerance": tolerance, "outputs": outputs,
            "verdict_rule": "grid-limited when the finest level flags the output as set by the "
                            "grid; converged when every level has a value, the finest error is "
                            "below the finest value, and both |change between the two finest "
                            "levels| and |Richardson estimate - finest value| are <= their "
                            "combined error or <= tolerance x |finest value|; else not "
                            "converged (see reason)",
            "error_rule": "per level: the larger of the replicas' standard error of the mean and "
                          "sqrt(sum of the runs' own errors^2)/R",
            "extrapolation": "Richardson from the three finest levels when monotone: "
                             "p = ln((f1-f2)/(f2-f3))/ln F, f3 + (f3-f2)/(F^p-1)"}


def write_study(study: dict, out: Path, figure: bool = True) -> list[Path]:
    """converge.json, converge.csv and converge.png in ``out``."""
    from .. import io
    out = Path(out)
    paths = [out / "converge.json", out / "converge.csv"]
    io.write_json(paths[0], study)
    lines = ["output,unit,level,cells,particles_per_cell,dt,value,err,runs,grid_limited,"
             "change,order,extrapolated,verdict"]

    def f(v):
        return "" if v is None else (f"{v:.10g}" if isinstance(v, float) else str(v))
    for name, o in study["outputs"].items():
        for i, lv in enumerate(o["levels"]):
            ppc = "/".join(str(v) for v in lv["particles_per_cell"].values())
            lines.append(",".join([name, o["unit"], str(i), str(lv["cells"]), ppc, f(lv["dt"]),
                                   f(lv["value"]), f(lv["err"]), str(lv["runs"]),
                                   str(lv["grid_limited"]).lower(), f(o["change"]),
                                   f(o["order"]), f(o["extrapolated"]), o["verdict"]]))
    tmp = paths[1].with_suffix(".csv.tmp")
    tmp.write_text("\n".join(lines) + "\n", encoding="utf-8")
    tmp.replace(paths[1])
    if figure:
        paths.append(_figure(study, out / "converge.png"))
    return paths


# How each headline output (keyed by its name, the summary.json key of OUTPUTS) is shown in
# converge.png: (label in mathtext, unit, scale from the unit of converge.json to the unit
# shown). An output not listed is shown by its name and unit.
_SHOWN = {
    "growth.measured": ("growth rate", r"$\omega_p$", 1.0),
    "contrast.t_unity_ns": (r"time of max $\delta n/n$ = 1", "ns", 1.0),
    "contrast.max": (r"max $\delta n/n$", "dimensionless", 1.0),
    "clumps.size_median_cm": ("median clump size (FWHM)", "cm", 1.0),
    "coherence.k_cutoff": (r"coherence cutoff $k_c$", r"$\omega_p/c$", 1.0),
    "coherence.frequency_cutoff_hz": (r"coherence cutoff $\nu_c$", "GHz", 1e-9),
}


def _figure(study: dict, path: Path) -> Path:
    from .. import io
    return io.save_figure(draw_figure(study), path)


def draw_figure(study: dict):
    """converge.png (returned, not saved): each output's value and error bar against the level's
    box.cells, in the units of its label (no offset notation), with the verdict."""
    from ..plots import legend, plt, say_empty
    outs = study["outputs"]
    n = len(outs)
    cols = 3
    rows = (n + cols - 1) // cols
    fig, axes = plt.subplots(rows, cols, figsize=(4.4 * cols, 3.5 * rows), squeeze=False)
    for ax, (name, o) in zip(axes.flat, outs.items()):
        label, unit, scale = _SHOWN.get(name, (name, o.get("unit") or "dimensionless", 1.0))
        cells = [lv["cells"] for lv in o["levels"]]
        v = [lv["value"] * scale if lv["value"] is not None else float("nan")
             for lv in o["levels"]]
        e = [(lv["err"] or 0.0) * scale for lv in o["levels"]]
        have = [x == x for x in v]
        if any(have):
            ax.errorbar(cells, v, yerr=e, marker="o", capsize=3)
            lim = [(c, lv["value"] * scale) for c, lv, ok in zip(cells, o["levels"], have)
                   if ok and lv.get("grid_limited")]
            if lim:
                ax.plot([c for c, _ in lim], [y for _, y in lim], "s", color="C3", ms=11,
                        mfc="none", mew=1.5, label="set by the grid")
        else:
            say_empty(ax, "no level has a value")
        missing = [str(c) for c, ok in zip(cells, have) if not ok]
        if missing and any(have):
            ax.text(0.02, 0.02, "no value at " + ", ".join(missing) + " cells",
                    transform=ax.transAxes, fontsize=7, color="0.3")
        if o.get("extrapolated") is not None:
            ax.axhline(o["extrapolated"] * scale, color="0.5", ls="--", lw=0.8,
                       label="Richardson estimate")
        legend(ax, fontsize=7)
        ax.set_xscale("log", base=2)
        ax.set_xticks(cells)
        ax.set_xticklabels([str(c) for c in cells])
        ax.set_xlim(cells[0] / 1.3, cells[-1] * 1.3)
        ax.minorticks_off()
        ax.set_xlabel("box.cells")
        ax.set_ylabel(f"{label} [{unit}]", fontsize=9)
        ax.ticklabel_format(axis="y", useOffset=False, style="plain")
        ax.set_title(f"{label}: {o['verdict']}", fontsize=9)
    for ax in list(axes.flat)[n:]:
        ax.axis("off")
    fig.tight_layout()
    return fig


def read_manifest_scan(out: Path) -> dict | None:
    try:
        return json.loads((Path(out) / "manifest.json").read_text(encoding="utf-8")).get("scan")
    except (OSError, ValueError, AttributeError):
        return None
