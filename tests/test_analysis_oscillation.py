"""Frequency and damping of seeded stable modes against analytic signals and published roots."""
import math

import numpy as np
import pytest

import streamsim
from conftest import plasma_deck
from streamsim.analysis.oscillation import fit_damped_oscillation, reference_root
from streamsim.deck import load_deck


@pytest.mark.parametrize("w,nu", [(1.4157, 0.1534), (1.0, 0.0), (2.3, 0.02)])
def test_fit_recovers_a_known_damped_cosine(w, nu):
    """s = A e^{-nu t} cos(w t + phi) + noise: the fit returns w and -nu (analytic signal)."""
    rng = np.random.default_rng(8)
    t = np.arange(0, 30, 0.02)
    s = 0.01 * np.exp(-nu * t) * np.cos(w * t + 0.7) + 1e-7 * rng.normal(size=t.size)
    fit = fit_damped_oscillation(t, s)
    assert fit["omega_r"] == pytest.approx(w, rel=1e-3)
    assert fit["rate"] == pytest.approx(-nu, abs=1e-3 * max(nu, 1.0))


def test_reference_root_is_the_published_landau_root():
    """k lambda_D = 0.5: omega = 1.4157 - 0.1534 i omega_p (widely tabulated Landau root)."""
    deck = load_deck(plasma_deck(theta=1e-6, length=2 * math.pi / 500.0, cells=16, ppc=4))
    root, model = reference_root(500.0, deck.species, complex(1.4, -0.15))
    assert model == "maxwellian"
    assert abs(root.real - 1.4157) < 1e-3 and abs(root.imag + 0.1534) < 1e-3


def test_landau_run_reports_damping_beside_the_root():
    """A run at k lambda_D = 0.5: summary 'oscillation' within 2% (frequency) and 10% (rate) of
    the published root 1.4157 - 0.1534 i (as the engine test, through the analysis layer)."""
    theta = 1e-4
    k = 0.5 / math.sqrt(theta)
    raw = plasma_deck(cells=32, length=2 * math.pi / k, ppc=4000, theta=theta, dt=0.02, end=25.0,
                      amplitude=0.02)
    res = streamsim.run(raw, write=False, quiet=True)
    (row,) = res.summary["oscillation"]
    assert row["mode"] == 1 and row["theory_model"] == "maxwellian"
    assert abs(row["omega_r"] - 1.4157) / 1.4157 < 0.02
    assert abs(row["rate"] + 0.1534) / 0.1534 < 0.10
