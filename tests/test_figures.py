"""Figures a user reads: every figure of a small run is drawn without a Python warning, every axis
label carries its unit, time figures carry a second axis in ns, the scan and converge figures
show their numbers without offset notation, and a figure with nothing to show says so.

All decks here are invented test plasmas; nothing here checks a physical value (the numbers in
the figures are those of summary.json, checked in the analysis tests)."""
from __future__ import annotations

import math
import re
import warnings

import numpy as np
import pytest

import streamsim

# labels that name a count (no unit to give)
COUNTS = ("per bin", "box.cells")
TIME_FIGURES = {"contrast.png", "field_energy.png", "emission.png", "drive.png",
                "gamma_histogram.png"}


def _species(drift, *, theta=0.0, ppc=16):
    return [{"name": n, "charge": q, "mass": 1.0, "density": 0.5, "drift_beta": s * drift,
             "theta": theta, "particles_per_cell": ppc, "loading": "quiet"}
            for n, q, s in (("electrons", -1.0, 1.0), ("positrons", 1.0, -1.0))]


def beams(*, perturb=True, end=30.0, cells=64):
    d = {"title": "figure test beams", "random_seed": 3, "units": {"density_cm3": 1.0e10},
         "box": {"length": 2 * math.pi / 0.75, "cells": cells}, "time": {"dt": 0.05, "end": end},
         "species": _species(0.3), "output": {"recorded_modes": 8}}
    if perturb:
        d["perturbation"] = {"modes": [1, 2, 3], "amplitude": 1e-3}
    return d


def driven():
    species = [{"name": n, "charge": q, "mass": 1.0, "density": 0.5, "theta": 0.0,
                "particles_per_cell": 8, "loading": "quiet"}
               for n, q in (("electrons", -1.0), ("positrons", 1.0))]
    return {"title": "figure test drive", "random_seed": 5, "units": {"density_cm3": 1.0e10},
            "box": {"length": 2 * math.pi, "cells": 32}, "time": {"dt": 0.02, "end": 10.0},
            "species": species, "output": {"diagnostics_interval": 0.05, "recorded_modes": 4},
            "drive": {"current": 2.0, "profile": "constant"}}


def draw_all(result) -> dict:
    """{file: Figure} of every block's figures, drawn with every warning an error."""
    figs = {}
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        for res in result.analysis.values():
            for f in res.figures:
                fig = f.draw(res, result.data)
                fig.canvas.draw()            # tick labels and offsets are made at draw time
                figs[f.file] = fig
    return figs


def labels(fig):
    """Every non-empty axis label of a figure, of its axes and of their secondary axes."""
    out = []
    for ax in fig.axes:
        for a in [ax, *ax.child_axes]:
            out += [lab for lab in (a.get_xlabel(), a.get_ylabel()) if lab]
    return out


def assert_units(file, fig):
    for lab in labels(fig):
        assert re.search(r"\[.+\]", lab) or any(c in lab for c in COUNTS), \
            f"{file}: axis label {lab!r} has no unit"


def has_ns_axis(fig) -> bool:
    return any("[ns]" in c.get_xlabel() for ax in fig.axes for c in ax.child_axes)


@pytest.fixture(scope="module")
def beam_run():
    return streamsim.run(beams(), write=False, analyze=True, figures=False)


@pytest.fixture(scope="module")
def drive_run():
    return streamsim.run(driven(), write=False, analyze=True, figures=False)


def _close(figs):
    from streamsim.plots import plt
    for f in figs.values():
        plt.close(f)


def test_every_figure_of_a_run_is_drawn_without_warning_with_units(beam_run):
    figs = draw_all(beam_run)
    assert {"contrast.png", "clumps.png", "coherence.png", "phase_space.png", "emission.png",
            "field_energy.png", "growth_rates.png"} <= set(figs)
    for file, fig in figs.items():
        assert_units(file, fig)
        if file in TIME_FIGURES:
            assert has_ns_axis(fig), f"{file} has no second time axis in ns"
    # one notation: omega_p is written in mathtext, never as "w_p" or "omega_p"
    for file, fig in figs.items():
        texts = labels(fig) + [t.get_text() for ax in fig.axes for t in ax.texts] \
            + [ax.get_title() for ax in fig.axes]
        for t in texts:
            assert "w_p" not in t and not re.search(r"(?<!\\)omega_p", t), f"{file}: {t!r}"
    _close(figs)


def test_the_coherence_figure_has_ghz_beside_k(beam_run):
    figs = draw_all(beam_run)
    fig = figs["coherence.png"]
    secs = [c.get_xlabel() for ax in fig.axes for c in ax.child_axes]
    assert any("[GHz]" in s for s in secs), secs
    _close(figs)


def test_drive_figures_have_ns_axes_and_a_colour_bar(drive_run):
    figs = draw_all(drive_run)
    for file in ("drive.png", "gamma_histogram.png"):
        assert_units(file, figs[file])
        assert has_ns_axis(figs[file]), file
    hist = figs["gamma_histogram.png"]
    # a colour bar is an extra axes beside each species' panel, labelled with what colour means
    assert len(hist.axes) >= 2 * len(drive_run.data.names)
    assert any("fraction" in ax.get_ylabel() for ax in hist.axes)
    _close(figs)


def test_a_uniform_plasma_draws_without_warning_and_says_so():
    """Beams with no perturbation and a quiet start: the density stays uniform to round-off. No
    figure may raise a warning (a log axis with no positive data), and the contrast figure says
    in its axes that there is nothing to show when the contrast is exactly zero."""
    r = streamsim.run(beams(perturb=False, end=4.0, cells=32), write=False, analyze=True,
                      figures=False)
    figs = draw_all(r)
    for file, fig in figs.items():
        assert_units(file, fig)
    _close(figs)
    # force an exactly uniform density through the contrast figure's own table
    res = r.analysis["contrast"]
    tab = res.tables["contrast"]
    for name in list(tab.columns):
        if name.startswith(("max_", "rms_")):
            tab.columns[name] = np.zeros_like(np.asarray(tab.columns[name], float))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        fig = res.figures[0].draw(res, r.data)
        fig.canvas.draw()
    said = [t.get_text() for ax in fig.axes for t in ax.texts]
    assert any("uniform" in t for t in said), said
    _close({"c": fig})
    # a contrast at float64 round-off (2.2e-16, a uniform density summed over the grid) is
    # drawn, and the figure says what it is
    for name in list(tab.columns):
        if name.startswith(("max_", "rms_")):
            tab.columns[name] = np.full(len(tab), 2.2e-16)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        fig = res.figures[0].draw(res, r.data)
        fig.canvas.draw()
    said = [t.get_text() for ax in fig.axes for t in ax.texts]
    assert any("round-off" in t for t in said), said
    _close({"c": fig})


def _study():
    """A converge.json-shaped study with values of 1e11 Hz order (invented numbers)."""
    def out(unit, values, errs):
        return {"unit": unit, "levels": [
            {"cells": c, "particles_per_cell": {"e": 8}, "dt": 0.05, "value": v, "err": e,
             "runs": 1, "grid_limited": False} for c, v, e in zip((32, 64, 128), values, errs)],
            "change": None, "order": None, "extrapolated": None, "verdict": "not converged"}
    return {"outputs": {
        "coherence.frequency_cutoff_hz": out("Hz", [1.000e11, 1.002e11, 1.003e11], [1e8, 1e8, 1e8]),
        "growth.measured": out("omega_p", [0.3501, 0.3502, 0.3503], [1e-5, 1e-5, 1e-5]),
        "contrast.t_unity_ns": out("ns", [None, None, None], [None, None, None])}}


def test_converge_figure_has_units_and_no_offset_notation():
    from streamsim.scan.converge import draw_figure
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        fig = draw_figure(_study())
        fig.canvas.draw()
    used = [ax for ax in fig.axes if ax.get_ylabel()]
    assert len(used) == 3
    for ax in used:
        assert ax.yaxis.get_offset_text().get_text() == "", ax.get_ylabel()
        assert "[]" not in ax.get_ylabel() and "[]" not in ax.get_title()
    assert_units("converge.png", fig)
    assert any("GHz" in ax.get_ylabel() for ax in used)
    # the output with no value at any level says so inside its axes
    assert any("no level has a value" in t.get_text() for ax in fig.axes for t in ax.texts)
    _close({"c": fig})


def test_scan_figures_have_units_and_no_offset_notation():
    from types import SimpleNamespace

    from streamsim.scan.figures import COLUMNS, draw_growth_vs_axis, draw_nu_c_vs_axis

    axis = SimpleNamespace(name="units.density_cm3", keys=("units.density_cm3",), log=False,
                           numeric=True, values=[1e10, 2e10, 3e10])
    scan = SimpleNamespace(title="invented scan", axes=[axis], combine="zip")
    rows = [{"point": p, "replica": 0, "status": "completed", "units.density_cm3": n,
             COLUMNS["nu_c"]: 1.0e11 + 1e8 * p, COLUMNS["nu_c_err"]: 1e7,
             COLUMNS["growth_time"]: 0.5001 + 1e-4 * p, COLUMNS["growth_time_err"]: 1e-5,
             COLUMNS["bulk_gamma"]: 1.0}
            for p, n in enumerate(axis.values)]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        figs = {"nu": draw_nu_c_vs_axis(scan, rows, 0),
                "growth": draw_growth_vs_axis(scan, rows, 0)}
        for fig in figs.values():
            fig.canvas.draw()
    for file, fig in figs.items():
        ax = fig.axes[0]
        assert ax.yaxis.get_offset_text().get_text() == "", file
        assert_units(file, fig)
    assert "GHz" in figs["nu"].axes[0].get_ylabel()
    assert "cm$^{-3}$" in figs["nu"].axes[0].get_xlabel()
    _close(figs)


def test_clump_histogram_bins_span_the_widths_found():
    """Widths crowded in one narrow range fill more than one bin (bins from the data's range);
    widths over three decades get logarithmic bins."""
    from streamsim.analysis.clumps import size_histogram
    rng = np.random.default_rng(11)
    w = 0.30 + 0.02 * rng.random(200)          # all within 7 % of each other
    edges, counts = size_histogram(w, dx=0.05, length=20.0)
    assert counts.sum() == 200 and (counts > 0).sum() >= 3
    w = 10 ** rng.uniform(-2, 1, 300)
    edges, counts = size_histogram(w, dx=0.005, length=20.0)
    assert counts.sum() == 300
    ratios = edges[1:] / edges[:-1]
    assert np.allclose(ratios, ratios[0])     # equal in log
