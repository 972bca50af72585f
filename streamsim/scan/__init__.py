"""Parameter scans: many runs of one base deck over axes of deck keys, on a laptop or a cluster.

    scan = streamsim.scan.load_scan("runs/density-scan.toml")    # validate and expand
    res = streamsim.scan.run_scan(scan, out="runs/out/density-scan", workers=2)
    res.rows      # one dict per run (the columns of scan.csv)

See :mod:`streamsim.scan.spec` (the scan file), :mod:`streamsim.scan.runner` (execution and the
scan folder), :mod:`streamsim.scan.tables` (scan.csv / scan.h5) and
:mod:`streamsim.scan.figures`.
"""
from __future__ import annotations

from .runner import ScanResult, ScanSetupError, SchedulerError, default_out, run_scan
from .spec import Axis, Point, Scan, ScanError, deck_hash, load_scan
from .tables import METRICS, collect_rows, write_tables
from .worker import read_state, run_point

__all__ = ["load_scan", "run_scan", "Scan", "Axis", "Point", "ScanResult", "ScanError",
           "ScanSetupError", "SchedulerError", "deck_hash", "default_out", "METRICS",
           "collect_rows", "write_tables", "read_state", "run_point"]
