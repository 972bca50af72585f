"""Replicas of one deck: R runs that differ only in ``random_seed`` (seed, seed + 1, ...), run on the
scan machinery (a scan with no axes and ``replicas = R``), and the ensemble statistics of the
fastest growth rate and of the clump-formation time.

For each quantity the report gives the mean over the replicas that measured it and its standard
error s / sqrt(n), s the sample standard deviation (ddof = 1) -- the error of a mean of n
independent draws (e.g. Taylor, *An Introduction to Error Analysis* (1997), sec. 5.7). Noise-seeded
replicas are independent because their seeds are; the spread then includes what a single fit's
error bar cannot show (the noise realisation seeds the growing mode differently each time).

Files (in the replicas folder, beside the scan's own manifest.json, scan.csv, runs/):
``replicas.csv`` one row per replica; ``replicas.json`` the statistics.
"""
from __future__ import annotations

import csv
import math
from dataclasses import dataclass, field
from pathlib import Path

from .runner import run_scan
from .spec import load_scan
from .tables import run_folder
from .worker import _read_json

__all__ = ["ReplicaStats", "ReplicaResult", "run_replicas", "mean_and_standard_error",
           "REPLICA_COLUMNS"]

#: replicas.csv columns, in order: the run's own columns, then summary.json keys (block and key
#: joined by dots, as the scan table names them)
REPLICA_COLUMNS = ("replica", "random_seed", "status", "growth.mode", "growth.measured",
                   "growth.measured_err", "growth.fit", "contrast.t_unity_ns", "folder",
                   "coherence.frequency_cutoff_hz", "coherence.frequency_cutoff_err_hz",
                   "clumps.size_median_cm", "clumps.size_median_err_cm")


@dataclass
class ReplicaStats:
    mean: float | None
    standard_error: float | None
    n: int

    def as_dict(self) -> dict:
        return {"mean": self.mean, "standard_error": self.standard_error, "n": self.n}


@dataclass
class ReplicaResult:
    out: Path
    rows: list[dict]
    growth: ReplicaStats
    t_unity_ns: ReplicaStats
    theory_growth: float | None = None
    warnings: list[str] = field(default_factory=list)
    emission: dict = field(default_factory=dict)


def emission_budget(values, within, terms_per_run) -> dict:
    """The error budget of ONE run's emission number with replicas: the median over the runs of
    each within-run term (mode-to-mode or clump-to-clump, window) and the replica spread s
    (sample standard deviation over the replicas), combined in quadrature (conservative: the
    spread also holds part of the within-run scatter); and the ensemble mean with s / sqrt(n)."""
    import statistics

    from ..analysis.emission import budget
    st = mean_and_standard_error(values)
    v = [float(x) for x in values if x is not None and math.isfinite(float(x))]
    spread = statistics.stdev(v) if len(v) >= 2 else None
    names = sorted({k for t in terms_per_run if t for k in t if k != "replica"})
    terms = {}
    for k in names:
        got = [t[k] for t in terms_per_run if t and t.get(k) is not None]
        terms[k] = statistics.median(got) if got else None
    terms["replica"] = spread
    return {"mean": st.mean, "standard_error_of_mean": st.standard_error, "n": st.n,
            "one_run_budget": budget(terms),
            "within_run_err_median": (statistics.median([w for w in within if w is not None])
                                      if any(w is not None for w in within) else None)}


def mean_and_standard_error(values) -> ReplicaStats:
    """Mean and s/sqrt(n) (s with ddof = 1) of the finite values; no error for n < 2."""
    v = [float(x) for x in values if x is not None and math.isfinite(float(x))]
    n = len(v)
    if n == 0:
        return ReplicaStats(None, None, 0)
    mean = sum(v) / n
    if n < 2:
        return ReplicaStats(mean, None, 1)
    s = math.sqrt(sum((x - mean) ** 2 for x in v) / (n - 1))
    return ReplicaStats(mean, s / math.sqrt(n), n)


def run_replicas(deck_src: str | None, overrides: list[str], replicas: int, out: str | Path, *,
                 workers: int | None = None, threads: int | None = None, quiet: bool = True,
                 resume: bool = False, scheduler: str | None = None,
                 local_cluster: bool = False) -> ReplicaResult:
    """Run ``replicas`` seeds of a deck (``deck_src`` None: the built-in default) into ``out``
    and write replicas.csv / replicas.json, on the local pool or, as a scan does, on a Dask
    ``scheduler`` or a ``local_cluster``. Raises ScanError / ScanSetupError / SchedulerError
    like a scan."""
    raw = {"replicas": int(replicas), "set": list(overrides or [])}
    if deck_src is not None:
        raw["base"] = str(Path(deck_src).resolve())
    scan = load_scan(raw)
    res = run_scan(scan, out, workers=workers, threads=threads, progress=None if not quiet
                   else False, quiet=quiet, figures=False, resume=resume, scheduler=scheduler,
                   local_cluster=local_cluster)
    out = Path(out)
    rows, theory = [], None
    for p, r in zip(scan.points, res.rows):
        s = _read_json(run_folder(out, p) / "summary.json") or {}
        g = s.get("growth") or {}
        theory = theory if theory is not None else g.get("theory")
        co, cl = s.get("coherence") or {}, s.get("clumps") or {}
        rows.append({"replica": p.replica, "random_seed": p.seed, "status": r.get("status"),
                     "growth.mode": g.get("mode"), "growth.measured": r.get("growth.measured"),
                     "growth.measured_err": r.get("growth.measured_err"),
                     "growth.fit": g.get("fit"),
                     "contrast.t_unity_ns": r.get("contrast.t_unity_ns"),
                     "folder": r.get("folder"),
                     "coherence.frequency_cutoff_hz": co.get("frequency_cutoff_hz"),
                     "coherence.frequency_cutoff_err_hz": co.get("frequency_cutoff_err_hz"),
                     "_nu_terms": (co.get("frequency_cutoff_budget_hz") or {}).get("terms"),
                     "clumps.size_median_cm": cl.get("size_median_cm"),
                     "clumps.size_median_err_cm": cl.get("size_median_err_cm"),
                     "_size_terms": (cl.get("size_median_budget_cm") or {}).get("terms")})
    ok = [r for r in rows if r["status"] == "completed"]
    result = ReplicaResult(out=out, rows=rows,
                           growth=mean_and_standard_error(r["growth.measured"] for r in ok),
                           t_unity_ns=mean_and_standard_error(r["contrast.t_unity_ns"]
                                                              for r in ok),
                           theory_growth=theory, warnings=list(res.warnings))
    result.emission = {
        "coherence.frequency_cutoff_hz": emission_budget(
            [r["coherence.frequency_cutoff_hz"] for r in ok],
            [r["coherence.frequency_cutoff_err_hz"] for r in ok], [r["_nu_terms"] for r in ok]),
        "clumps.size_median_cm": emission_budget(
            [r["clumps.size_median_cm"] for r in ok], [r["clumps.size_median_err_cm"] for r in ok],
            [r["_size_terms"] for r in ok])}
    from .. import io
    with io.atomic_path(out / "replicas.csv") as tmp, open(tmp, "w", newline="",
                                                          encoding="utf-8") as f:
        w = csv.writer(f)
        w.writerow(REPLICA_COLUMNS)
        for r in rows:
            w.writerow(["" if r[c] is None else r[c] for c in REPLICA_COLUMNS])
    io.write_json(out / "replicas.json", {
        "replicas": int(replicas), "completed": len(ok),
        "growth.measured": result.growth.as_dict(),
        "contrast.t_unity_ns": result.t_unity_ns.as_dict(),
        "growth.theory": theory, **result.emission,
        "error": "standard error of the mean, s / sqrt(n), s with ddof = 1; emission numbers "
                 "also give one run's budget (within-run terms and the replica spread)"})
    return result
