"""Each numerical-health rule fires on a deck built to trigger it; dt = "auto" passes them."""
from __future__ import annotations

import math

import pytest

from conftest import pair_deck, plasma_deck
from streamsim.deck import load_deck
from streamsim.pipeline import HealthRefusal, _theory, run


def _theory_block(deck):
    return _theory(deck)[0]       # the Dispersion, typed
from streamsim.health import check_deck


def findings(raw):
    deck = load_deck(raw)
    return {(f.rule, f.level) for f in check_deck(deck, _theory_block(deck))}


def test_sane_decks_raise_nothing():
    assert findings(pair_deck()) == set()
    assert findings(plasma_deck()) == set()


def test_leapfrog_limit_refuses():
    """Leapfrog is unstable for omega_p dt >= 2 (Birdsall & Langdon 1991, sec. 4-6)."""
    raw = plasma_deck(dt=2.5, end=50.0)
    assert ("leapfrog stability", "refusal") in findings(raw)


def test_accuracy_bound_warns():
    """omega_p dt > 0.2 (common practice bound for accuracy)."""
    assert ("time-step accuracy", "warning") in findings(plasma_deck(dt=0.5, end=20.0))


def test_cell_crossing_warns():
    """v_max dt < dx (common practice): a fast beam on a fine grid with a long step."""
    raw = pair_deck(beta=0.9, cells=512, nwaves=1, dt=0.15, end=15.0)
    assert ("cell crossing", "warning") in findings(raw)


def test_debye_resolution_warns_and_refuses():
    """Finite-grid instability: dx <= pi lambda_D for CIC (common practice, Birdsall & Langdon ch. 8)."""
    lam = math.sqrt(1e-4)
    warn = plasma_deck(theta=1e-4, cells=16, length=16 * 5 * lam, dt=0.05, end=5.0)
    refuse = plasma_deck(theta=1e-4, cells=16, length=16 * 20 * lam, dt=0.05, end=5.0)
    assert ("finite-grid instability", "warning") in findings(warn)
    assert ("finite-grid instability", "refusal") in findings(refuse)


def test_cold_beam_grid_heating_warns():
    """Cold drifting beam: omega_p dx / v_d > 1 couples aliased beam resonances (from memory,
    Birdsall & Langdon 1991, sec. 8-10)."""
    raw = pair_deck(beta=0.1, cells=16, nwaves=4)
    assert ("cold-beam grid instability", "warning") in findings(raw)


def test_fastest_mode_resolution_and_containment():
    assert ("fastest mode resolution", "warning") in findings(pair_deck(cells=48, nwaves=8))
    assert ("fastest mode resolution", "refusal") in findings(pair_deck(cells=16, nwaves=8))
    short = pair_deck(cells=64, nwaves=8)
    short["box"]["length"] = short["box"]["length"] / 8 * 0.5  # k_1 = 2 k_fast > sqrt2 omega_b/v0: stable
    f = findings(short)
    assert ("fastest mode containment", "warning") in f
    assert ("no unstable box mode", "refusal") in f


def test_noise_floor_warns_for_random_loading():
    """Random loading: per-cell shot noise delta n/n ~ 1/sqrt(ppc) (Poisson statistics)."""
    raw = pair_deck(ppc=8, loading="random")
    assert ("noise floor", "warning") in findings(raw)
    assert ("noise floor", "warning") not in findings(pair_deck(ppc=8, loading="quiet"))


@pytest.mark.parametrize("make", [
    lambda: pair_deck(beta=0.9, cells=512, end=15.0),
    lambda: pair_deck(beta=0.1, cells=256, end=15.0),
    lambda: plasma_deck(theta=1e-4, cells=64, length=64 * 0.01, end=10.0),
    lambda: pair_deck(beta=0.5, theta=0.01, cells=256, end=15.0),
])
def test_auto_dt_passes_every_time_step_rule(make):
    raw = make()
    raw["time"]["dt"] = "auto"
    deck = load_deck(raw)
    rules = {f.rule for f in check_deck(deck, _theory_block(deck))}
    assert not rules & {"leapfrog stability", "time-step accuracy", "cell crossing"}
    assert deck.time.steps * deck.time.dt == pytest.approx(deck.time.end, rel=1e-12)


def test_refusal_stops_run_before_any_output(tmp_path):
    with pytest.raises(HealthRefusal) as info:
        run(plasma_deck(dt=2.5, end=50.0), out=tmp_path / "o")
    assert str(info.value).startswith("time.dt = 2.5:")
    assert not (tmp_path / "o").exists()
