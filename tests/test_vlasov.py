"""The continuum (Vlasov) solver: its advection kernel, linear Landau damping, warm pair-beam
growth, conservation, nonlinear Landau damping, the deck keys and a run through the pipeline.

Every physics check compares with a reference outside the solver, named beside it."""
from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy.signal import argrelextrema

from streamsim.deck import DeckError, load_deck
from streamsim.pipeline import run
from streamsim.validation import references as ref
from streamsim.vlasov.kernels import advect_columns, advect_rows

THETA = 1.0e-4          # v_th = 0.01 c: relativistic corrections ~ theta


# ----------------------------------------------------------------------------------------------
# the PFC kernel
# ----------------------------------------------------------------------------------------------
def _cell_averages(n, centre):
    """Exact cell averages of 3 + sin(2 pi (x - centre)) on n cells of [0, 1)."""
    e = np.linspace(0.0, 1.0, n + 1)
    prim = 3.0 * e - np.cos(2.0 * np.pi * (e - centre)) / (2.0 * np.pi)
    return np.diff(prim) * n


def test_integer_shift_is_an_exact_roll():
    rng = np.random.default_rng(4)
    f = rng.random((3, 40))
    out = np.empty_like(f)
    advect_rows(f, np.array([3.0, -7.0, 0.0]), out, True, np.inf)
    for r, s in enumerate((3, -7, 0)):       # a shift by whole cells is np.roll (definition)
        np.testing.assert_array_equal(out[r], np.roll(f[r], s))


def test_pfc_is_third_order_on_a_smooth_profile():
    """Third-order reconstruction (Filbet, Sonnendrucker & Bertrand 2001): the one-step error of
    a fractional shift falls by >= 2^3.5 per halving of the cell against exact cell averages."""
    errs = []
    for n in (32, 64, 128):
        f = _cell_averages(n, 0.0)[None, :].copy()
        out = np.empty_like(f)
        advect_rows(f, np.array([0.37]), out, True, np.inf)
        errs.append(np.abs(out[0] - _cell_averages(n, 0.37 / n)).max())
    assert errs[0] / errs[1] > 2 ** 3.5 and errs[1] / errs[2] > 2 ** 3.5


def test_pfc_conserves_mass_and_positivity_on_rough_data():
    """Flux form: the masses telescope (periodic rows); slope correctors keep f >= 0
    (Filbet et al. 2001, sec. 3). Rough, partly zero data, random shifts of any size."""
    rng = np.random.default_rng(7)
    f = rng.random((50, 64)) * (rng.random((50, 64)) > 0.5)
    shifts = rng.normal(0.0, 5.0, 50)
    out = np.empty_like(f)
    advect_rows(f, shifts, out, True, np.inf)
    np.testing.assert_allclose(out.sum(axis=1), f.sum(axis=1), rtol=1e-13)
    assert out.min() >= 0.0
    # columns with open ends: what stays inside plus what left equals the start (no inflow)
    g = np.zeros((80, 30))
    g[30:50] = rng.random((20, 30))
    outc = np.empty_like(g)
    advect_columns(g, rng.normal(0.0, 3.0, 30), outc, False, np.inf)
    np.testing.assert_allclose(outc.sum(axis=0), g.sum(axis=0), rtol=1e-13)
    assert outc.min() >= 0.0


# ----------------------------------------------------------------------------------------------
# decks
# ----------------------------------------------------------------------------------------------
def plasma_deck(kl, *, amplitude, end, cells=64, momentum_cells=256, dt=0.05):
    k = kl / math.sqrt(THETA)
    return {"title": "vlasov plasma", "method": "vlasov",
            "box": {"length": 2 * math.pi / k, "cells": cells}, "time": {"dt": dt, "end": end},
            "species": [{"name": "electrons", "charge": -1.0, "density": 1.0, "theta": THETA,
                         "distribution": "juttner"}],
            "perturbation": {"modes": [1], "amplitude": amplitude},
            "output": {"diagnostics_interval": dt, "recorded_modes": 2, "fields_interval": end / 2,
                       "phase_space_interval": end},
            "vlasov": {"momentum_cells": momentum_cells}}


def pair_deck(k, *, drift_u, theta, amplitude, end, cells=32, momentum_cells=256, dt=0.05,
              widen=1.0):
    species = [{"name": n, "charge": q, "density": 0.5, "drift_u": u, "theta": theta,
                "distribution": "juttner"}
               for n, q, u in (("electrons", -1.0, drift_u), ("positrons", 1.0, -drift_u))]
    return {"title": "vlasov pair beams", "method": "vlasov",
            "box": {"length": 2 * math.pi / k, "cells": cells}, "time": {"dt": dt, "end": end},
            "species": species,
            "perturbation": {"modes": [1], "amplitude": amplitude, "species": ["electrons"]},
            "output": {"diagnostics_interval": dt, "recorded_modes": 2, "fields_interval": end / 4,
                       "phase_space_interval": end},
            "vlasov": {"momentum_cells": momentum_cells, "widen": widen}}


def four_efold_rate(t, amplitude):
    """Slope of ln|E| over the last 4 e-folds before |E| reaches 1 % of its maximum (the
    linear phase, after the ballistic response of the seed has phase-mixed; common practice)."""
    la = np.log(amplitude)
    i2 = int(np.argmax(amplitude >= 1e-2 * amplitude.max()))
    i1 = int(np.flatnonzero(la[:i2 + 1] < la[i2] - 4.0)[-1]) + 1
    return np.polyfit(t[i1:i2 + 1], la[i1:i2 + 1], 1)[0], (t[i1], t[i2])


# ----------------------------------------------------------------------------------------------
# linear physics
# ----------------------------------------------------------------------------------------------
@pytest.mark.parametrize("kl, end", [(0.5, 30.0), (0.3, 80.0)])
def test_linear_landau_damping_matches_the_wofz_root(kl, end):
    """A 1e-3 seed rings and damps noise-free; frequency within 0.03 % and damping within 1.2 % of
    the least-damped Maxwellian root (Fried & Conte 1961 Z = i sqrt(pi) wofz, via
    streamsim.validation.references). Fit after t = 10, when the faster-damped roots are gone."""
    from streamsim.analysis.fits import fit_damped_oscillation, wave_signal
    res = run(plasma_deck(kl, amplitude=1e-3, end=end), write=False, analyze=False)
    root = ref.maxwellian_root(kl)
    t = res.series.t
    sig = wave_signal(res.series.mode_amplitude[:, 0])
    sel = t > 10.0
    fit = fit_damped_oscillation(t[sel], sig[sel], root.real, root.imag)
    # measured (README, Vlasov checks): omega -0.004 % / -0.010 %, damping -0.10 % / -0.39 %
    # at k lambda_D = 0.5 / 0.3; about 3x the larger allowed
    assert fit.omega == pytest.approx(root.real, rel=3e-4)
    assert fit.damping == pytest.approx(-root.imag, rel=1.2e-2)


def test_warm_pair_beam_growth_matches_the_kinetic_root():
    """Symmetric drifting-Juttner beams (u = +-0.5, theta = 0.02) grow from a 1e-8 seed at the
    purely growing root of the relativistic Vlasov dielectric, by independent quadrature
    (references.symmetric_juttner_growth: scipy quad + brentq), within 0.05 % (README, Vlasov
    checks: measured -0.02 %)."""
    k = 0.5
    g_ref = ref.symmetric_juttner_growth(k, 0.5, 0.5, 0.02, upper=0.5)
    res = run(pair_deck(k, drift_u=0.5, theta=0.02, amplitude=1e-8, end=100.0), write=False,
              analyze=False)
    rate, _ = four_efold_rate(res.series.t, np.abs(res.series.mode_amplitude[:, 0]))
    assert rate == pytest.approx(g_ref, rel=5e-4)


# ----------------------------------------------------------------------------------------------
# conservation and the norms of f, through saturation
# ----------------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def saturated():
    """Pair beams run through saturation (max dn/n ~ 0.3) on a small grid whose momentum range
    is widened (vlasov.widen = 2) so that f stays off its edges."""
    return run(pair_deck(0.5, drift_u=0.5, theta=0.02, amplitude=1e-4, end=70.0, widen=2.0),
               write=False, analyze=False)


def test_mass_is_conserved_to_round_off(saturated):
    """Both advections are in flux form (Filbet et al. 2001): mass changes only by what leaves
    the momentum grid, here < 1e-16 of it (recorded edge mass), so it is constant to round-off."""
    s = saturated.series
    assert s.vlasov_edge_mass.max() / s.vlasov_mass[0].min() < 1e-14
    assert np.abs(s.vlasov_mass / s.vlasov_mass[0] - 1.0).max() < 1e-13


def test_norms_of_f_behave_as_the_scheme_promises(saturated):
    """PFC keeps f >= 0 (Filbet et al. 2001), so L1 = mass, constant to round-off; L2 is not
    invariant for the discrete scheme: the filaments that fall below the momentum cell are
    dissipated, so L2 may only decrease (the exact Vlasov flow keeps every L^p norm, Cheng &
    Knorr 1976; a stable monotone advection cannot raise it). Tested: f_min >= 0, L1 constant to
    1e-13, L2 never above its previous value by more than 1e-12, and lower at the end."""
    s = saturated.series
    assert s.vlasov_f_min.min() >= 0.0
    assert np.abs(s.vlasov_l1 / s.vlasov_l1[0] - 1.0).max() < 1e-13
    l2 = s.vlasov_l2
    assert (np.diff(l2, axis=0) <= 1e-12 * l2[:-1]).all()
    assert (l2[-1] < l2[0]).all()


def test_energy_is_conserved_to_the_stated_bound(saturated):
    """The exact Vlasov-Poisson system conserves kinetic + field energy (e.g. Krall &
    Trivelpiece 1973). The discrete one loses it through the Strang splitting (O(dt^2)) and the
    dissipation of the filaments that fall below the momentum cell (the dissipated part of f
    carries kinetic energy the field gave it). Measured 2.6e-3 through this single-mode
    saturation on a coarse grid (32 x 256 cells, du = 0.026 ~ sigma_u/6, dt = 0.05) and
    2.4e-4 on the demo deck; the bound stated in README for such grids is 5e-3."""
    E = saturated.series.total_energy
    assert saturated.series.contrast_max.max() > 0.2          # the run did saturate
    assert np.abs(E / E[0] - 1.0).max() < 5e-3


# ----------------------------------------------------------------------------------------------
# nonlinear Landau damping
# ----------------------------------------------------------------------------------------------
def test_nonlinear_landau_damping_against_literature_values():
    """Amplitude 0.5 at k lambda_D = 0.5 (the benchmark of Cheng & Knorr 1976): the maxima of
    ||E||_2 first fall at gamma_1 ~ -0.287 (from memory: -0.281 to -0.292 across later papers;
    fitted, as from memory those papers do, over the maxima in t < 12) and reach their
    envelope minimum near t ~ 15-20 (from memory), then regrow at gamma_2 ~ 0.0815 (from
    memory). Tolerances: 10 % on the rates and the band 13 < t_min < 20, wide because the values
    are recalled, not looked up, and depend on the fit window."""
    res = run(plasma_deck(0.5, amplitude=0.5, end=45.0, momentum_cells=512), write=False,
              analyze=False)
    t = res.series.t
    norm = np.sqrt(2.0 * res.series.field_energy)
    imax = argrelextrema(norm, np.greater)[0]
    tm, am = t[imax], norm[imax]
    early = tm < 12.0
    g1 = np.polyfit(tm[early], np.log(am[early]), 1)[0]
    j = int(np.argmin(np.where(tm < 30.0, am, np.inf)))
    late = (tm > tm[j]) & (tm < 40.0)
    g2 = np.polyfit(tm[late], np.log(am[late]), 1)[0]
    assert g1 == pytest.approx(-0.287, rel=0.10)
    assert 13.0 < tm[j] < 20.0
    assert g2 == pytest.approx(0.0815, rel=0.10)


# ----------------------------------------------------------------------------------------------
# the deck and the pipeline
# ----------------------------------------------------------------------------------------------
def test_deck_keys_and_one_line_errors():
    d = load_deck("runs/warm-pair-beams-vlasov.toml")
    assert d.method == "vlasov" and d.vlasov.momentum_cells == 256
    assert load_deck(d.to_dict()) == d                       # round trip through deck.toml
    assert load_deck(None).method == "pic"                   # the default
    with pytest.raises(DeckError, match="needs a resolved momentum spread") as ex:
        load_deck("runs/pair-beams.toml", ['method="vlasov"'])    # cold beams
    assert "\n" not in str(ex.value)
    with pytest.raises(DeckError, match="did you mean 'vlasov'"):
        load_deck(None, ['method="vlasof"'])
    with pytest.raises(DeckError, match="no species named 'ions'"):
        load_deck("runs/warm-pair-beams-vlasov.toml", ["vlasov.u_min={ions = -1.0}"])
    with pytest.raises(DeckError, match="must be > vlasov.u_min"):
        load_deck("runs/warm-pair-beams-vlasov.toml", ["vlasov.u_min=1.0", "vlasov.u_max=0.5"])
    with pytest.raises(DeckError, match="unknown key"):
        load_deck("runs/warm-pair-beams-vlasov.toml", ["vlasov.momentum_cell=64"])
    d = load_deck("runs/warm-pair-beams-vlasov.toml",
                  ["vlasov.u_min={electrons = -1.5}", "vlasov.u_max=2.0"])
    assert d.vlasov.bound("u_min", "electrons") == -1.5
    assert d.vlasov.bound("u_min", "positrons") is None
    assert d.vlasov.bound("u_max", "positrons") == 2.0


SMALL = ["box.cells=32", "box.fastest_wavelengths=1", "perturbation.modes=[1]",
         "time.end=12.0", "vlasov.momentum_cells=64", "output.fields_interval=4.0"]


@pytest.fixture(scope="module")
def small_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("vlasov") / "run"
    warnings = []
    res = run("runs/warm-pair-beams-vlasov.toml", out=out, overrides=SMALL, warn=warnings.append,
              figures=False)
    return out, res, warnings


def test_run_writes_the_pic_files_and_the_f_meshes(small_run):
    from streamsim import io
    out, res, warnings = small_run
    for name in ("deck.toml", "summary.json", "theory.json", "timeseries.h5", io.FILES["fields"],
                 "checkpoint.h5", io.CONTINUUM_FILE):
        assert (out / name).is_file(), name
    assert any("ignores species.electrons.particles_per_cell" in w for w in warnings)
    s = json.loads((out / "summary.json").read_text())
    assert s["method"] == "vlasov" and s["particles"] == 0
    for key in ("growth", "contrast", "clumps", "coherence", "energy", "momentum", "vlasov"):
        assert key in s, key
    assert s["coherence"]["noise_floor"] == 0.0
    dist = io.read_distributions(out / io.FILES["fields"], ["electrons", "positrons"])
    assert dist["f"][0].shape == (4, 64, 32)                 # t = 0, 4, 8, 12
    du = dist["du"][0]
    dens = io.read_openpmd_meshes(out / io.FILES["fields"], ["electrons", "positrons"])[0].density
    np.testing.assert_allclose(dist["f"][0].sum(axis=1) * du, dens[:, 0], rtol=1e-12)


def test_fields_file_passes_the_openpmd_validator(small_run):
    from streamsim import io
    check_h5 = pytest.importorskip("openpmd_validator.check_h5")
    errors, warnings = check_h5.check_file(str(small_run[0] / io.FILES["fields"]))
    assert (errors, warnings) == (0, 0)


def test_read_back_analysis_uses_the_continuum_density(small_run):
    """`streamsim analyze` of a Vlasov folder: the coherence block reads the saved density at
    maximum contrast (noise floor 0) and agrees with the in-memory analysis."""
    from streamsim.analysis import analyze
    out, res, _ = small_run
    again = analyze(out, write=False)
    assert again["coherence"]["noise_floor"] == 0.0
    assert again["coherence"]["k_cutoff"] == res.summary["coherence"]["k_cutoff"]


def test_read_back_holds_f_for_the_phase_space_figure(small_run):
    """A Vlasov folder read back (as `streamsim plot` and `analyze` read it) holds the f(x, u)
    snapshots and momentum grids the run kept in memory, so the redrawn phase-space figure is
    the continuum one, not an empty PIC scatter."""
    from streamsim import io
    out, res, _ = small_run
    mem = res.data.extra["distribution"]
    back = io.read_run(out).extra["distribution"]
    np.testing.assert_array_equal(back["t"], mem["t"])
    for s in range(2):
        np.testing.assert_array_equal(back["f"][s], mem["f"][s])
        assert back["grids"][s].cells == mem["grids"][s].cells
        assert back["grids"][s].u_min == pytest.approx(mem["grids"][s].u_min, rel=1e-12)
        assert back["grids"][s].u_max == pytest.approx(mem["grids"][s].u_max, rel=1e-12)


def test_resume_is_bit_identical(tmp_path):
    full = run("runs/warm-pair-beams-vlasov.toml", out=tmp_path / "a", overrides=SMALL,
               analyze=False, threads=1)
    from streamsim.pipeline import Interrupted
    with pytest.raises(Interrupted):
        run("runs/warm-pair-beams-vlasov.toml", out=tmp_path / "b", overrides=SMALL,
            analyze=False, threads=1, stop_after_steps=50)
    resumed = run("runs/warm-pair-beams-vlasov.toml", out=tmp_path / "b", overrides=SMALL,
                  analyze=False, threads=1, resume=True)
    np.testing.assert_array_equal(full.series.field_energy, resumed.series.field_energy)


def test_thread_count_does_not_change_the_result():
    import numba
    if numba.config.NUMBA_NUM_THREADS < 2:
        pytest.skip("one thread only")
    a = run("runs/warm-pair-beams-vlasov.toml", overrides=SMALL, write=False, analyze=False,
            threads=1)
    b = run("runs/warm-pair-beams-vlasov.toml", overrides=SMALL, write=False, analyze=False,
            threads=2)
    np.testing.assert_array_equal(a.series.field_energy, b.series.field_energy)
    np.testing.assert_array_equal(a.data.snapshots.density, b.data.snapshots.density)


def test_compare_cli_writes_the_contract(tmp_path):
    """`streamsim compare --json`: compare.json has exactly the three contract keys, the outputs
    named as in summary.json, and the relative difference is (PIC - Vlasov)/|Vlasov| of the two
    runs' own summary.json values (read back from their folders)."""
    import subprocess
    import sys
    out = tmp_path / "cmp"
    args = [sys.executable, "-m", "streamsim.cli", "compare", "runs/warm-pair-beams-vlasov.toml",
            "--out", str(out), "--json", "--set", "species.electrons.particles_per_cell=32",
            "--set", "species.positrons.particles_per_cell=32"]
    for o in SMALL:
        args += ["--set", o]
    proc = subprocess.run(args, capture_output=True, text=True, timeout=600)
    assert proc.returncode == 0, proc.stderr
    c = json.loads((out / "compare.json").read_text())
    assert json.loads(proc.stdout) == c
    assert {"pic", "vlasov", "relative_difference"} <= set(c)
    # each output also carries both methods' error bars and a verdict against their combination
    assert {"pic_err", "vlasov_err", "verdict"} <= set(c)
    for key, v_ in c["verdict"].items():
        p_, q_, ep, eq = c["pic"][key], c["vlasov"][key], c["pic_err"][key], c["vlasov_err"][key]
        if p_ is None or q_ is None or (ep is None and eq is None):
            assert v_.startswith("no verdict")
            continue
        # agree when the difference is within 2 combined standard errors (common practice)
        assert v_.startswith("agree") == (abs(p_ - q_) <= 2 * math.hypot(ep or 0, eq or 0))
    for key in ("growth.measured", "contrast.max", "coherence.frequency_cutoff_hz",
                "clumps.size_median", "coherence.k_cutoff", "contrast.t_unity_ns",
                "energy.relative_error_max"):
        assert key in c["pic"] and key in c["vlasov"] and key in c["relative_difference"]
    pic = json.loads((out / "pic" / "summary.json").read_text())
    vl = json.loads((out / "vlasov" / "summary.json").read_text())
    assert pic["method"] == "pic" and vl["method"] == "vlasov"
    p, v = pic["contrast"]["max"], vl["contrast"]["max"]
    assert c["relative_difference"]["contrast.max"] == pytest.approx((p - v) / abs(v))
    for fig in ("compare_field_energy.png", "compare_contrast.png", "compare_density.png",
                "compare_form_factor.png"):
        assert (out / fig).is_file(), fig


def test_compare_refuses_a_cold_deck_in_one_line(tmp_path):
    import subprocess
    import sys
    proc = subprocess.run([sys.executable, "-m", "streamsim.cli", "compare",
                           "runs/pair-beams.toml", "--out", str(tmp_path / "c")],
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 2
    assert proc.stderr.strip().count("\n") == 0 and "momentum spread" in proc.stderr
