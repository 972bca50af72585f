"""The run pipeline around the physics: the run-folder lock, a finished run of another deck,
the memory refusal before anything is written, summary.json written once, warnings merged
across species. These are behaviours of the program (no physics reference applies)."""
from __future__ import annotations

import json
import os
import subprocess
import sys
import time

import pytest
import tomli_w

from conftest import pair_deck
from streamsim import io, pipeline
from streamsim.cli import main
from streamsim.health import Finding


def _deck_file(tmp_path, name="deck.toml", **kw):
    raw = pair_deck(cells=64, ppc=8, end=kw.pop("end", 4.0), **kw)
    path = tmp_path / name
    path.write_text(tomli_w.dumps(raw))
    return path, raw


def test_a_second_run_into_a_folder_in_use_exits_4_naming_the_process(tmp_path, capsys):
    deck, _ = _deck_file(tmp_path, end=400.0)
    out = tmp_path / "run"
    first = subprocess.Popen([sys.executable, "-m", "streamsim.cli", "run", str(deck), "--quiet",
                              "--no-analysis", "--out", str(out)],
                             stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        lock = out / pipeline.LOCK_FILE
        for _ in range(600):        # wait until the first run holds the folder
            if lock.is_file() and f"pid {first.pid}" in lock.read_text():
                break
            time.sleep(0.05)
        rc = main(["run", str(deck), "--quiet", "--no-analysis", "--out", str(out)])
        err = capsys.readouterr().err.strip().splitlines()
        assert rc == 4
        assert len(err) == 1 and "in use" in err[0] and f"pid {first.pid}" in err[0]
    finally:
        first.kill()
        first.wait()
    # the lock dies with its process: the folder can be used again
    assert main(["run", str(deck), "--quiet", "--no-analysis", "--out", str(out)]) == 0


def test_a_finished_run_of_another_deck_is_refused_unless_forced(tmp_path, capsys):
    deck, raw = _deck_file(tmp_path)
    out = tmp_path / "run"
    assert main(["run", str(deck), "--quiet", "--out", str(out), "--no-figures"]) == 0
    # the same deck reruns as before
    assert main(["run", str(deck), "--quiet", "--out", str(out), "--no-figures"]) == 0
    capsys.readouterr()
    first = {p.relative_to(out): p.read_bytes() for p in sorted(out.rglob("*")) if p.is_file()}
    # another deck (one key changed) is refused, naming that key, and nothing is overwritten
    rc = main(["run", str(deck), "--quiet", "--out", str(out), "--no-figures",
               "--set", "random_seed=7"])
    err = capsys.readouterr().err.strip().splitlines()
    assert rc == 2
    assert err[-1].startswith("deck error:") and "random_seed differs" in err[-1]
    assert json.loads((out / io.FILES["summary"]).read_text())["status"] == "completed"
    after = {p.relative_to(out): p.read_bytes() for p in sorted(out.rglob("*")) if p.is_file()}
    assert after == first                       # every file byte for byte as before the refusal
    assert main(["run", str(deck), "--quiet", "--out", str(out), "--no-figures",
                 "--set", "random_seed=7", "--force"]) == 0


def test_memory_refusal_comes_before_any_file(tmp_path, capsys):
    deck, _ = _deck_file(tmp_path)
    out = tmp_path / "never"
    rc = main(["run", str(deck), "--quiet", "--out", str(out), "--set", "time.end=1e9",
               "--set", "time.dt=0.05"])
    err = capsys.readouterr().err.strip().splitlines()
    assert rc == 2
    assert len(err) == 1 and err[0].startswith("deck error:") and "GiB" in err[0]
    assert not out.exists()


def test_summary_json_is_written_once(tmp_path, monkeypatch):
    deck, _ = _deck_file(tmp_path)
    writes = []
    real = io.write_json

    def counting(path, data):
        writes.append(os.path.basename(path))
        return real(path, data)

    monkeypatch.setattr(io, "write_json", counting)
    pipeline.run(str(deck), out=tmp_path / "run", figures=False)
    assert writes.count(io.FILES["summary"]) == 1


def test_a_warning_that_holds_for_several_species_is_one_line():
    f = [Finding("warning", "cold-beam grid instability", "box.cells",
                 "omega_p dx/|v_d| = 2 > 1: use box.cells >= 9", species=("electrons",)),
         Finding("warning", "cold-beam grid instability", "box.cells",
                 "omega_p dx/|v_d| = 2 > 1: use box.cells >= 9", species=("positrons",)),
         Finding("warning", "time-step accuracy", "time.dt", "omega_p dt = 0.3 > 0.2")]
    lines = pipeline.merge_findings(f)
    assert lines == ["cold-beam grid instability: species electrons, positrons: "
                     "omega_p dx/|v_d| = 2 > 1: use box.cells >= 9",
                     "time-step accuracy: omega_p dt = 0.3 > 0.2"]


def test_quiet_keeps_health_warnings_on_stderr(tmp_path, capsys):
    deck, _ = _deck_file(tmp_path, dt=0.25, end=5.0)    # omega_p dt = 0.25 > 0.2: a warning
    rc = main(["run", str(deck), "--quiet", "--no-analysis", "--out", str(tmp_path / "r")])
    cap = capsys.readouterr()
    assert rc == 0 and cap.out == ""
    assert any(line.startswith("warning: time-step accuracy") for line in cap.err.splitlines())


def test_a_deck_in_physical_units_runs_bit_identically_to_its_normalised_twin():
    """box.length_cm and species.*.temperature_kev resolve (through units.py) to the normalised
    deck written in deck.toml; running either gives the same bits."""
    import numpy as np

    from streamsim.deck import load_deck
    raw = pair_deck(cells=64, ppc=8, end=6.0, theta=1e-3)
    del raw["box"]["length"]
    raw["box"]["length_cm"] = 40.0                      # c/omega_p = 5.31 cm at 1e10 cm^-3
    for s in raw["species"]:
        del s["theta"]
        s["temperature_kev"] = 0.5                      # theta = 0.5 / 511 keV
    physical = load_deck(raw)
    twin = load_deck(physical.to_dict())
    # 40 cm over c/omega_p, omega_p = 5.64e4 n^1/2 rad/s (NRL Plasma Formulary) at 1e10 cm^-3, and
    # theta = 0.5 keV / m_e c^2 with m_e c^2 = 510.99895 keV (CODATA 2018)
    assert physical.box.length == pytest.approx(40.0 * 5.64e4 * 1e5 / 2.99792458e10, rel=1e-3)
    assert physical.species[0].theta == pytest.approx(0.5 / 510.99895, rel=1e-8)
    assert twin.box.length == physical.box.length and twin.species[0].theta == physical.species[0].theta
    a = pipeline.run(physical, write=False, analyze=False)
    b = pipeline.run(twin, write=False, analyze=False)
    for k in ("t", "mode_amplitude", "kinetic", "contrast_max"):
        assert np.array_equal(a.series.arrays[k], b.series.arrays[k]), k
    assert all(np.array_equal(a.x[n], b.x[n]) for n in a.x)
