"""Figures of a run: matplotlib helpers shared by the analysis blocks' figure functions, and the
generic loop that draws every block's figures into ``<folder>/figures/``.

Each block draws its figures from its own tables and summary entries (and the run's raw series),
never from a recomputation, so a figure always shows the numbers in summary.json.
"""
from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

__all__ = ["plt", "message_figure", "draw_figures", "WP", "T_LABEL", "X_LABEL", "K_LABEL",
           "DN", "KC", "NUC", "positive", "time_ns_axis", "length_cm_axis", "ghz_axis",
           "log_limits", "say_empty", "legend", "plot_positive", "quiet_log_minor", "top_positive",
           "SUMMARY_KEYS", "summary_value"]

# One notation in every figure (mathtext): the plasma frequency, the normalised axes, the density
# contrast and the coherence cutoff.
WP = r"$\omega_p$"
T_LABEL = r"$t$ [$1/\omega_p$]"
X_LABEL = r"$x$ [$c/\omega_p$]"
K_LABEL = r"$k$ [$\omega_p/c$]"
DN = r"$\delta n/n$"
KC = r"$k_c$"
NUC = r"$\nu_c$"


# The summary.json keys the figures read, in one place (a renamed key is fixed here alone):
# name -> (block, key).
SUMMARY_KEYS = {
    "nu_c_hz": ("coherence", "frequency_cutoff_hz"),
    "nu_c_lower_bound_hz": ("coherence", "frequency_cutoff_hz_lower_bound"),
    "bulk_gamma": ("coherence", "bulk_gamma"),
    "t_unity": ("contrast", "t_unity"),
    "t_unity_ns": ("contrast", "t_unity_ns"),
    "emission_nu_c_hz": ("emission", "frequency_cutoff_hz"),
    "emission_nu_c_err_hz": ("emission", "frequency_cutoff_hz_err"),
    "emission_size_cm": ("emission", "size_median_cm"),
    "emission_size_err_cm": ("emission", "size_median_err_cm"),
}


def summary_value(summary: dict, name: str):
    """The value of the summary entry ``name`` of :data:`SUMMARY_KEYS` (None if absent)."""
    block, key = SUMMARY_KEYS[name]
    return (summary.get(block) or {}).get(key)


def positive(y):
    """y with the values <= 0 (and non-finite ones) as NaN, for a log axis."""
    y = np.asarray(y, float)
    return np.where(np.isfinite(y) & (y > 0), y, np.nan)


def top_positive(arrays) -> float:
    """The largest positive finite value of the arrays (0 if none), without numpy warnings."""
    top = 0.0
    for a in arrays:
        a = np.asarray(a, float).ravel()
        a = a[np.isfinite(a) & (a > 0)]
        if a.size:
            top = max(top, float(a.max()))
    return top


def plot_positive(ax, x, y, *args, **kw):
    """Plot only the points where y > 0, joined (a spectrum with exact zeros between its
    harmonics stays one visible line on a log axis)."""
    x, y = np.asarray(x, float), np.asarray(y, float)
    keep = np.isfinite(y) & (y > 0) & np.isfinite(x)
    return ax.plot(x[keep], y[keep], *args, **kw)


def quiet_log_minor(ax, axis: str = "x"):
    """No labels on the minor ticks of a log axis (they crowd a short range)."""
    from matplotlib.ticker import NullFormatter
    getattr(ax, f"{axis}axis").set_minor_formatter(NullFormatter())


def time_ns_axis(ax, density_cm3: float, where: str = "top"):
    """A second time axis in ns beside an axis in 1/omega_p (t_ns = t / omega_p, units.time_ns
    of the run's reference density)."""
    from . import units
    tu = units.time_ns(1.0, float(density_cm3))
    sec = ax.secondary_xaxis(where, functions=(lambda t: t * tu, lambda t: t / tu))
    sec.set_xlabel(r"$t$ [ns]")
    return sec


def length_cm_axis(ax, density_cm3: float, where: str = "top"):
    """A second length axis in cm beside an axis in c/omega_p (units.skin_depth_cm)."""
    from . import units
    d = units.skin_depth_cm(float(density_cm3))
    sec = ax.secondary_xaxis(where, functions=(lambda x: x * d, lambda x: x / d))
    sec.set_xlabel(r"$x$ [cm]")
    return sec


def ghz_axis(ax, bulk_gamma: float, density_cm3: float, where: str = "top"):
    """A second axis in GHz beside a wavenumber axis in omega_p/c: nu = Gamma c k / 2 pi, the
    conversion of the coherence cutoff (analysis.coherence.emission_cutoff_hz)."""
    from .analysis.coherence import emission_cutoff_hz
    f = emission_cutoff_hz(1.0, float(bulk_gamma), float(density_cm3)) / 1e9
    sec = ax.secondary_xaxis(where, functions=(lambda k: k * f, lambda v: v / f))
    sec.set_xlabel(r"$\nu = \Gamma c k / 2\pi$ [GHz]" + f" ($\\Gamma$ = {bulk_gamma:.3g})")
    return sec


def log_limits(ax, arrays, decades: float = 8.0, percentile: float = 2.0, floor=None):
    """Limit a log y axis to what is above the noise: from the ``percentile``-th percentile of
    the positive values (never more than ``decades`` below the largest, never below ``floor``
    / 10 when a noise floor is given) to above the largest. Returns False if nothing is positive
    (then the caller says so in the axes)."""
    vals = [np.asarray(a, float).ravel() for a in arrays]
    pos = np.concatenate(vals) if vals else np.array([])
    pos = pos[np.isfinite(pos) & (pos > 0)]
    if not pos.size:
        return False
    top = float(pos.max())
    lo = max(float(np.percentile(pos, percentile)), top * 10.0 ** (-decades))
    if floor and float(floor) > 0:
        # the noise floor stays in view: the data above it is what the figure is about
        top = max(top, float(floor))
        lo = max(min(lo, float(floor) / 10.0), top * 10.0 ** (-decades))
    ax.set_ylim(lo / 3.0, top * 3.0)
    return True


def say_empty(ax, text: str, y: float = 0.5):
    """Say inside the axes (at height ``y`` of the axes) why there is nothing to show."""
    ax.text(0.5, y, text, ha="center", va="center", transform=ax.transAxes, fontsize=9,
            color="0.3", wrap=True, bbox=dict(facecolor="w", alpha=0.8, lw=0))


def legend(ax, **kw):
    """A readable legend, drawn only when something is labelled (no matplotlib warning)."""
    if ax.get_legend_handles_labels()[0]:
        kw.setdefault("fontsize", 8)
        kw.setdefault("framealpha", 0.85)
        return ax.legend(**kw)
    return None


def message_figure(text: str, size=(6, 3)):
    """A figure that only says why there is nothing to draw."""
    fig, ax = plt.subplots(figsize=size)
    ax.text(0.5, 0.5, text, ha="center", va="center")
    ax.set_axis_off()
    return fig


def draw_figures(results, data, folder) -> list[Path]:
    """Draw every figure of every block result into <folder>/figures/ (atomic PNGs)."""
    from .io import save_figure
    out = Path(folder) / "figures"
    paths = []
    for res in results.values():
        for f in res.figures:
            try:
                fig = f.draw(res, data)
                paths.append(save_figure(fig, out / f.file))
            finally:
                plt.close("all")
    return paths
