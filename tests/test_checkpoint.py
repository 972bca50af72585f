"""No run is lost: kill -9 and resume is bit-identical, NaN stops with exit 3 and a readable
checkpoint, signals checkpoint, unwritable folders give one line."""
from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import time

import h5py
import numpy as np
import pytest
import tomli_w

import streamsim
from conftest import pair_deck
from streamsim import io
from streamsim.cli import main


def _deck(tmp_path, end=100.0):
    raw = pair_deck(cells=64, ppc=16, end=end, beta=0.1, nwaves=4)
    raw["output"].update(diagnostics_interval=0.25, checkpoint_interval=5.0)
    path = tmp_path / "deck.toml"
    path.write_text(tomli_w.dumps(raw))
    return path


def _cli(*args):
    return [sys.executable, "-m", "streamsim.cli", *args]


def _final_state(folder):
    with h5py.File(folder / io.FILES["checkpoint"], "r") as f:
        step = int(f.attrs["step"])
        xs = [f[f"x/{i}"][()] for i in range(len(f["x"]))]
        us = [f[f"u/{i}"][()] for i in range(len(f["u"]))]
    with h5py.File(folder / io.FILES["series"], "r") as f:
        series = {k: f[k][()] for k in ("t", "kinetic", "field_energy", "momentum",
                                        "mode_amplitude", "contrast_max")}
    return step, xs, us, series


def _assert_identical(a, b):
    assert a[0] == b[0]
    for x, y in zip(a[1] + a[2], b[1] + b[2]):
        assert np.array_equal(x, y)
    for k in a[3]:
        assert np.array_equal(a[3][k], b[3][k]), k


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("ref")
    deck = _deck(tmp)
    out = tmp / "ref"
    proc = subprocess.run(_cli("run", str(deck), "--quiet", "--no-analysis", "--out", str(out)),
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    return deck, _final_state(out)


def _checkpoint_step(path) -> int:
    try:
        with h5py.File(path, "r") as f:
            return int(f.attrs["step"])
    except (OSError, KeyError):
        return -1


def _wait_for(path, proc, step=0, timeout=180.0):
    """Poll until the run has checkpointed at or beyond ``step`` (False if it ended first)."""
    t0 = time.time()
    while _checkpoint_step(path) < step:
        if proc.poll() is not None or time.time() - t0 > timeout:
            return False
        time.sleep(0.005)
    return True


@pytest.mark.parametrize("trial", range(3))
def test_kill9_then_resume_is_bit_identical(reference, tmp_path, trial):
    deck, ref = reference
    out = tmp_path / "run"
    rng = np.random.default_rng(100 + trial)
    proc = subprocess.Popen(_cli("run", str(deck), "--quiet", "--no-analysis", "--out", str(out)),
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    # kill at a random step: after a random checkpoint (every 100 steps of 2000) plus a random
    # fraction of the next interval
    target = 100 * int(rng.integers(1, 15))
    assert _wait_for(out / io.FILES["checkpoint"], proc, target), "the run ended before the kill"
    time.sleep(float(rng.uniform(0.0, 0.05)))
    proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=60)
    with h5py.File(out / io.FILES["checkpoint"], "r") as f:
        killed_at = int(f.attrs["step"])
    assert killed_at < ref[0], "the run finished before the kill; make it longer"
    done = subprocess.run(_cli("run", str(deck), "--quiet", "--no-analysis", "--resume", str(out)),
                          capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    _assert_identical(_final_state(out), ref)


def test_sigterm_checkpoints_and_resumes(reference, tmp_path):
    deck, ref = reference
    out = tmp_path / "run"
    proc = subprocess.Popen(_cli("run", str(deck), "--quiet", "--no-analysis", "--out", str(out)),
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    assert _wait_for(out / io.FILES["checkpoint"], proc)
    proc.send_signal(signal.SIGTERM)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err
    assert "resume with --resume" in err
    summary = streamsim.io.json.loads((out / io.FILES["summary"]).read_text())
    assert summary["status"] == "interrupted"
    done = subprocess.run(_cli("run", "--quiet", "--no-analysis", "--resume", str(out)),
                          capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    _assert_identical(_final_state(out), ref)


def test_resume_in_process_matches(tmp_path):
    """The API: stop after some steps, resume, compare with one straight run."""
    raw = pair_deck(cells=64, ppc=8, end=20.0)
    raw["output"]["checkpoint_interval"] = 2.0
    straight = streamsim.run(raw, out=tmp_path / "a", analyze=False)
    with pytest.raises(streamsim.pipeline.Interrupted):
        streamsim.run(raw, out=tmp_path / "b", analyze=False, stop_after_steps=137)
    resumed = streamsim.run(raw, out=tmp_path / "b", analyze=False, resume=True)
    for name in straight.x:
        assert np.array_equal(straight.x[name], resumed.x[name])
        assert np.array_equal(straight.u[name], resumed.u[name])
    assert np.array_equal(straight.series.field_energy, resumed.series.field_energy)
    assert np.array_equal(straight.series.t, resumed.series.t)


def test_injected_nan_stops_with_exit_3_and_readable_checkpoint(tmp_path, capsys, monkeypatch):
    raw = pair_deck(cells=64, ppc=8, end=20.0)
    raw["output"]["checkpoint_interval"] = 2.0
    deck = tmp_path / "deck.toml"
    deck.write_text(tomli_w.dumps(raw))
    real = streamsim.engine.kernels.push_deposit
    calls = {"n": 0}

    def poisoned(x, u, *args):
        calls["n"] += 1
        if calls["n"] == 2 * 250 + 1:          # step 250, first species
            u[5] = np.nan
        return real(x, u, *args)

    monkeypatch.setattr(streamsim.engine.kernels, "push_deposit", poisoned)
    rc = main(["run", str(deck), "--quiet", "--out", str(tmp_path / "o")])
    err = capsys.readouterr().err.strip().splitlines()
    assert rc == 3
    # --quiet keeps warnings (one line each) and the one-line error, nothing else
    assert all(line.startswith("warning: ") for line in err[:-1])
    assert err[-1].startswith("numerical error:")
    assert "species 'electrons'" in err[-1] and "step 251" in err[-1] and "particle 5" in err[-1]
    with h5py.File(tmp_path / "o" / io.FILES["checkpoint"], "r") as f:
        assert int(f.attrs["step"]) == 240              # the last good checkpoint (every 40 steps)
        assert np.isfinite(f["u/0"][()]).all() and np.isfinite(f["x/0"][()]).all()
    summary = io.json.loads((tmp_path / "o" / io.FILES["summary"]).read_text())
    assert summary["status"] == "numerical_error"


def _make_readonly(folder):
    """chmod is enough for a normal user; root ignores permission bits, so use the immutable flag."""
    if os.geteuid() != 0:
        folder.chmod(0o555)
        return lambda: folder.chmod(0o755)
    if shutil.which("chattr") is None:
        pytest.skip("running as root without chattr: cannot make a folder read-only")
    r = subprocess.run(["chattr", "+i", str(folder)], capture_output=True)
    if r.returncode != 0:
        pytest.skip(f"chattr +i not supported here: {r.stderr.decode().strip()}")
    return lambda: subprocess.run(["chattr", "-i", str(folder)])


def test_read_only_output_folder(tmp_path, capsys):
    out = tmp_path / "ro"
    out.mkdir()
    undo = _make_readonly(out)
    try:
        rc = main(["run", "--quiet", "--out", str(out), "--set", "box.cells=64",
                   "--set", "time.end=2.0", "--set", "box.length=8.2"])
    finally:
        undo()
    err = capsys.readouterr().err.strip().splitlines()
    assert rc == 4
    assert len(err) == 1 and err[0].startswith(f"output error: cannot write {out}")


def test_output_into_a_file_path(tmp_path, capsys):
    blocker = tmp_path / "file"
    blocker.write_text("x")
    rc = main(["run", "--quiet", "--out", str(blocker / "sub"), "--set", "time.end=1.0",
               "--set", "box.length=8.2"])
    err = capsys.readouterr().err.strip().splitlines()
    assert rc == 4 and len(err) == 1 and err[0].startswith("output error:")
