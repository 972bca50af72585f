"""Scans on a real dask.distributed LocalCluster (worker processes on 127.0.0.1 only)."""
from __future__ import annotations

import csv
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

distributed = pytest.importorskip("distributed")

from streamsim.deck import load_deck  # noqa: E402
from streamsim.pipeline import run  # noqa: E402
from streamsim.scan.tables import metrics_from_summary  # noqa: E402

from test_scan import BASE, TINY, write_scan  # noqa: E402

COMPARED = ("growth.mode", "growth.measured", "growth.measured_err", "growth.theory",
            "growth.ratio", "growth.growth_time_ns", "theory.fastest.growth",
            "contrast.t_unity_ns", "contrast.max", "clumps.count", "clumps.size_median_cm",
            "coherence.frequency_cutoff_hz", "energy.relative_error_max")


def read_csv(path: Path) -> list[dict]:
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def cli(*args, timeout=300):
    return subprocess.run([sys.executable, "-m", "streamsim.cli", *args], capture_output=True,
                          text=True, timeout=timeout)


def test_2x2_scan_on_a_local_cluster_matches_four_single_runs(tmp_path):
    path = write_scan(tmp_path, """
[[axis]]
key = "units.density_cm3"
values = [1.0e9, 1.0e11]
[[axis]]
key = "species.electrons.theta"
values = [0.0, 1.0e-4]
""")
    out = tmp_path / "out"
    proc = cli("scan", str(path), "--out", str(out), "--local-cluster", "--workers", "2",
               "--threads", "1", "--no-figures")
    assert proc.returncode == 0, proc.stderr
    assert "LocalCluster" in proc.stdout
    rows = read_csv(out / "scan.csv")
    assert len(rows) == 4 and all(r["status"] == "completed" for r in rows)
    # the density only sets the units: two normalised runs, each shared by two rows, whose
    # physical columns (converted per row) must equal a run made at that row's density
    assert len(list((out / "runs").iterdir())) == 2
    assert all(r["shared_run"] == "2" for r in rows)
    for r in rows:
        n, theta = float(r["units.density_cm3"]), float(r["species.electrons.theta"])
        # the same deck, built here from the base file, run alone in this process
        deck = load_deck(BASE, TINY + [f"units.density_cm3={n!r}",
                                       f"species.electrons.theta={theta!r}"])
        single = metrics_from_summary(run(deck, write=False, threads=1).summary)
        assert single["growth.measured"] is not None or theta > 0
        for key in COMPARED:
            got = r[key]
            want = single[key]
            if want is None:
                assert got == "", (key, got)
            else:
                assert float(got) == pytest.approx(want, rel=1e-9, abs=1e-300), key


def _key_running(client, prefix="streamsim-run-"):
    for worker, keys in client.processing().items():
        for k in keys:
            if str(k).startswith(prefix):
                return worker, str(k)
    return None, None


def test_killing_a_worker_mid_scan_loses_and_duplicates_nothing(tmp_path):
    path = write_scan(tmp_path, """
set = ["box.cells=64", "time.end=40.0", "species.electrons.particles_per_cell=64",
       "species.positrons.particles_per_cell=64"]
[[axis]]
name = "seed"
key = "random_seed"
values = [1, 2, 3, 4, 5, 6]
""", tiny=False)
    out = tmp_path / "out"
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address=None,
                                  silence_logs=50) as cluster, \
            distributed.Client(cluster) as client:
        assert cluster.scheduler_address.startswith("tcp://127.0.0.1:")
        pids = client.run(os.getpid)
        proc = subprocess.Popen([sys.executable, "-m", "streamsim.cli", "scan", str(path),
                                 "--out", str(out), "--scheduler", cluster.scheduler_address,
                                 "--no-figures"], stdout=subprocess.PIPE,
                                stderr=subprocess.PIPE, text=True)
        try:
            worker = key = None
            deadline = time.monotonic() + 120
            while time.monotonic() < deadline and proc.poll() is None and key is None:
                worker, key = _key_running(client)
                time.sleep(0.02)
            assert key is not None, "no run was seen on a worker"
            time.sleep(0.3)                        # well inside the run
            killed = pids[worker]
            os.kill(killed, signal.SIGKILL)
            stdout, stderr = proc.communicate(timeout=240)
        finally:
            if proc.poll() is None:
                proc.kill()
                proc.wait()
    assert proc.returncode == 0, stderr
    rows = read_csv(out / "scan.csv")
    assert len(rows) == 6 and [r["status"] for r in rows] == ["completed"] * 6
    assert len({r["hash"] for r in rows}) == 6 and len({r["folder"] for r in rows}) == 6
    folders = sorted(p.parent.name for p in (out / "runs").glob("*/point.json"))
    assert len(folders) == 6
    # the run that was on the killed worker was run again, by another process
    h = key.removeprefix("streamsim-run-")[:16]
    (row,) = [r for r in rows if r["hash"].startswith(h)]
    point = json.loads((out / row["folder"] / "point.json").read_text())
    assert point["status"] == "completed" and point["pid"] != killed
    assert all(float(r["growth.measured"]) > 0 for r in rows)


def test_replicas_on_a_local_cluster_match_the_local_pool(tmp_path):
    """`run --replicas` sends its seeds to Dask as a scan does; the runs are deterministic, so
    the ensemble is the same number for number as on the local process pool."""
    sets = TINY + ['species.electrons.loading="random"', 'species.positrons.loading="random"']
    common = ["run", "--replicas", "2", "--quiet", "--threads", "1",
              *sum((["--set", o] for o in sets), [])]
    local = cli(*common, "--out", str(tmp_path / "pool"), "--workers", "1")
    assert local.returncode == 0, local.stderr
    dask = cli(*common, "--out", str(tmp_path / "dask"), "--local-cluster", "--workers", "2")
    assert dask.returncode == 0, dask.stderr
    a = read_csv(tmp_path / "pool" / "replicas.csv")
    b = read_csv(tmp_path / "dask" / "replicas.csv")
    assert [r["random_seed"] for r in b] == ["1", "2"]
    assert a[0]["contrast.t_unity_ns"] != a[1]["contrast.t_unity_ns"]   # random loading: two runs
    for ra, rb in zip(a, b):
        assert rb["status"] == "completed"
        for key in ("growth.measured", "growth.measured_err", "growth.fit",
                    "contrast.t_unity_ns"):
            assert ra[key] == rb[key], key


def test_executor_flags_without_replicas_are_refused(tmp_path):
    proc = cli("run", "--local-cluster", "--out", str(tmp_path / "x"))
    assert proc.returncode == 2
    assert "--replicas" in proc.stderr and len(proc.stderr.strip().splitlines()) == 1
