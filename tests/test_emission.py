"""Emission numbers: broadband seed, envelope cutoff, grid-limit flags, error bars, formation
time from a stated level, and the resolution study (streamsim converge)."""
from __future__ import annotations

import json
import math

import numpy as np
import pytest

import streamsim
from conftest import pair_deck
from streamsim import loading
from streamsim.analysis import coherence, contrast
from streamsim.deck import DeckError, load_deck
from streamsim.scan import converge


def _run(raw, sets=()):
    return streamsim.run(load_deck(raw, list(sets)), write=False, quiet=True,
                         warn=lambda m: None).summary


# -- broadband seed ----------------------------------------------------------------------------
def test_band_seeds_every_mode_of_the_cold_band():
    deck = load_deck(None, ['perturbation.modes="band"'])
    b = deck.species[0]
    # two symmetric cold beams: unstable for k v0 < sqrt(2) omega_b, omega_b^2 = n q^2/(m gamma^3)
    # (two-stream dispersion 1 = sum omega_b^2/(omega -+ k v0)^2 at omega = 0; Birdsall &
    # Langdon 1991, from memory)
    wb = math.sqrt(b.density / b.drift_gamma ** 3)
    k_top = math.sqrt(2.0) * wb / abs(b.drift_beta)
    want = [m for m in range(1, deck.box.cells // 2 + 1)
            if 2 * math.pi * m / deck.box.length < k_top]
    assert list(deck.perturbation.modes) == want
    assert deck.perturbation.phases == "random"
    assert load_deck(deck.to_dict()) == deck          # the resolved list loads back equal


def test_band_seed_amplitude_and_phase_to_round_off():
    deck = load_deck(None, ['perturbation.modes="band"', "perturbation.amplitude=1e-3"])
    x, _, _ = loading.load_species(deck.species[0], deck, np.random.default_rng(0))
    L, A = deck.box.length, deck.perturbation.amplitude
    ph = loading.seed_phases(deck)
    assert np.ptp(ph) > 1.0                           # random phases, not all zero
    for m, p in zip(deck.perturbation.modes, ph):
        F = np.mean(np.exp(1j * 2 * math.pi * m / L * x))     # direct sum
        # n/n0 = 1 - A cos(k x + phi): (1/L) int e^{ikx} n/n0 dx = -(A/2) e^{-i phi} (analytic)
        assert abs(F - (-A / 2) * np.exp(-1j * p)) < 1e-12
    m_off = max(deck.perturbation.modes) + 3
    assert abs(np.mean(np.exp(1j * 2 * math.pi * m_off / L * x))) < 1e-12


def test_band_needs_an_amplitude_and_phases_are_checked():
    with pytest.raises(DeckError, match="amplitude"):
        load_deck(None, ['perturbation.modes="band"', "perturbation.amplitude=0.0"])
    with pytest.raises(DeckError, match="perturbation.phases"):
        load_deck(None, ['perturbation.phases="randm"'])
    with pytest.raises(DeckError, match="perturbation.modes"):
        load_deck(None, ['perturbation.modes="all"'])


# -- envelope cutoff -----------------------------------------------------------------------------
@pytest.mark.parametrize("seed", range(5))
def test_envelope_cutoff_of_a_gaussian_bump_with_exponential_noise(seed):
    L, sigma, M, mu = 1.0, 2e-3, 2000, 0.02
    k = 2 * math.pi * np.arange(1, M + 1) / L
    rng = np.random.default_rng(seed)
    # Gaussian bump of rms sigma: |F|^2 = exp(-k^2 sigma^2) (analytic), plus exponential noise of
    # mean mu (shot noise of a random phasor sum, Goodman 1985); exact crossing of its mean at
    # drop x peak: exp(-k^2 sigma^2) + mu = 0.5 (1 + mu)
    P = np.exp(-(k * sigma) ** 2) + rng.exponential(mu, M)
    exact = math.sqrt(-math.log(0.5 * (1 + mu) - mu)) / sigma
    r = coherence.envelope_cutoff(k, P, floor=1e-4, drop=0.5, bins_per_decade=8)
    assert r["k_cutoff"] == pytest.approx(exact, rel=0.05)
    assert r["k_cutoff_err"] is not None and r["k_cutoff_err"] < 0.2 * exact
    assert not r["lower_bound"]


def test_envelope_cutoff_ignores_pure_noise_and_flags_a_flat_spectrum():
    k = 2 * math.pi * np.arange(1, 3001)
    rng = np.random.default_rng(2)
    assert coherence.envelope_cutoff(k, rng.exponential(1e-4, k.size), 1e-4)["k_cutoff"] is None
    r = coherence.envelope_cutoff(k, np.ones_like(k), 1e-4)
    assert r["lower_bound"]
    assert coherence.grid_limited_cutoff(r["k_cutoff"], True, 64, 1.0)


# -- formation time from a level -------------------------------------------------------------
def test_initial_level_and_extrapolation_of_an_exponential():
    t = np.arange(0.0, 40.0, 0.1)
    g, y0 = 0.3, 1e-5
    y = y0 * np.exp(g * t)
    fit = contrast.initial_level(t, y)
    assert fit["rate"] == pytest.approx(g, rel=1e-9)
    assert fit["level_t0"] == pytest.approx(y0 * math.exp(g * fit["t0"]), rel=1e-9)
    tu = contrast.first_crossing(t, y, 1.0)
    # exact: y = 1 at t = ln(1/y0)/g; from a level l instead of y0: ln(1/l)/g (analytic)
    assert contrast.t_unity_for_level(tu, fit["level_t0"] / math.exp(g * fit["t0"]), g, 1e-8) \
        == pytest.approx(math.log(1e8) / g, rel=1e-3)


# -- grid-limit flags in runs ------------------------------------------------------------------
def test_cold_run_is_grid_limited_and_says_why():
    s = _run(pair_deck(cells=128, ppc=64, end=40.0))
    cl, co = s["clumps"], s["coherence"]
    # criterion: median FWHM < analysis.clump_grid_cells (3) simulation cells
    assert cl["grid_limited"] and cl["size_median_cells"] < 3
    assert cl["cold_species"] == ["electrons", "positrons"]
    assert co["grid_limited"]
    assert co["frequency_cutoff_hz"] is None and co["frequency_cutoff_lower_bound_hz"] > 0
    assert "frequency_cutoff_bound" not in co   # one name: frequency_cutoff_lower_bound_hz


def test_warm_run_at_resolved_debye_length_is_not_grid_limited():
    # theta = 2e-3: lambda_D = sqrt(theta)/omega_b = 0.063 c/omega_p > dx = 0.032 (health rule
    # dx <= pi lambda_D, Birdsall & Langdon 1991, ch. 8)
    s = _run(pair_deck(cells=256, ppc=64, end=50.0, theta=2e-3, amplitude=1e-3),
             ['perturbation.modes="band"', "time.dt='auto'"])
    cl, co = s["clumps"], s["coherence"]
    assert cl["count"] > 0 and not cl["grid_limited"] and cl["size_median_err_cm"] is not None
    assert not co["grid_limited"] and co["frequency_cutoff_hz"] is not None
    assert co["frequency_cutoff_err_hz"] is not None
    assert s["clumps"]["cold_species"] == []


def test_error_bar_of_nu_c_agrees_with_the_replica_scatter():
    nus, errs = [], []
    for seed in range(10):
        # ppc 256: the headline is the cutoff of the form factor averaged over the saturated
        # window, whose envelope peak sits lower than the single maximum-contrast instant's; at
        # 128 per cell half the seeds had no cutoff 20x above the 1/N floor over the window
        co = _run(pair_deck(cells=64, ppc=256, end=50.0, theta=2e-3, loading="random", seed=seed,
                            nwaves=6), ["time.dt='auto'"])["coherence"]
        nu = co["frequency_cutoff_hz"] or co["frequency_cutoff_lower_bound_hz"]
        if nu is not None and co["frequency_cutoff_err_hz"] is not None:
            nus.append(nu)
            errs.append(co["frequency_cutoff_err_hz"])
    assert len(nus) >= 8
    scatter = float(np.std(nus, ddof=1))
    # an honest error bar: the replica scatter and the typical reported error agree within a
    # factor of 2 (common practice for checking a standard error against replicas)
    assert 0.5 <= scatter / float(np.median(errs)) <= 2.0


# -- resolution study --------------------------------------------------------------------------
def test_richardson_recovers_order_two_and_the_limit():
    a, b, F = 3.0, 0.7, 2.0
    # f(h) = a + b h^2 on h = 1, 1/2, 1/4: observed order 2 and limit a (Richardson 1911)
    levels = [{"value": a + b * (1.0 / F ** lv) ** 2, "err": 1e-6} for lv in range(3)]
    r = converge.assess_output(levels, F, tolerance=0.1)
    assert r["order"] == pytest.approx(2.0, rel=1e-9)
    assert r["extrapolated"] == pytest.approx(a, rel=1e-12)
    assert r["verdict"] == "converged"                 # change b(1/16 - 1/4) is 1.5% of a
    assert converge.assess_output(levels, F, tolerance=0.001)["verdict"] == "not converged"
    assert converge.assess_output(levels, F, limited=True)["verdict"] == "grid-limited"


def test_converge_command_on_a_tiny_deck(tmp_path):
    from streamsim.cli import main
    deck = tmp_path / "tiny.toml"
    import tomli_w
    raw = pair_deck(cells=32, ppc=16, end=24.0, nwaves=2, amplitude=1e-3)
    raw["output"]["recorded_modes"] = 8
    deck.write_text(tomli_w.dumps(raw), encoding="utf-8")
    out = tmp_path / "study"
    assert main(["converge", str(deck), "--levels", "3", "--out", str(out), "--workers", "1",
                 "--quiet"]) == 0
    study = json.loads((out / "converge.json").read_text())
    verdicts = set()
    for name in ("growth.measured", "contrast.t_unity_ns", "contrast.max", "clumps.size_median_cm",
                 "coherence.k_cutoff", "coherence.frequency_cutoff_hz"):
        o = study["outputs"][name]
        assert {"levels", "change", "order", "extrapolated", "verdict"} <= set(o)
        assert [lv["cells"] for lv in o["levels"]] == [32, 64, 128]
        assert o["levels"][2]["particles_per_cell"] == {"electrons": 64, "positrons": 64}
        assert {"cells", "particles_per_cell", "dt", "value", "err"} <= set(o["levels"][0])
        # the verdict follows README's rule from the levels listed (grid-limited when the finest
        # level is flagged; converged when every level has a value, the finest error is below
        # the finest value, and both |change| and |Richardson estimate - finest| are <= the
        # combined error or tolerance x |finest|)
        fine, prev = o["levels"][2], o["levels"][1]
        if fine["grid_limited"]:
            want = "grid-limited"
        elif any(lv["value"] is None for lv in o["levels"]):
            want = "not converged"
        else:
            ch = fine["value"] - prev["value"]
            assert o["change"] == pytest.approx(ch, rel=1e-12, abs=1e-300)
            comb = math.hypot(fine["err"] or 0.0, prev["err"] or 0.0)
            tol = study["tolerance"] * abs(fine["value"])
            ok = abs(ch) <= comb or abs(ch) <= tol
            if o["extrapolated"] is not None:
                gap = o["extrapolated"] - fine["value"]
                ok = ok and (abs(gap) <= comb or abs(gap) <= tol)
            if fine["err"] is not None and fine["err"] >= abs(fine["value"]):
                ok = False
            want = "converged" if ok else "not converged"
        assert o["verdict"] == want, name
        verdicts.add(o["verdict"])
    assert len(verdicts) >= 2                   # the tiny deck does not give one verdict for all
    # the finest growth rate within 3 errors of the cold symmetric-beam maximum omega_b/2
    # (Birdsall & Langdon 1991; from memory), omega_b^2 = 0.5/gamma0^3 at beta = 0.1
    g = study["outputs"]["growth.measured"]["levels"][2]
    assert abs(g["value"] - 0.5 * math.sqrt(0.5 * 0.99 ** 1.5)) < 3 * g["err"]
    assert (out / "converge.csv").is_file() and (out / "converge.png").is_file()
    # resumable: the same command again runs nothing new and gives the same table
    assert main(["converge", str(deck), "--levels", "3", "--out", str(out), "--quiet"]) == 0
    assert json.loads((out / "converge.json").read_text()) == study
    assert main(["converge", str(deck), "--factor", "1", "--out", str(out), "--quiet"]) == 2
