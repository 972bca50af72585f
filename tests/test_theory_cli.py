"""`streamsim theory` as a user runs it: JSON contract, table, plot, errors."""
from __future__ import annotations

import json
import math
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from streamsim import theory
from streamsim.cli.theory import MAX_ROWS, _fmt, plot_arrays
from streamsim.deck import load_deck

ROOT = Path(__file__).resolve().parents[1]

# the default deck's beams: beta = +-0.1, density 0.5 each (streamsim.deck.DEFAULT_DECK)
BETA = 0.1
G0 = 1 / math.sqrt(1 - BETA**2)
WB = math.sqrt(0.5 / G0**3)          # omega_b = omega_pb / gamma0^(3/2)


def cli(*args, timeout=120):
    return subprocess.run([sys.executable, "-m", "streamsim.cli", "theory", *args],
                          capture_output=True, text=True, cwd=ROOT, timeout=timeout)


def table_rows(stdout: str) -> dict[int, list[str]]:
    """Box-mode rows of the table: m -> the other columns as printed."""
    rows = {}
    for line in stdout.splitlines():
        parts = line.split()
        if len(parts) >= 5 and re.fullmatch(r"\d+", parts[0]) and line.startswith("    "):
            rows[int(parts[0])] = parts[1:]
    return rows


def growing_box_modes(length: float, nmodes: int) -> int:
    """Box modes inside the symmetric cold band k v0 < sqrt2 omega_b (Birdsall & Langdon 1991,
    sec. 5.10)."""
    return sum(1 for m in range(1, nmodes + 1) if 2 * math.pi * m / length * BETA < math.sqrt(2) * WB)


def test_json_contract_default_deck():
    proc = cli("--json")
    assert proc.returncode == 0, proc.stderr
    d = json.loads(proc.stdout)
    assert d["model"] == "cold"
    assert set(d["fastest"]) >= {"k", "growth", "omega_r", "growth_time_ns", "wavelength_cm"}
    assert len(d["unstable_band"]) == 2
    assert all(set(m) >= {"mode", "k", "growth", "omega_r"} for m in d["box_modes"])
    # symmetric cold beams: gamma_max = omega_b/2 (Birdsall & Langdon 1991, sec. 5.10)
    assert d["fastest"]["growth"] == pytest.approx(WB / 2, rel=1e-8)


def test_pair_beams_deck_equals_default():
    deck = ROOT / "runs" / "pair-beams.toml"
    if not deck.exists():
        pytest.skip("runs/pair-beams.toml not present")
    a = json.loads(cli(str(deck), "--json").stdout)
    b = json.loads(cli("--json").stdout)
    assert a["fastest"] == b["fastest"]


def test_table_lists_every_growing_mode_from_m1():
    deck = load_deck(None)
    n = growing_box_modes(deck.box.length, deck.output.recorded_modes)
    assert n <= MAX_ROWS
    proc = cli()
    assert proc.returncode == 0, proc.stderr
    rows = table_rows(proc.stdout)
    assert f"{n} growing" in proc.stdout
    assert sorted(rows) == list(range(1, n + 1))           # m = 1 included, none cut
    assert "more growing modes" not in proc.stdout


def test_table_cap_says_what_is_cut_and_all_lists_every_mode():
    length = 50.0
    deck = load_deck(None, overrides=[f"box.length={length}"])
    nmodes = deck.output.recorded_modes
    n = growing_box_modes(length, nmodes)
    assert n > MAX_ROWS
    proc = cli("--set", f"box.length={length}")
    assert proc.returncode == 0, proc.stderr
    rows = table_rows(proc.stdout)
    assert len(rows) == MAX_ROWS
    assert f"{n - MAX_ROWS} more growing modes not listed" in proc.stdout
    assert "--all" in proc.stdout
    # the listed window holds the box mode nearest the fastest k = sqrt3/2 omega_b / v0
    # (Birdsall & Langdon 1991, sec. 5.10)
    m_fast = round(math.sqrt(3) / 2 * WB / BETA * length / (2 * math.pi))
    assert m_fast in rows
    every = table_rows(cli("--set", f"box.length={length}", "--all").stdout)
    assert sorted(every) == list(range(1, nmodes + 1))


def test_round_off_frequency_prints_as_zero():
    # symmetric counter-streaming cold beams: the growing root is purely imaginary in the
    # centre-of-momentum frame (Birdsall & Langdon 1991, sec. 5.10), so omega_r prints as 0
    proc = cli()
    assert proc.returncode == 0, proc.stderr
    assert re.search(r"omega_r = 0 omega_p", proc.stdout)
    rows = table_rows(proc.stdout)
    assert all(r[2] == "0" for r in rows.values())          # w_r column
    assert not re.search(r"e-1[3-9]", proc.stdout)
    # the rule itself: below 1e-12 of the mode's scale -> "0"; a real frequency is kept
    assert _fmt(1.235e-17, ".4g", scale=0.26) == "0"
    assert _fmt(0.0205, ".4g", scale=0.03) == "0.0205"
    assert _fmt(None) == "-" and _fmt(float("nan")) == "-"


def test_plot_arrays_mask_omega_r_past_the_band_edge():
    deck = ROOT / "runs" / "warm-pair-beams.toml"
    if not deck.exists():
        pytest.skip("runs/warm-pair-beams.toml not present")
    disp = theory.theory_for_deck(load_deck(str(deck)), model="maxwellian")
    (lo, hi), = disp.unstable_bands
    a = plot_arrays(disp)
    past = a["k"] > hi
    inside = a["growth"] > 0
    assert past.any() and inside.any()
    # past the edge the least damped maxwellian root is another branch, with omega_r != 0 ...
    assert np.nanmax(np.abs(disp.omega_r[past])) > 0.01
    # ... and is not drawn; inside the band the growing root of symmetric beams is purely
    # growing (Birdsall & Langdon 1991, sec. 5.10), drawn as 0
    assert np.all(np.isnan(a["omega_r"][past]))
    assert np.all(a["omega_r"][inside] == 0.0)
    stable_modes = a["box_growth"] <= 0
    assert stable_modes.any() and np.all(np.isnan(a["box_omega_r"][stable_modes]))


def test_plot_arrays_weak_beam_keeps_the_growing_root_frequency():
    deck = ROOT / "runs" / "weak-beam.toml"
    if not deck.exists():
        pytest.skip("runs/weak-beam.toml not present")
    disp = theory.theory_for_deck(load_deck(str(deck)))
    a = plot_arrays(disp)
    inside = a["growth"] > 0
    # a beam-plasma root grows with omega_r > 0 (convective, omega_r ~ k v_b; Krall &
    # Trivelpiece 1973, sec. 9.4): kept inside the band, masked beyond it
    assert np.all(a["omega_r"][inside] > 0)
    assert np.all(np.isnan(a["omega_r"][~inside]))


def test_plot_arrays_stable_deck_keeps_its_root():
    deck = load_deck({"title": "t", "box": {"length": 2 * math.pi, "cells": 32},
                      "species": [{"name": "e", "charge": -1.0, "density": 1.0}],
                      "output": {"recorded_modes": 4}})
    a = plot_arrays(theory.theory_for_deck(deck))
    # cold plasma oscillation omega = omega_p at every k (Tonks & Langmuir, Phys. Rev. 33, 195
    # (1929)): nothing grows, so the one root is drawn everywhere
    assert np.allclose(a["omega_r"], 1.0, rtol=1e-9)
    assert np.allclose(a["box_omega_r"], 1.0, rtol=1e-9)


def test_table_and_plot(tmp_path):
    png = tmp_path / "theory.png"
    proc = cli("--plot", str(png), "--kmax", "12")
    assert proc.returncode == 0, proc.stderr
    assert "fastest-growing mode" in proc.stdout
    assert "omega_p" in proc.stdout          # units stated
    assert png.stat().st_size > 1000
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert not list(tmp_path.glob(".*.tmp"))  # written atomically: no temporary left behind


def test_unwritable_plot_is_one_line_error(tmp_path):
    blocker = tmp_path / "a-file"
    blocker.write_text("")
    proc = cli("--plot", str(blocker / "theory.png"))
    assert proc.returncode == 4
    assert proc.stderr.strip().count("\n") == 0 and "theory.png" in proc.stderr


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


def test_bad_nk():
    proc = cli("--nk", "3")
    assert proc.returncode == 2
    assert "--nk" in proc.stderr and proc.stderr.strip().count("\n") == 0
