"""Extending a finished or interrupted run to a later end (`run --resume RUN --set time.end=T`)
gives the time series, snapshots and particles of one straight run to T with the same cadences,
bit for bit at the same thread count; any other changed key is refused, naming the key."""
from __future__ import annotations

import json
import tomllib

import h5py
import numpy as np
import pytest
import tomli_w

import streamsim
from conftest import pair_deck
from streamsim import io
from streamsim.cli import main
from streamsim.pipeline import Interrupted

CADENCES = {"diagnostics_interval": 0.25, "fields_interval": 1.0, "phase_space_interval": 1.5,
            "checkpoint_interval": 2.0}
#: 102 steps of 0.05: on none of the cadences above, so the first run's last records (at 5.1)
#: are ones a straight run never makes
T1, T2, T3 = 5.1, 9.0, 11.0


def _raw(end, cadences=True):
    raw = pair_deck(cells=32, ppc=8, end=end, nwaves=2)
    raw["output"] = {"recorded_modes": 8, "phase_space_particles": 64}
    if cadences:
        raw["output"].update(CADENCES)
    return raw


def _write(path, raw):
    path.write_text(tomli_w.dumps(raw))
    return path


def _h5(path) -> dict:
    out = {}
    with h5py.File(path, "r") as f:
        f.visititems(lambda k, v: out.__setitem__(k, v[()]) if isinstance(v, h5py.Dataset)
                     else None)
    return out


def _assert_same_files(a, b):
    """timeseries.h5, the openPMD series and particles.h5 of two run folders hold equal data."""
    for name in (io.FILES["series"], io.FILES["fields"], io.FILES["particles"]):
        da, db = _h5(a / name), _h5(b / name)
        assert sorted(da) == sorted(db), name
        for k in da:
            assert np.array_equal(da[k], db[k]), f"{name}:{k}"


def _assert_same_result(ra, rb):
    for k, v in rb.series.arrays.items():
        assert np.array_equal(ra.series.arrays[k], v), k
    for name in rb.x:
        assert np.array_equal(ra.x[name], rb.x[name])
        assert np.array_equal(ra.u[name], rb.u[name])


@pytest.fixture(scope="module")
def straight(tmp_path_factory):
    """One run straight to T2 with the explicit cadences."""
    out = tmp_path_factory.mktemp("straight") / "run"
    res = streamsim.run(_raw(T2), out=out, threads=1, figures=False)
    return out, res


def test_a_finished_run_extends_to_the_straight_run(straight, tmp_path):
    ref_folder, ref = straight
    out = tmp_path / "run"
    first = streamsim.run(_raw(T1), out=out, threads=1, analyze=False)
    assert first.series.t[-1] == pytest.approx(T1)          # the first run's own last record
    ext = streamsim.run(out / io.FILES["deck"], out=out, resume=True, threads=1,
                        overrides=[f"time.end={T2}"], figures=False)
    # the folder's deck.toml already has every cadence (the analysis may still say this short
    # run's saturated window is too short for emission numbers: not about the resume)
    assert [w for w in ext.warnings if not w.startswith("the saturated window")] == []
    _assert_same_result(ext, ref)
    _assert_same_files(out, ref_folder)
    # summary.json describes the whole extended run: the same numbers as the straight run
    a = json.loads((out / io.FILES["summary"]).read_text())
    b = json.loads((ref_folder / io.FILES["summary"]).read_text())
    assert a["steps"] == b["steps"] == 180 and a["t_end"] == pytest.approx(T2)
    for key in ("energy", "momentum", "growth", "contrast", "clumps", "coherence"):
        assert a[key] == b[key], key
    # deck.toml records the new end and keeps the cadences explicit
    deck = tomllib.loads((out / io.FILES["deck"]).read_text())
    assert deck["time"]["end"] == T2
    assert {k: deck["output"][k] for k in CADENCES} == CADENCES


def test_an_interrupted_run_extends_to_the_straight_run(straight, tmp_path):
    ref_folder, ref = straight
    out = tmp_path / "run"
    with pytest.raises(Interrupted):
        streamsim.run(_raw(T1), out=out, threads=1, analyze=False, stop_after_steps=37)
    ext = streamsim.run(out / io.FILES["deck"], out=out, resume=True, threads=1,
                        overrides=[f"time.end={T2}"], analyze=False)
    _assert_same_result(ext, ref)
    _assert_same_files(out, ref_folder)


def test_the_cli_extends_a_deck_with_derived_cadences_twice(tmp_path, capsys):
    """The user's own deck leaves the cadences to their defaults (derived from time.end): the
    extension keeps the run's, says so, and a second extension and a plain resume go on."""
    deck = _write(tmp_path / "deck.toml", _raw(T1, cadences=False))
    out = tmp_path / "run"
    common = ["--quiet", "--no-analysis", "--threads", "1"]
    assert main(["run", str(deck), "--out", str(out), *common]) == 0
    kept = tomllib.loads((out / io.FILES["deck"]).read_text())["output"]
    assert main(["run", str(deck), "--resume", str(out), "--set", f"time.end={T2}",
                 *common]) == 0
    err = capsys.readouterr().err
    assert "extending the run from time.end = 5.1 to 9" in err and "output.fields_interval" in err
    assert main(["run", "--resume", str(out), "--set", f"time.end={T3}", *common]) == 0
    assert main(["run", "--resume", str(out), *common]) == 0       # finished: redoes the end
    # the straight run to T3 with the first run's cadences written out
    raw = _raw(T3, cadences=False)
    raw["output"].update({k: kept[k] for k in CADENCES if k in kept})   # an unset one stays unset
    ref = tmp_path / "ref"
    assert main(["run", str(_write(tmp_path / "ref.toml", raw)), "--out", str(ref),
                 *common]) == 0
    _assert_same_files(out, ref)
    final = tomllib.loads((out / io.FILES["deck"]).read_text())
    assert final["time"]["end"] == T3
    assert {k: final["output"].get(k) for k in CADENCES} == {k: kept.get(k) for k in CADENCES}


@pytest.fixture(scope="module")
def finished(tmp_path_factory):
    out = tmp_path_factory.mktemp("finished") / "run"
    streamsim.run(_raw(T1), out=out, threads=1, analyze=False)
    return out


@pytest.mark.parametrize("extra, key", [
    (["output.fields_interval=0.5"], "output.fields_interval"),
    (["box.cells=64"], "box.cells"),
    (["species.electrons.particles_per_cell=4"], "species[0].particles_per_cell"),
    (["time.dt=0.025"], "time.dt"),
])
def test_any_other_changed_key_is_refused_naming_it(finished, extra, key, capsys):
    args = ["run", "--resume", str(finished), "--quiet", "--no-analysis", "--threads", "1",
            "--set", f"time.end={T2}"]
    for e in extra:
        args += ["--set", e]
    assert main(args) == 4
    err = capsys.readouterr().err
    assert f"({key} differs)" in err and "time.end only" in err


def test_an_earlier_end_is_refused_naming_time_end(finished, capsys):
    assert main(["run", "--resume", str(finished), "--quiet", "--no-analysis",
                 "--set", "time.end=4.0"]) == 2
    assert "time.end" in capsys.readouterr().err


def test_an_old_finished_checkpoint_is_not_extended(finished, tmp_path, capsys):
    """A checkpoint written after the run's last records (older streamsim) resumes only to its
    own end: the last records would sit in the middle of the extended series."""
    import shutil
    out = tmp_path / "old"
    shutil.copytree(finished, out)
    with h5py.File(out / io.FILES["checkpoint"], "r+") as f:
        meta = json.loads(f.attrs["meta"])
        meta["finished"] = True
        f.attrs["meta"] = json.dumps(meta)
    assert main(["run", "--resume", str(out), "--quiet", "--no-analysis", "--threads", "1",
                 "--set", f"time.end={T2}"]) == 4
    assert "resumes to its own end only" in capsys.readouterr().err
    assert main(["run", "--resume", str(out), "--quiet", "--no-analysis", "--threads", "1"]) == 0


def test_a_continuum_run_extends_to_the_straight_run(tmp_path):
    small = ["box.cells=32", "box.fastest_wavelengths=1", "perturbation.modes=[1]",
             "vlasov.momentum_cells=64", "output.fields_interval=2.0"]
    out = tmp_path / "run"
    streamsim.run("runs/warm-pair-beams-vlasov.toml", out=out, threads=1, analyze=False,
                  overrides=small + ["time.end=6.0"])
    ext = streamsim.run(out / io.FILES["deck"], out=out, resume=True, threads=1,
                        analyze=False, overrides=["time.end=10.0"])
    # the straight run: the run folder's deck (its dt and cadences written out), to the new end
    ref = streamsim.run(out / io.FILES["deck"], out=tmp_path / "ref", threads=1,
                        analyze=False, overrides=["time.end=10.0"])
    _assert_same_result(ext, ref)
    for a, b in zip(ext.data.extra["distribution"]["f"], ref.data.extra["distribution"]["f"]):
        assert np.array_equal(a, b)


def test_a_driven_run_extends_to_the_straight_run(tmp_path):
    """The drive's recorder (E0, currents, work, gamma histograms) grows its arrays too."""
    small = ["box.cells=32", "species.electrons.particles_per_cell=8",
             "species.positrons.particles_per_cell=8", "drive.ramp_time=2.0",
             "drive.theory_time=1.0", "output.checkpoint_interval=1.0"]
    out = tmp_path / "run"
    streamsim.run("runs/drive-below-limit.toml", out=out, threads=1, analyze=False,
                  overrides=small + ["time.end=3.1"])
    ext = streamsim.run(out / io.FILES["deck"], out=out, resume=True, threads=1,
                        analyze=False, overrides=["time.end=6.0"])
    ref = streamsim.run(out / io.FILES["deck"], out=tmp_path / "ref", threads=1,
                        analyze=False, overrides=["time.end=6.0"])
    assert "drive_gamma_hist" in ref.series.arrays
    _assert_same_result(ext, ref)
    assert ext.summary["energy"] == ref.summary["energy"]
