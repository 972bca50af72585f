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
import pytest
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
    # enough particles that the loop lasts well over the test's 0.3 s before its signal
    raw = pair_deck(cells=64, ppc=512, end=100.0, nwaves=4)
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
    # the end checkpoint, default cadence; it is written before the last level's records
    # (finished = False), so that a resume to a later end goes on as a straight run would
    assert step == 2000 and not meta["finished"]

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
    assert step == 2000 and not meta["finished"]
    for a, b in zip(state[0] + state[1], ref_state[0] + ref_state[1]):
        assert np.array_equal(a, b)
    for k in state[2]:
        assert np.array_equal(state[2][k], ref_state[2][k]), k


# --------------------------------------------------------------------------------------------
# scans: each run's figures only when asked; the time outside the loops is reported
# --------------------------------------------------------------------------------------------
_SCAN = """base = "{base}"
set = ["box.cells=64", "species.electrons.particles_per_cell=16",
       "species.positrons.particles_per_cell=16"]
[[axis]]
key = "time.end"
values = [8.0, 10.0]
"""


def _scan_file(tmp_path):
    from pathlib import Path
    base = Path(__file__).resolve().parents[1] / "runs" / "pair-beams.toml"
    path = tmp_path / "scan.toml"
    path.write_text(_SCAN.format(base=base), encoding="utf-8")
    return path


def _run_figures(out):
    return sorted(p.name for p in (out / "runs").glob("*/figures/*.png"))


def test_scan_draws_no_run_figures_unless_asked_and_reports_time_outside_the_loops(tmp_path):
    from streamsim.scan import run_scan
    path = _scan_file(tmp_path)
    plain = run_scan(path, tmp_path / "plain", workers=1, figures=False)
    assert plain.completed == 2
    assert _run_figures(tmp_path / "plain") == []
    assert (tmp_path / "plain" / "runs").is_dir()
    assert all((f / "analysis.h5").is_file() for f in (tmp_path / "plain" / "runs").iterdir())
    assert 0 < plain.run_loop_s < plain.run_wall_s
    assert plain.outside_loop_s == plain.run_wall_s - plain.run_loop_s
    assert "outside their time loops" in plain.timing_line()

    drawn = run_scan(path, tmp_path / "drawn", workers=1, figures=False, run_figures=True)
    assert drawn.completed == 2
    names = _run_figures(tmp_path / "drawn")
    assert len(names) >= 2 * 4 and "field_energy.png" in names


def test_scan_cli_figures_flag_draws_each_runs_figures(tmp_path):
    path = _scan_file(tmp_path)
    out = tmp_path / "cli"
    done = subprocess.run(_cli("scan", str(path), "--out", str(out), "--workers", "1",
                               "--no-figures", "--figures"),
                          capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    assert "outside their time loops" in done.stdout
    assert "field_energy.png" in _run_figures(out)


# --------------------------------------------------------------------------------------------
# start-up: a command imports only what it needs
# --------------------------------------------------------------------------------------------
def _modules_after(code):
    done = subprocess.run([sys.executable, "-c", code + "\nimport sys, json\n"
                           "print(json.dumps(sorted(m for m in sys.modules)))"],
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    return set(json.loads(done.stdout.strip().splitlines()[-1]))


def test_the_cli_and_the_package_import_no_plotting_and_no_dask():
    mods = _modules_after("import streamsim, streamsim.cli\nstreamsim.cli.build_parser()")
    for heavy in ("matplotlib", "dask", "distributed", "scipy", "h5py", "numba"):
        assert heavy not in mods, heavy


def test_a_run_without_figures_never_imports_matplotlib(tmp_path):
    mods = _modules_after(f"import streamsim\nstreamsim.run(None, out={str(tmp_path / 'o')!r}, "
                          f"overrides=['time.end=2.0', 'box.cells=64'], figures=False)")
    assert "streamsim.pipeline" in mods and "matplotlib" not in mods
    assert "dask" not in mods and "distributed" not in mods


def test_figures_drawn_in_other_processes_are_the_files_drawn_here(tmp_path, monkeypatch):
    """Same PNG bytes from the forked figure processes and from drawing in this process."""
    raw = pair_deck(cells=64, ppc=16, end=20.0)
    res = streamsim.run(raw, out=tmp_path / "a", figures=False)
    from streamsim import analysis
    from streamsim.plots import Painter
    here = tmp_path / "here"
    p = Painter(res.data, here, processes=0)
    p.draw(res.analysis)
    mine = p.wait()
    there = tmp_path / "there"
    p = Painter(res.data, there, processes=2)
    p.draw(res.analysis)
    theirs = p.wait()
    assert [q.name for q in mine] == [q.name for q in theirs] and len(mine) >= 4
    for a, b in zip(mine, theirs):
        assert a.read_bytes() == b.read_bytes(), a.name
    assert analysis is not None


def test_least_squares_line_matches_scipy_linregress():
    """The growth fit's line against scipy.stats.linregress (reference library) on seeded data."""
    from scipy import stats

    from streamsim.analysis.growth import least_squares_line
    rng = np.random.default_rng(7)
    for n in (3, 8, 50, 401):
        x = np.sort(rng.uniform(0.0, 40.0, n))
        y = 0.35 * x - 9.2 + rng.normal(0.0, 0.3, n)
        ref = stats.linregress(x, y)
        slope, intercept, stderr = least_squares_line(x, y)
        assert slope == pytest.approx(ref.slope, rel=1e-12, abs=1e-14)
        assert intercept == pytest.approx(ref.intercept, rel=1e-12, abs=1e-13)
        assert stderr == pytest.approx(ref.stderr, rel=1e-9)


def _draw_line(res, data):
    from streamsim.plots import plt
    fig, ax = plt.subplots()
    ax.plot([0, 1], [0, 1])
    return fig


def _draw_broken(res, data):
    raise ValueError("this figure cannot be drawn")


def test_a_figure_that_fails_in_a_figure_process_raises_here_and_the_others_are_written(tmp_path):
    from streamsim.analysis.base import BlockResult, Figure
    from streamsim.plots import Painter
    results = {"a": BlockResult("a", {}, {}, [Figure("one.png", "a line", _draw_line),
                                              Figure("two.png", "broken", _draw_broken),
                                              Figure("three.png", "a line", _draw_line)])}
    p = Painter(None, tmp_path, processes=2)
    p.draw(results)
    with pytest.raises(ValueError, match="cannot be drawn"):
        p.wait()
    assert (tmp_path / "figures" / "one.png").stat().st_size > 1000
    assert (tmp_path / "figures" / "three.png").stat().st_size > 1000
    assert not (tmp_path / "figures" / "two.png").exists()
    assert p.procs == []                      # the figure processes are gone
