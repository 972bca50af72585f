"""PIC and Vlasov on one deck: the cross-check of the nonlinear outputs.

    from streamsim.vlasov.compare import compare
    c = compare("runs/warm-pair-beams-vlasov.toml", out="runs/out/compare")
    c.table()            # side by side, with the relative differences
    c.contract()         # what compare.json holds

The deck is run twice through :func:`streamsim.pipeline.run`, once with ``method = "pic"`` and
once with ``method = "vlasov"`` (everything else the same), into ``<out>/pic`` and
``<out>/vlasov``. compare.json is ``{"pic": {output: value}, "vlasov": {output: value},
"relative_difference": {output: value}}`` with the outputs named by their summary.json key paths;
the relative difference is (PIC - Vlasov) / |Vlasov|: PIC's departure from the noise-free
continuum (null where either value is missing or the Vlasov value is 0).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..numbers import finite_or_none

__all__ = ["compare", "Comparison", "OUTPUTS", "relative_difference"]

#: (summary.json key path, what it is, unit)
#: the error bar of each output: a summary.json key path, or "cadence" (t_unity is resolved to the
#: diagnostics interval, reported in ns), or None (no error bar: no verdict)
ERRORS = {
    "growth.measured": "growth.measured_err",
    "contrast.t_unity_ns": "cadence",
    "contrast.max": None,
    "clumps.size_median": "clumps.size_median_err",
    "coherence.k_cutoff": "coherence.k_cutoff_err",
    "coherence.frequency_cutoff_hz": "coherence.frequency_cutoff_err_hz",
    "energy.relative_error_max": None,
}
#: agreement: |PIC - Vlasov| <= AGREE_SIGMA x the combined error (quadrature sum; about 95%
#: of the differences of two consistent Gaussian estimates fall inside, common practice)
AGREE_SIGMA = 2.0

OUTPUTS = (
    ("growth.measured", "fastest growth (headline mode)", "omega_p"),
    ("contrast.t_unity_ns", "clump formation time t_unity", "ns"),
    ("contrast.max", "max delta n/n", ""),
    ("clumps.size_median", "clump median size (FWHM)", "c/omega_p"),
    ("coherence.k_cutoff", "coherence cutoff k_c", "omega_p/c"),
    ("coherence.frequency_cutoff_hz", "emission cutoff nu_c", "Hz"),
    ("energy.relative_error_max", "energy error (max relative)", ""),
)

FILE = "compare.json"


def _value(summary: dict, path: str):
    d = summary
    for p in path.split("."):
        if not isinstance(d, dict):
            return None
        d = d.get(p)
    return finite_or_none(d)


def relative_difference(pic, vlasov):
    """(pic - vlasov) / |vlasov|, or None."""
    if pic is None or vlasov is None or vlasov == 0:
        return None
    return (pic - vlasov) / abs(vlasov)


@dataclass
class Comparison:
    pic: object                    # pipeline.Result
    vlasov: object                 # pipeline.Result
    folder: Path | None
    figures: list[Path] = field(default_factory=list)

    def values(self, which: str) -> dict:
        res = self.pic if which == "pic" else self.vlasov
        return {path: _value(res.summary, path) for path, _, _ in OUTPUTS}

    def errors(self, which: str) -> dict:
        res = self.pic if which == "pic" else self.vlasov
        out = {}
        for path, _, _ in OUTPUTS:
            how = ERRORS.get(path)
            if how == "cadence":
                from .. import units
                d = res.deck
                out[path] = units.time_ns(d.output.diagnostics_interval, d.units.density_cm3)
            else:
                out[path] = _value(res.summary, how) if how else None
        return out

    def contract(self) -> dict:
        p, v = self.values("pic"), self.values("vlasov")
        pe, ve = self.errors("pic"), self.errors("vlasov")
        return {"pic": p, "vlasov": v, "pic_err": pe, "vlasov_err": ve,
                "relative_difference": {k: relative_difference(p[k], v[k]) for k in p},
                "verdict": {k: verdict(p[k], pe[k], v[k], ve[k]) for k in p},
                "verdict_rule": f"agree when |PIC - Vlasov| <= {AGREE_SIGMA:g} x "
                                "sqrt(err_PIC^2 + err_Vlasov^2); no verdict without an error bar"}

    def table(self) -> str:
        c = self.contract()
        rows = [("output", "PIC", "Vlasov", "(PIC-Vlasov)/|Vlasov|", "verdict")]
        for path, what, unit in OUTPUTS:
            rd = c["relative_difference"][path]
            rows.append((f"{path} ({what}{', ' + unit if unit else ''})",
                         _gpm(c["pic"][path], c["pic_err"][path]),
                         _gpm(c["vlasov"][path], c["vlasov_err"][path]),
                         "-" if rd is None else f"{100 * rd:+.2f} %", c["verdict"][path]))
        w = [max(len(r[i]) for r in rows) for i in range(5)]
        lines = ["  ".join(x.ljust(n) for x, n in zip(r, w)).rstrip() for r in rows]
        lines.insert(1, "  ".join("-" * n for n in w))
        return "\n".join(lines)

    def csv(self) -> str:
        import csv
        import io as _io
        c = self.contract()
        buf = _io.StringIO()
        wr = csv.writer(buf, lineterminator="\n")
        keys = ("pic", "pic_err", "vlasov", "vlasov_err", "relative_difference")
        wr.writerow(["output", "meaning", "unit", *keys, "verdict"])
        for path, what, unit in OUTPUTS:
            wr.writerow([path, what, unit] + ["" if c[k][path] is None else repr(c[k][path])
                                              for k in keys] + [c["verdict"][path]])
        return buf.getvalue()


def _g(x) -> str:
    return "n/a" if x is None else f"{x:.5g}"


def _gpm(x, e) -> str:
    return _g(x) if x is None or e is None else f"{x:.5g} +- {e:.2g}"


def verdict(pic, pic_err, vlasov, vlasov_err) -> str:
    """"agree" / "differ" (|PIC - Vlasov| against AGREE_SIGMA x the combined error), or why
    there is no verdict."""
    if pic is None or vlasov is None:
        return "no verdict (a value is missing)"
    if pic_err is None and vlasov_err is None:
        return "no verdict (no error bar)"
    comb = math.hypot(pic_err or 0.0, vlasov_err or 0.0)
    sig = abs(pic - vlasov) / comb if comb > 0 else math.inf
    return (f"agree ({sig:.2g} sigma)" if abs(pic - vlasov) <= AGREE_SIGMA * comb
            else f"differ ({sig:.2g} sigma)")


def compare(deck=None, out: str | Path | None = None, *, overrides: list[str] | None = None,
            write: bool = True, threads: int | None = None, quiet: bool = True, warn=None,
            figures: bool = True, force: bool = False) -> Comparison:
    """Run ``deck`` with both methods and compare. out: the folder (default: the deck's
    ``output.folder`` + ``-compare``); write=False keeps everything in memory. Raises what
    :func:`streamsim.pipeline.run` raises (a cold species: a DeckError for the Vlasov run)."""
    from .. import io
    from ..deck import load_deck
    from ..pipeline import run
    overrides = list(overrides or [])
    decks = {m: load_deck(deck, overrides + [f'method="{m}"']) for m in ("vlasov", "pic")}
    folder = None
    if write:
        folder = Path(out if out is not None else decks["pic"].output.folder + "-compare")
    results = {}
    for m in ("pic", "vlasov"):
        results[m] = run(decks[m], out=None if folder is None else folder / m, write=write,
                         quiet=quiet, threads=threads, warn=warn, figures=figures and write,
                         force=force)
    c = Comparison(results["pic"], results["vlasov"], folder)
    if folder is not None:
        io.write_json(folder / FILE, c.contract())
        io.write_text(folder / "compare.csv", c.csv())
        if figures:
            c.figures = draw(c, folder)
    return c


# ----------------------------------------------------------------------------------------------
# figures: both methods overlaid
# ----------------------------------------------------------------------------------------------
STYLE = {"pic": dict(color="tab:blue", ls="-", label="PIC"),
         "vlasov": dict(color="tab:red", ls="--", label="Vlasov")}


def peak_density(result) -> tuple[float, np.ndarray] | None:
    """(t, (S, cells) densities) at the diagnostic time of maximum contrast: the continuum's
    own, or the PIC peak positions deposited with cloud-in-cell weights (Birdsall & Langdon
    1991, ch. 8) on the run's grid."""
    d = result.data
    if d.peak_density is not None:
        return d.peak_density.t, d.peak_density.density
    if d.peak is None:
        return None
    N, L = d.cells, d.length
    dx = L / N
    out = np.zeros((len(d.names), N))
    for s, name in enumerate(d.names):
        x = np.asarray(d.peak.x[name]) / dx
        j = np.floor(x).astype(np.int64)
        w = x - j
        out[s] = (np.bincount(j % N, 1 - w, N) + np.bincount((j + 1) % N, w, N)) \
            * d.peak.weight[name] / dx
    return d.peak.t, out


def draw(c: Comparison, folder: Path) -> list[Path]:
    """Write the comparison figures into ``folder`` (atomic PNGs)."""
    from .. import io
    return [io.save_figure(fig, Path(folder) / name) for name, fig in draw_figures(c).items()]


def draw_figures(c: Comparison) -> dict:
    """The comparison figures {file name: Figure} (drawn, not saved)."""
    from ..plots import (DN, K_LABEL, T_LABEL, WP, X_LABEL, legend, length_cm_axis, log_limits,
                         plot_positive, plt, positive, quiet_log_minor, say_empty, time_ns_axis)
    figs = {}
    runs = {"pic": c.pic, "vlasov": c.vlasov}
    names = c.pic.data.names
    n_cm3 = float(c.pic.data.deck.units.density_cm3)

    fig, ax = plt.subplots(figsize=(7.5, 4.8))
    curves = []
    for m, r in runs.items():
        s = r.data.series
        curves.append(s.field_energy)
        ax.plot(s.t, positive(s.field_energy), lw=1, **STYLE[m])
    if log_limits(ax, curves, decades=12.0, percentile=0.5):
        ax.set_yscale("log")
    else:
        say_empty(ax, "the field stayed zero in both runs")
    ax.set_xlabel(T_LABEL)
    time_ns_axis(ax, n_cm3)
    ax.set_ylabel(r"field energy [$n_{ref} m_e c^2 \, c/\omega_p$]")
    ax.set_title("field energy: PIC and Vlasov", fontsize=10, pad=32)
    legend(ax)
    figs["compare_field_energy.png"] = fig

    fig, ax = plt.subplots(figsize=(7.5, 4.8))
    curves = []
    for m, r in runs.items():
        s = r.data.series
        for j, name in enumerate(names + ["total"]):
            y = s.contrast_max[:, j]
            curves.append(y)
            st = dict(STYLE[m])
            st["label"] = f"{st['label']}, {name}"
            ax.plot(s.t, positive(y), lw=1, alpha=1.0 if j == 0 else 0.6,
                    **{k: v for k, v in st.items() if k != "color"},
                    color=plt.cm.tab10(j + (0 if m == "pic" else 3)))
    ax.axhline(1.0, color="0.5", lw=0.8, ls=":")
    if log_limits(ax, curves, decades=8.0, percentile=2.0):
        ax.set_yscale("log")
    else:
        say_empty(ax, "the density stayed uniform in both runs")
    ax.set_xlabel(T_LABEL)
    time_ns_axis(ax, n_cm3)
    ax.set_ylabel(f"max {DN} [dimensionless]")
    ax.set_title("density contrast: PIC (solid) and Vlasov (dashed)", fontsize=10, pad=32)
    legend(ax, fontsize=7, ncol=2)
    figs["compare_contrast.png"] = fig

    fig, axes = plt.subplots(len(names), 1, figsize=(8, 2.8 * len(names)), sharex=True,
                             squeeze=False)
    drawn = False
    for m, r in runs.items():
        got = peak_density(r)
        if got is None:
            continue
        drawn = True
        t, dens = got
        x = np.arange(r.data.cells) * r.data.length / r.data.cells
        for s, name in enumerate(names):
            st = dict(STYLE[m])
            st["label"] = f"{st['label']}, $t$ = {t:.4g}/{WP}"
            axes[s, 0].plot(x, dens[s] / dens[s].mean() - 1.0, lw=0.9, **st)
    for s, name in enumerate(names):
        axes[s, 0].set_ylabel(f"{DN}, {name} [dimensionless]")
    if not drawn:
        say_empty(axes[0, 0], "no density at maximum contrast in either run")
    legend(axes[0, 0], fontsize=8)
    axes[0, 0].set_title("density at maximum contrast", fontsize=10, pad=32)
    length_cm_axis(axes[0, 0], n_cm3)
    axes[-1, 0].set_xlabel(X_LABEL)
    figs["compare_density.png"] = fig

    fig, ax = plt.subplots(figsize=(7.5, 4.8))
    curves = []
    for m, r in runs.items():
        co = r.analysis.get("coherence")
        tab = co.tables.get("form_factor") if co is not None else None
        if tab is None or not len(tab):
            continue
        src = "window" if len(tab.where("snapshot", "window")) else "peak"
        part = tab.where("snapshot", src)
        for j, name in enumerate(names):
            if f"F2_{name}" not in part.columns:
                continue
            P = np.asarray(part.col(f"F2_{name}"), float)
            k = np.asarray(part.col("k"), float)
            # a continuum density has exact (round-off) zeros between its modes: draw only the
            # values above 1e-14 of the largest, as points joined where they are consecutive
            top = np.nanmax(P) if np.isfinite(P).any() else 0.0
            keep = np.isfinite(P) & (P > 1e-14 * top) & (k > 0)
            if not keep.any():
                continue
            curves.append(P[keep])
            st = dict(STYLE[m])
            st["label"] = f"{st['label']}, {name} ({src})"
            plot_positive(ax, k[keep], P[keep], lw=0.8, marker=".", ms=2,
                          alpha=1.0 if j == 0 else 0.6, **st)
        floor = (r.summary.get("coherence") or {}).get("noise_floor")
        if floor:
            ax.axhline(floor, color=STYLE[m]["color"], lw=0.8, ls=":",
                       label=f"{STYLE[m]['label']} noise floor $1/N$")
    if log_limits(ax, curves, decades=10.0, percentile=1.0):
        ax.set_xscale("log")
        ax.set_yscale("log")
        quiet_log_minor(ax)
    else:
        say_empty(ax, "no form factor above zero in either run")
    ax.set_xlabel(K_LABEL)
    ax.set_ylabel(r"form factor $|F(k)|^2$ [dimensionless]")
    ax.set_title("form factor: PIC particles and the Vlasov density\n"
                 "(saturated-window average where recorded)", fontsize=10)
    legend(ax, fontsize=7)
    figs["compare_form_factor.png"] = fig
    return figs


def _finite(x) -> bool:
    return x is not None and math.isfinite(x)
