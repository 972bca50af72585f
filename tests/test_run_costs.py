"""What a run does outside its time loop, as behaviour (never timing): the default checkpoint
cadence in wall-clock time (plus the end and a signal) with a bit-identical resume, figures only
where asked, commands that import only what they need."""
from __future__ import annotations

import json
import signal
import subprocess
import sys
import time

import h5py
import numpy as np
import tomli_w

import streamsim
from conftest import pair_deck
from streamsim import io
from streamsim.pipeline import Checkpointer


class _Clock:
    def __init__(self):
        self.now = 0.0

    def __call__(self):
        return self.now


class _Sim:
    def __init__(self, steps):
        self.step, self.steps = 0, steps


def test_wall_clock_cadence_saves_when_the_interval_has_passed_and_not_before():
    clock, saved = _Clock(), []
    ck = Checkpointer(0, lambda: saved.append(sim.step), wall_s=10.0, clock=clock)
    sim = _Sim(100)
    for n in range(60):
        sim.step = n + 1
        clock.now += 0.5                     # 0.5 s per step: 20 steps per interval
        ck.after(sim, n)
    assert saved == [20, 40, 60]


def test_a_deck_interval_is_in_simulated_time_and_ignores_the_clock():
    clock, saved = _Clock(), []
    ck = Checkpointer(7, lambda: saved.append(sim.step), wall_s=None, clock=clock)
    sim = _Sim(30)
    for n in range(30):
        sim.step = n + 1
        clock.now += 1e6
        ck.after(sim, n)
    assert saved == [7, 14, 21, 28]


def test_checkpoint_interval_0_saves_nothing_in_between():
    saved = []
    ck = Checkpointer(0, lambda: saved.append(1), wall_s=None)
    sim = _Sim(10)
    for n in range(10):
        sim.step = n + 1
        ck.after(sim, n)
    assert saved == []


def test_default_deck_leaves_the_interval_unset_and_writes_it_back_unset():
    deck = streamsim.load_deck(None)
    assert deck.output.checkpoint_interval is None and deck.is_resolved
    assert "checkpoint_interval" not in deck.to_toml()
    assert streamsim.load_deck(None, ["output.checkpoint_interval=3"]).output.checkpoint_interval == 3.0


def _long_deck(tmp_path):
    raw = pair_deck(cells=64, ppc=16, end=100.0, nwaves=4)
    raw["output"]["diagnostics_interval"] = 0.25        # no checkpoint_interval: the default
    path = tmp_path / "deck.toml"
    path.write_text(tomli_w.dumps(raw))
    return path


def _cli(*args):
    return [sys.executable, "-m", "streamsim.cli", *args]


def _state(folder):
    with h5py.File(folder / io.FILES["checkpoint"], "r") as f:
        step = int(f.attrs["step"])
        meta = json.loads(f.attrs["meta"])
        xs = [f[f"x/{i}"][()] for i in range(len(f["x"]))]
        us = [f[f"u/{i}"][()] for i in range(len(f["u"]))]
    with h5py.File(folder / io.FILES["series"], "r") as f:
        series = {k: f[k][()] for k in ("t", "kinetic", "field_energy", "mode_amplitude")}
    return step, meta, xs, us, series


def test_default_cadence_checkpoints_at_the_end_and_on_a_signal_and_resumes_bit_identical(
        tmp_path):
    deck = _long_deck(tmp_path)
    ref = tmp_path / "ref"
    done = subprocess.run(_cli("run", str(deck), "--quiet", "--no-analysis", "--out", str(ref)),
                          capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    step, meta, *ref_state = _state(ref)
    assert step == 2000 and meta["finished"]          # the end checkpoint, default cadence

    out = tmp_path / "run"
    proc = subprocess.Popen(_cli("run", str(deck), "--quiet", "--no-analysis", "--out", str(out)),
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    t0 = time.time()
    while not (out / io.FILES["deck"]).exists():     # written just before the loop starts
        assert proc.poll() is None and time.time() - t0 < 120, "the run did not start"
        time.sleep(0.005)
    assert not (out / io.FILES["checkpoint"]).exists()
    time.sleep(0.3)
    proc.send_signal(signal.SIGTERM)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err
    step, meta, *_ = _state(out)
    assert 0 < step < 2000 and not meta["finished"]    # the signal's checkpoint
    resumed = subprocess.run(_cli("run", "--quiet", "--no-analysis", "--resume", str(out)),
                             capture_output=True, text=True, timeout=300)
    assert resumed.returncode == 0, resumed.stderr
    step, meta, *state = _state(out)
    assert step == 2000 and meta["finished"]
    for a, b in zip(state[0] + state[1], ref_state[0] + ref_state[1]):
        assert np.array_equal(a, b)
    for k in state[2]:
        assert np.array_equal(state[2][k], ref_state[2][k]), k
