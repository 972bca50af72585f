"""Emission numbers over the saturated phase: the window and its statistics, the error budget,
the converge verdict with a Richardson gap, and the headline's independence of time.end."""
import math

import numpy as np
import pytest

from streamsim.analysis import emission as em
from streamsim.scan import converge


# -- the window and its statistics on a synthetic series ---------------------------------------
def test_synthetic_plateau_gives_window_mean_and_spread_back():
    # prescribed series: exponential growth 1e-3 e^{0.2 t} up to the plateau, then a plateau at
    # 2.0 with Gaussian scatter of standard deviation 0.3 (seeded); t_unity = ln(1e3)/0.2
    rng = np.random.default_rng(11)
    t = np.arange(0.0, 200.0, 0.25)
    grow = 1e-3 * np.exp(0.2 * t)
    t_sat = math.log(2.0 / 1e-3) / 0.2
    y = np.where(t < t_sat, grow, 2.0 + 0.3 * rng.standard_normal(t.size))
    t_unity = math.log(1e3) / 0.2
    w = em.saturated_window(t, y, t_unity)
    assert w["t0"] == pytest.approx(t_unity) and w["t1"] == pytest.approx(t[-1])
    assert w["long_enough"]
    st = em.window_stats(t, y, t_sat, w["t1"])
    n = st["n"]
    # mean of n Gaussian draws: within 4 standard errors 0.3/sqrt(n) of 2.0 (textbook sampling)
    assert abs(st["mean"] - 2.0) < 4 * 0.3 / math.sqrt(n)
    # sample standard deviation: relative standard error 1/sqrt(2(n-1)) (textbook, normal data)
    assert abs(st["spread"] - 0.3) < 4 * 0.3 / math.sqrt(2 * (n - 1))
    # the block jackknife of the mean of independent draws estimates 0.3/sqrt(n); with 4 blocks
    # it has 3 degrees of freedom, so allow a factor 3 either way (chi-square, 3 dof, ~99%)
    assert 0.3 / math.sqrt(n) / 3 < st["err"] < 3 * 0.3 / math.sqrt(n)


def test_window_without_unity_starts_at_half_the_largest_contrast_and_says_when_too_short():
    t = np.linspace(0.0, 30.0, 301)
    y = 0.4 * (1 - np.exp(-t / 5.0))            # never reaches 1; half of 0.4*(1-e^-6) ...
    w = em.saturated_window(t, y, None)
    half = 0.5 * y.max()
    assert w["t0"] == pytest.approx(t[np.argmax(y >= half)])
    assert "linear phase" in w["how"]
    short = em.saturated_window(t[:60], y[:60], 5.0)      # ends at 5.9 < 1.5 x 5
    assert not short["long_enough"] and short["end_needed"] == pytest.approx(7.5)


def test_budget_is_the_quadrature_sum_and_names_the_dominant_term():
    b = em.budget({"mode_to_mode": 3.0, "window": 4.0, "replica": None})
    assert b["combined"] == pytest.approx(5.0) and b["dominant"] == "window"
    assert b["terms"]["replica"] is None


def test_block_jackknife_of_the_mean_matches_the_textbook_formula():
    # for the mean, the delete-one-block jackknife equals the standard error of the block means
    # s_B / sqrt(B) (Efron & Tibshirani 1993, ch. 11: jackknife of the mean is exact)
    v = np.array([1.0, 2.0, 4.0, 7.0, 3.0, 5.0, 6.0, 2.0])
    blocks = v.reshape(4, 2).mean(axis=1)
    want = blocks.std(ddof=1) / 2.0
    got = em.block_jackknife(v.size, lambda idx: float(v[idx].mean()), blocks=4)
    assert got == pytest.approx(want, rel=1e-12)


# -- converge verdicts --------------------------------------------------------------------------
def test_a_25_percent_richardson_gap_is_not_converged():
    # t_unity 0.220 -> 0.254 -> 0.279 (factor 2): p = ln(0.034/0.025)/ln 2 = 0.444 and the
    # Richardson estimate 0.279 + 0.025/(2^p - 1) = 0.348 (Richardson 1911; Roache 1998, ch. 5),
    # 25% above the finest level; the last change (9%) alone is under the 10% tolerance
    levels = [{"value": v, "err": None} for v in (0.220, 0.254, 0.279)]
    r = converge.assess_output(levels, 2.0, tolerance=0.10)
    p = math.log(0.034 / 0.025) / math.log(2.0)
    assert r["extrapolated"] == pytest.approx(0.279 + 0.025 / (2 ** p - 1), rel=1e-9)
    assert r["extrapolated"] == pytest.approx(0.348, abs=0.002)
    assert r["verdict"] == "not converged" and "Richardson gap" in r["reason"]
    assert r["error_terms"]["richardson_gap"] == pytest.approx(r["extrapolated"] - 0.279)


def test_a_level_without_value_or_an_error_above_the_value_is_not_converged():
    lv = [{"value": None, "err": None}, {"value": 70.0, "err": 5.0}, {"value": 72.0, "err": 5.0}]
    assert converge.assess_output(lv, 2.0)["verdict"] == "not converged"
    lv = [{"value": 72.0, "err": 87.0}, {"value": 60.0, "err": 87.0}, {"value": 72.0, "err": 87.0}]
    r = converge.assess_output(lv, 2.0)
    assert r["verdict"] == "not converged" and "not smaller than its value" in r["reason"]


# -- formation time from a stated level ---------------------------------------------------------
def test_formation_time_from_a_level_predicts_a_run_seeded_100_times_lower():
    # Exponential growth (common practice, linear theory): a perturbation at level L grows as
    # L e^{gamma t} with gamma the fastest mode's linear rate, so from L to the measured start
    # level L0 takes ln(L0/L)/gamma and everything after L0 is the measured run:
    #     t_L = t_unity + ln(L0 / L) / gamma.
    # Check: run A (seed 1e-3) extrapolated to L = L0/100 must give the t_unity that run B,
    # seeded 100 times lower (1e-5) on the same quiet start, measures.
    import streamsim
    from conftest import pair_deck
    from streamsim.deck import load_deck

    def run(amplitude, sets=()):
        return streamsim.run(load_deck(pair_deck(cells=128, ppc=64, end=55.0,
                                                 amplitude=amplitude), list(sets)),
                             write=False, quiet=True, warn=lambda m: None).summary
    a = run(1e-3)
    level = a["contrast"]["initial_level"] / 100.0
    a2 = run(1e-3, [f"analysis.initial_level={level!r}"])
    c = a2["contrast"]
    assert "fastest mode" in c["extrapolation_rate_source"]
    assert c["extrapolation_rate"] == a2["growth"]["measured"]
    b = run(1e-5)["contrast"]
    err = math.hypot(c["t_unity_for_level_err"], 0.05)      # + the diagnostics cadence dt
    assert abs(c["t_unity_for_level"] - b["t_unity"]) <= 2 * err


# -- the headline does not depend on when the run stopped ---------------------------------------
def test_headline_agrees_whether_the_run_stops_at_1p5_or_3_times_t_unity():
    # warm band-seeded pair beams (theta = 2e-3, every unstable mode seeded at 1e-2): t_unity is
    # 25.8 /w_p. The window-averaged nu_c and clump size of a run ending at 1.5 t_unity and of
    # one ending at 3 t_unity must agree within their combined errors (the errors cover the
    # evolution over the window: common practice for a plateau average, see the module
    # streamsim.analysis.emission); the single maximum-contrast instant is kept as secondary.
    import streamsim
    from conftest import pair_deck
    from streamsim.deck import load_deck

    def run(end):
        raw = pair_deck(cells=128, ppc=128, end=end, theta=2e-3, amplitude=1e-2)
        return streamsim.run(load_deck(raw, ['perturbation.modes="band"', "time.dt='auto'"]),
                             write=False, quiet=True, warn=lambda m: None).summary
    short = run(38.8)
    tu = short["contrast"]["t_unity"]
    assert 1.45 * tu <= 38.8 <= 1.55 * tu
    long_ = run(3.0 * tu)
    for s in (short, long_):
        assert s["coherence"]["snapshot"] == "window" and s["emission"]["window"]["long_enough"]
        assert s["coherence"]["window"]["t0"] == pytest.approx(s["contrast"]["t_unity"])
    assert long_["contrast"]["t_unity"] == pytest.approx(tu, abs=0.1)    # dt "auto" follows end
    a, b = short["coherence"], long_["coherence"]
    assert abs(a["frequency_cutoff_hz"] - b["frequency_cutoff_hz"]) <= math.hypot(
        a["frequency_cutoff_err_hz"], b["frequency_cutoff_err_hz"])
    a, b = short["clumps"], long_["clumps"]
    assert abs(a["size_median_cm"] - b["size_median_cm"]) <= math.hypot(
        a["size_median_err_cm"], b["size_median_err_cm"])


# -- the right reference or none ------------------------------------------------------------------
def test_oscillation_reference_is_none_for_a_relativistically_hot_plasma():
    from pathlib import Path

    from streamsim.analysis import oscillation as osc
    from streamsim.deck import load_deck
    deck = Path(__file__).resolve().parents[1] / "runs" / "landau.toml"
    warm = load_deck(deck).species
    hot = load_deck(deck, ["species.electrons.theta=2.0"]).species
    # theta = 1e-4: the non-relativistic Maxwellian (Landau 1946) holds; its Bohm-Gross-like
    # root exists near omega_p (textbook: omega^2 = omega_p^2 + 3 k^2 v_th^2 for k lambda_D << 1)
    k = 0.3
    root, model = osc.reference_root(k, warm, complex(1.0, 0.0))
    assert model == "maxwellian" and root.real == pytest.approx(
        math.sqrt(1 + 3 * k * k * 1e-4), rel=1e-3)
    # theta = 2 (kT = 2 mc^2): thermal speeds near c, where the non-relativistic Maxwellian
    # (v_th = sqrt(theta) > 1) is meaningless: no reference, and the reason says so
    assert osc.reference_root(k, hot, complex(1.0, 0.0)) is None
    assert "relativistically hot" in osc.no_reference_why(hot)


def test_compare_verdict_uses_two_combined_standard_errors():
    from streamsim.vlasov.compare import verdict
    # 2 sigma of the difference of two independent Gaussian estimates (common practice):
    # sqrt(3^2 + 4^2) = 5, so a difference of 9.9 agrees and one of 10.1 does not
    assert verdict(100.0, 3.0, 90.1, 4.0).startswith("agree")
    assert verdict(100.0, 3.0, 89.9, 4.0).startswith("differ")
    assert verdict(100.0, None, 90.0, None).startswith("no verdict")
    assert verdict(None, 1.0, 90.0, 1.0).startswith("no verdict")
