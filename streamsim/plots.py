"""Figures of a run: matplotlib helpers shared by the analysis blocks' figure functions, and the
generic loop that draws every block's figures into ``<folder>/figures/``.

Each block draws its figures from its own tables and summary entries (and the run's raw series),
never from a recomputation, so a figure always shows the numbers in summary.json.
"""
from __future__ import annotations

import warnings
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

__all__ = ["plt", "message_figure", "draw_figures"]


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
                with warnings.catch_warnings():   # matplotlib's complaints (an empty log axis)
                    warnings.simplefilter("ignore")   # never reach the terminal
                    fig = f.draw(res, data)
                    paths.append(save_figure(fig, out / f.file))
            finally:
                plt.close("all")
    return paths
