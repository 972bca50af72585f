"""Production-size runs (python -m pytest -m slow). The default suite covers every feature at
small size; these repeat the physics at the particle counts a paper would use."""
from __future__ import annotations

import math

import numpy as np
import pytest

import streamsim

pytestmark = pytest.mark.slow


def test_full_validation_passes(tmp_path):
    """`streamsim validate --full`: every problem against its outside reference."""
    from streamsim.validation import run_validation
    v = run_validation("full")
    v.write_report(tmp_path / "report")
    assert v.passed, [f"{c.problem}: {c.quantity}" for c in v.failed]


def test_default_deck_at_production_size(tmp_path):
    """The default deck with 1024 particles per cell and species: the fastest box mode grows
    within 2% of the cold symmetric-beam root, omega_b/2 with omega_b^2 = omega_pb^2/gamma0^3
    (Birdsall & Langdon 1991; from memory), and the energy error stays below 1%."""
    res = streamsim.run(None, out=tmp_path / "run", overrides=[
        "species.electrons.particles_per_cell=1024", "species.positrons.particles_per_cell=1024"])
    g0 = 1 / math.sqrt(1 - 0.1**2)
    wb = math.sqrt(0.5 / g0**3)
    growth = res.summary["growth"]
    assert growth["mode"] == 8
    assert abs(growth["measured"] - wb / 2) / (wb / 2) < 0.02
    assert res.summary["energy"]["relative_error_max"] < 1e-2
    # clumps (delta n/n = 1) form only after the linear phase the growth fit started in
    t1 = res.summary["contrast"]["t_unity"]
    assert t1 is not None and growth["window"][0] < t1 < res.deck.time.end
    # N random phasors give <|F|^2> = 1/N (Goodman 1985), N = particles of one species
    assert res.summary["coherence"]["noise_floor"] == pytest.approx(
        1.0 / (1024 * res.deck.box.cells), rel=1e-12)
