"""`streamsim theory` as a user runs it: JSON contract, table, plot, errors, speed."""
from __future__ import annotations

import json
import math
import subprocess
import sys
import time
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def cli(*args, timeout=120):
    return subprocess.run([sys.executable, "-m", "streamsim.cli", "theory", *args],
                          capture_output=True, text=True, cwd=ROOT, timeout=timeout)


def test_json_contract_default_deck():
    t0 = time.perf_counter()
    proc = cli("--json")
    elapsed = time.perf_counter() - t0
    assert proc.returncode == 0, proc.stderr
    d = json.loads(proc.stdout)
    assert d["model"] == "cold"
    assert set(d["fastest"]) >= {"k", "growth", "omega_r", "growth_time_ns", "wavelength_cm"}
    assert len(d["unstable_band"]) == 2
    assert all(set(m) >= {"mode", "k", "growth", "omega_r"} for m in d["box_modes"])
    # symmetric cold beams at beta = 0.1 (DEFAULT_DECK): gamma_max = omega_b/2 (Birdsall & Langdon)
    g0 = 1 / math.sqrt(1 - 0.01)
    assert d["fastest"]["growth"] == pytest.approx(math.sqrt(0.5 / g0**3) / 2, rel=1e-8)
    assert elapsed < 10.0      # the issue asks < 2 s; generous here for a loaded test machine


def test_pair_beams_deck_equals_default():
    deck = ROOT / "runs" / "pair-beams.toml"
    if not deck.exists():
        pytest.skip("runs/pair-beams.toml not present")
    a = json.loads(cli(str(deck), "--json").stdout)
    b = json.loads(cli("--json").stdout)
    assert a["fastest"] == b["fastest"]


def test_table_and_plot(tmp_path):
    png = tmp_path / "theory.png"
    proc = cli("--plot", str(png), "--kmax", "12")
    assert proc.returncode == 0, proc.stderr
    assert "fastest-growing mode" in proc.stdout
    assert "omega_p" in proc.stdout          # units stated
    assert png.stat().st_size > 1000
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_model_override():
    proc = cli("--json", "--model", "maxwellian", "--set", "species.electrons.theta=1e-4",
               "--set", "species.positrons.theta=1e-4")
    assert proc.returncode == 0, proc.stderr
    d = json.loads(proc.stdout)
    assert d["model"] == "maxwellian"
    assert d["fastest"]["growth"] > 0


def test_bad_deck_is_one_line_error():
    proc = cli("no-such-deck.toml")
    assert proc.returncode == 2
    assert proc.stderr.strip().count("\n") == 0 and "deck error" in proc.stderr


def test_bad_kmax():
    proc = cli("--kmax", "-1")
    assert proc.returncode == 2
    assert "kmax" in proc.stderr
