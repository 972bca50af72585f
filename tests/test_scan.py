"""Scan files and local scans: validation, expansion, hashes, tables, failures, resume.

Tiny decks only (64 cells, 16 particles per cell, end 20/omega_p) so the whole file stays fast.
"""
from __future__ import annotations

import csv
import json
import math
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import h5py
import numpy as np
import pytest

from streamsim.deck import load_deck
from streamsim.scan import ScanError, deck_hash, load_scan, run_scan
from streamsim.scan.figures import replica_stats
from streamsim.scan.tables import metrics_from_summary

ROOT = Path(__file__).resolve().parents[1]
BASE = ROOT / "runs" / "pair-beams.toml"
TINY = ["box.cells=64", "time.end=20.0", "species.electrons.particles_per_cell=16",
        "species.positrons.particles_per_cell=16"]


def write_scan(folder: Path, body: str, name="scan.toml", base=BASE, tiny=True) -> Path:
    head = f'base = "{base}"\n'
    if tiny:
        head += "set = [" + ", ".join(f'"{s}"' for s in TINY) + "]\n"
    path = folder / name
    path.write_text(head + body, encoding="utf-8")
    return path


def cli(*args, cwd=None, timeout=240):
    return subprocess.run([sys.executable, "-m", "streamsim.cli", *args], capture_output=True,
                          text=True, cwd=cwd, timeout=timeout)


# --------------------------------------------------------------------------------------------
# the scan file
# --------------------------------------------------------------------------------------------
def test_product_order_logspace_and_zip(tmp_path):
    path = write_scan(tmp_path, """
[[axis]]
key = "units.density_cm3"
logspace = { start = 1.0e8, stop = 1.0e14, num = 4 }
[[axis]]
key = "box.cells"
linspace = { start = 32, stop = 64, num = 3 }
""")
    scan = load_scan(path)
    # even spacing in log from 1e8 to 1e14 in 4 points: one point every two decades
    assert scan.axes[0].values == pytest.approx((1e8, 1e10, 1e12, 1e14), rel=1e-12)
    assert scan.axes[1].values == (32, 48, 64) and all(isinstance(v, int)
                                                       for v in scan.axes[1].values)
    assert len(scan.points) == 12
    # product: the first axis varies slowest
    assert [p.values for p in scan.points[:4]] == [(1e8, 32), (1e8, 48), (1e8, 64), (1e10, 32)]
    d = scan.points[5].deck
    assert d.units.density_cm3 == pytest.approx(1e10) and d.box.cells == 64
    zipped = write_scan(tmp_path, """
combine = "zip"
[[axis]]
key = "units.density_cm3"
values = [1.0e9, 1.0e11]
[[axis]]
key = "box.cells"
values = [32, 64]
""", name="zip.toml")
    pts = load_scan(zipped).points
    assert [(p.deck.units.density_cm3, p.deck.box.cells) for p in pts] == [(1e9, 32), (1e11, 64)]


def test_multi_key_axis_with_scale_and_wildcard(tmp_path):
    path = write_scan(tmp_path, """
[[axis]]
name = "drift_beta"
keys = ["species.electrons.drift_beta", "species.positrons.drift_beta"]
scale = [1.0, -1.0]
values = [0.3]
[[axis]]
key = "species.*.theta"
values = [1.0e-3]
""")
    scan = load_scan(path)
    (p,) = scan.points
    e, q = p.deck.species_named("electrons"), p.deck.species_named("positrons")
    u = 0.3 / math.sqrt(1 - 0.3**2)           # u = gamma beta
    assert e.drift_u == pytest.approx(u, rel=1e-12) and q.drift_u == pytest.approx(-u, rel=1e-12)
    assert e.theta == q.theta == 1.0e-3
    assert scan.axes[1].keys == ("species.electrons.theta", "species.positrons.theta")


def test_replicas_vary_the_seed_and_quiet_loading_is_flagged(tmp_path):
    path = write_scan(tmp_path, """
replicas = 3
[[axis]]
key = "units.density_cm3"
values = [1.0e9, 1.0e10]
""")
    scan = load_scan(path)
    base_seed = load_deck(BASE).random_seed
    assert [p.seed for p in scan.points] == [base_seed + r for _ in range(2) for r in range(3)]
    assert len({p.hash for p in scan.points}) == 6
    assert any("quiet" in w for w in scan.warnings)


def test_hash_ignores_folder_and_threads_only(tmp_path):
    a = load_deck(BASE, ["output.folder='x/y'", "output.threads=1"])
    b = load_deck(BASE, ["output.folder='elsewhere'", "output.threads=2"])
    c = load_deck(BASE, ["units.density_cm3=2.0e10"])
    assert deck_hash(a) == deck_hash(b) != deck_hash(c)
    assert len(deck_hash(a)) == 64 and int(deck_hash(a), 16) >= 0


@pytest.mark.parametrize("body, words", [
    ('combine = "zipp"\n[[axis]]\nkey = "box.cells"\nvalues = [32]\n', ["combine", "zipp"]),
    # renamed scan-file and deck keys name their new names
    ('mode = "zip"\n[[axis]]\nkey = "box.cells"\nvalues = [32]\n', ["mode", "renamed; use combine"]),
    ('[[axis]]\nkey = "output.modes"\nvalues = [4]\n',
     ["output.modes", "renamed; use output.recorded_modes"]),
    ('[[axis]]\nkey = "drive.frequency"\nvalues = [0.5]\n',
     ["drive.frequency", "renamed; use drive.angular_frequency"]),
    ('bse = 1\n', ["bse", "did you mean 'base'"]),
    ('[[axis]]\nkey = "units.densty_cm3"\nvalues = [1.0]\n', ["densty_cm3", "density_cm3"]),
    ('[[axis]]\nkey = "species.ions.theta"\nvalues = [1.0]\n', ["no species named 'ions'"]),
    ('[[axis]]\nkey = "box.cells"\nlinspace = {start = 1, stop = 2}\n', ["num", "required"]),
    ('[[axis]]\nkey = "units.density_cm3"\nlogspace = {start = 0.0, stop = 2.0, num = 3}\n',
     ["start", "> 0"]),
    ('[[axis]]\nkey = "output.folder"\nvalues = ["a"]\n', ["output.folder", "cannot be scanned"]),
    ('[[axis]]\nkey = "box.cells"\nvalue = [32]\n', ["value", "did you mean 'values'"]),
    ('[[axis]]\nkeys = ["box.cells", "time.end"]\nscale = [1.0]\nvalues = [32]\n', ["scale"]),
    ('combine = "zip"\n[[axis]]\nkey = "box.cells"\nvalues = [32, 64]\n'
     '[[axis]]\nkey = "time.end"\nvalues = [10.0]\n', ["same number of values"]),
    ('[[axis]]\nkey = "box.cells"\nvalues = [32, 32]\n', ["same deck"]),
    ('[[axis]]\nkey = "box.cells"\nvalues = [1]\n', ["every run", "box.cells"]),
    ('[[axis]]\nname = "wall_s"\nkey = "box.cells"\nvalues = [32]\n', ["column"]),
    ('[axis]\nkey = "box.cells"\n', ["[[axis]]"]),
    ('[[axis]\n', ["not valid TOML"]),
    ('[[axis]]\nkey = "output.fields_every"\nvalues = [1.0]\n',
     ["output.fields_every", "renamed; use output.fields_interval"]),
    ('[[axis]]\nkey = "box.length"\nvalues = [8.0]\n[[axis]]\nkey = "box.length_cm"\n'
     'values = [40.0]\n', ["box.length_cm", "box.length", "axis[0]"]),
    ('[[axis]]\nkey = "species.*.temperature_kev"\nvalues = [1.0]\n[[axis]]\n'
     'key = "species.electrons.theta"\nvalues = [0.01]\n', ["temperature_kev", "axis[0]"]),
])
def test_bad_scan_files_give_one_clear_line(tmp_path, body, words):
    path = write_scan(tmp_path, body)
    with pytest.raises(ScanError) as err:
        load_scan(path)
    text = str(err.value)
    assert "\n" not in text and str(path) in text
    for w in words:
        assert w in text


def test_missing_base_and_cli_exit_2_without_traceback(tmp_path):
    path = write_scan(tmp_path, '[[axis]]\nkey = "box.cells"\nvalues = [32]\n',
                      base=tmp_path / "nope.toml")
    proc = cli("scan", str(path), "--out", str(tmp_path / "out"))
    assert proc.returncode == 2
    assert proc.stderr.startswith("scan error:") and "no such deck file" in proc.stderr
    assert "Traceback" not in proc.stderr and len(proc.stderr.strip().splitlines()) == 1


# --------------------------------------------------------------------------------------------
# tables from summaries
# --------------------------------------------------------------------------------------------
def test_metrics_from_a_summary_follow_the_block_paths_and_tolerate_nulls():
    n = 1.0e10
    s = {"normalization": {"density_cm3": n}, "wall_s": 1.5,
         "energy": {"relative_error_max": 2e-4},
         "growth": {"mode": 8, "measured": 0.5, "measured_err": 0.01, "theory": 0.4, "ratio": 1.25,
                    "growth_time_ns": 0.35, "growth_time_err_ns": None, "fit": "eigenmode"},
         "contrast": {"max": 3.0, "t_unity": 10.0, "t_unity_ns": float("nan")},
         "clumps": None, "coherence": {"frequency_cutoff_hz": 2.0e9}}
    m = metrics_from_summary(s)
    assert m["growth.mode"] == 8 and m["growth.measured"] == 0.5 and m["growth.ratio"] == 1.25
    assert m["growth.growth_time_ns"] == 0.35 and m["growth.growth_time_err_ns"] is None
    assert m["growth.fit"] == "eigenmode"          # a word, kept as it is
    assert metrics_from_summary({"growth": {"fit": 3.0}})["growth.fit"] is None
    assert m["contrast.t_unity_ns"] is None and m["contrast.max"] == 3.0     # NaN is no number
    assert m["clumps.size_median_cm"] is None and m["clumps.count"] is None
    assert m["coherence.frequency_cutoff_hz"] == 2.0e9
    assert m["energy.relative_error_max"] == 2e-4 and m["normalization.density_cm3"] == n
    empty = metrics_from_summary({})
    assert all(v is None for v in empty.values())


def test_replica_error_bars_are_the_sample_standard_deviation():
    rows = [{"point": 0, "status": "completed", "g": v, "e": 0.1} for v in (1.0, 2.0, 4.0)]
    rows += [{"point": 1, "status": "completed", "g": 5.0, "e": 0.3},
             {"point": 1, "status": "failed", "g": None, "e": None}]
    st = replica_stats(rows, "g", "e")
    # mean 7/3, sample variance ((4/3)^2 + (1/3)^2 + (5/3)^2) / 2 = 7/3
    assert st[0][0] == pytest.approx(7 / 3) and st[0][1] == pytest.approx(math.sqrt(7 / 3))
    assert st[0][2] == 3
    assert st[1] == (5.0, 0.3, 1)          # one replica: the fit's own error


# --------------------------------------------------------------------------------------------
# local scans
# --------------------------------------------------------------------------------------------
def read_csv(path: Path) -> list[dict]:
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def test_an_invalid_point_is_recorded_and_the_rest_finish(tmp_path):
    path = write_scan(tmp_path, '[[axis]]\nkey = "box.cells"\nvalues = [1, 64]\n')
    out = tmp_path / "out"
    proc = cli("scan", str(path), "--out", str(out), "--workers", "1")
    assert proc.returncode == 0, proc.stderr
    for name in ("growth_time_vs_box_cells.png", "nu_c_vs_box_cells.png"):
        assert (out / "figures" / name).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    rows = read_csv(out / "scan.csv")
    assert [r["status"] for r in rows] == ["failed", "completed"]
    assert "box.cells = 1" in rows[0]["error"] and rows[0]["error_kind"] == "deck"
    err = json.loads((out / rows[0]["folder"] / "error.json").read_text())
    assert "box.cells" in err["error"]
    assert float(rows[1]["growth.measured"]) > 0 and rows[1]["box.cells"] == "64"
    with h5py.File(out / "scan.h5", "r") as f:
        assert [s.decode() if isinstance(s, bytes) else s for s in f["runs/status"][()]] == \
            ["failed", "completed"]
        assert np.isnan(f["runs/growth.measured"][0]) and f["runs/growth.measured"][1] > 0
        assert f["grid/growth.measured"].shape == (2, 1)
        # the word saying which fit gave the rate rides along, in the table and on the grid
        summary = json.loads((out / rows[1]["folder"] / "summary.json").read_text())
        method = summary["growth"]["fit"]
        assert method and rows[1]["growth.fit"] == method and rows[0]["growth.fit"] == ""
        grid = [v.decode() if isinstance(v, bytes) else v for v in f["grid/growth.fit"][:, 0]]
        assert grid == ["", method]


def _completed(out: Path) -> list[Path]:
    found = []
    for p in sorted((out / "runs").glob("*/point.json")):
        try:
            if json.loads(p.read_text()).get("status") == "completed":
                found.append(p)
        except ValueError:
            pass
    return found


def test_resume_after_an_interrupt_runs_only_the_missing_points(tmp_path):
    # five distinct runs (a density axis alone would be one normalised run)
    path = write_scan(tmp_path, '[[axis]]\nname = "seed"\nkey = "random_seed"\n'
                                'values = [1, 2, 3, 4, 5]\n')
    out = tmp_path / "out"
    args = [sys.executable, "-m", "streamsim.cli", "scan", str(path), "--out", str(out),
            "--workers", "1", "--threads", "1", "--no-figures"]
    proc = subprocess.Popen(args, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        deadline = time.monotonic() + 120
        while time.monotonic() < deadline and not _completed(out) and proc.poll() is None:
            time.sleep(0.05)
        assert proc.poll() is None, "the scan finished before it could be interrupted"
        os.kill(proc.pid, signal.SIGINT)
        _, err = proc.communicate(timeout=120)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    assert proc.returncode == 130, err
    assert "--resume" in err
    done = {p: (p.stat().st_mtime_ns, p.read_text()) for p in _completed(out)}
    assert 1 <= len(done) < 5
    rows = read_csv(out / "scan.csv")             # the finished rows were kept
    assert sum(r["status"] == "completed" for r in rows) == len(done)
    again = cli("scan", str(path), "--out", str(out), "--workers", "1", "--no-figures",
                "--resume")
    assert again.returncode == 0, again.stderr
    assert f"ran {5 - len(done)}, skipped {len(done)}" in again.stdout
    for p, (mtime, text) in done.items():           # untouched
        assert p.stat().st_mtime_ns == mtime and p.read_text() == text
    assert f"ran {5 - len(done)}" in again.stdout
    rows = read_csv(out / "scan.csv")
    assert [r["status"] for r in rows] == ["completed"] * 5
    assert len({r["hash"] for r in rows}) == 5 and len(_completed(out)) == 5


def test_an_interrupt_swallowed_by_a_finalizer_is_not_lost():
    """Python cannot raise KeyboardInterrupt out of a finalizer ("Exception ignored in ..."): a
    Ctrl-C that lands there would be lost and the scan would run on. The scan remembers it and
    raises it again at its next check; the default handler is back afterwards."""
    from streamsim.scan.runner import _Interrupts
    with _Interrupts() as interrupts:
        try:                                    # what a finalizer does with the exception
            os.kill(os.getpid(), signal.SIGINT)
            time.sleep(1.0)
        except KeyboardInterrupt:
            pass
        with pytest.raises(KeyboardInterrupt):
            interrupts.check()
    assert signal.getsignal(signal.SIGINT) is signal.default_int_handler


def test_rerun_without_resume_is_refused_and_resume_skips_everything(tmp_path):
    path = write_scan(tmp_path, '[[axis]]\nkey = "units.density_cm3"\nvalues = [1.0e9]\n')
    out = tmp_path / "out"
    res = run_scan(path, out, workers=1, figures=False)
    assert (res.ran, res.completed) == (1, 1)
    proc = cli("scan", str(path), "--out", str(out))
    assert proc.returncode == 2 and "--resume" in proc.stderr
    res2 = run_scan(path, out, workers=1, resume=True, figures=False)
    assert (res2.ran, res2.skipped, res2.completed) == (0, 1, 1)
    assert res2.rows[0]["growth.measured"] == res.rows[0]["growth.measured"]


def test_workers_times_threads_never_exceed_the_cores(tmp_path):
    from streamsim.scan import ScanSetupError
    path = write_scan(tmp_path, '[[axis]]\nkey = "units.density_cm3"\nvalues = [1.0e9]\n')
    cores = len(os.sched_getaffinity(0))
    with pytest.raises(ScanSetupError, match="cores"):
        run_scan(path, tmp_path / "a", workers=cores + 1)
    with pytest.raises(ScanSetupError, match="cores"):
        run_scan(path, tmp_path / "b", workers=1, threads=cores + 1)
    proc = cli("scan", str(path), "--out", str(tmp_path / "c"), "--workers", str(cores + 1))
    assert proc.returncode == 2 and proc.stderr.startswith("argument error:")
    assert not (tmp_path / "a").exists()


def test_axes_may_use_physical_keys(tmp_path):
    """box.length_cm and species.*.temperature_kev as axes: each point resolves to
    theta = kT/(m c^2) and L omega_p/c (CODATA via scipy.constants, SI route)."""
    import scipy.constants as sc
    path = write_scan(tmp_path, """
[[axis]]
key = "box.length_cm"
values = [30.0, 60.0]
[[axis]]
key = "species.*.temperature_kev"
values = [0.5]
""")
    scan = load_scan(path)
    n = load_deck(BASE).units.density_cm3
    wp = math.sqrt(n * 1e6 * sc.e**2 / (sc.epsilon_0 * sc.m_e))      # rad/s, SI
    for p, l_cm in zip(scan.points, (30.0, 60.0)):
        # 1e-9: the Gaussian 1 C = 10 c statC assumes mu_0 = 4 pi 1e-7 (2019 SI: off by ~1e-10)
        assert p.deck.box.length == pytest.approx(l_cm * 1e-2 * wp / sc.c, rel=1e-9)
        for s in p.deck.species:
            assert s.theta == pytest.approx(500 * sc.e / (sc.m_e * sc.c**2), rel=1e-10, abs=0)
    assert len({p.hash for p in scan.points}) == 2


def test_spec_does_not_import_the_tables_and_agrees_with_their_columns():
    import ast
    import inspect

    from streamsim.scan import spec, tables
    tree = ast.parse(inspect.getsource(spec))
    imported = {n.module for n in ast.walk(tree) if isinstance(n, ast.ImportFrom)}
    imported |= {a.name for n in ast.walk(tree) if isinstance(n, ast.Import) for a in n.names}
    assert not any(m and m.split(".")[-1] == "tables" for m in imported), imported
    assert tables.RUN_COLUMNS == spec.RUN_COLUMNS and tables.METRICS == spec.METRICS
