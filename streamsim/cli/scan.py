"""`streamsim scan SCAN [options]`: a parameter scan (the options: `add_arguments`)."""
from __future__ import annotations

from streamsim.cli.common import ArgumentError, add_executor_arguments, warn

HELP = "run a parameter scan (a base deck over axes of deck keys) locally or on Dask"


def add_arguments(p) -> None:
    p.add_argument("scan", metavar="SCAN", help="scan file (TOML): base deck, combine, "
                   "replicas, [[axis]] tables")
    p.add_argument("--out", metavar="DIR", help="scan folder (default: runs/out/<scan file name>)")
    add_executor_arguments(p)
    p.add_argument("--threads", type=int, default=None, metavar="T",
                   help="numba threads per run (default: cores // workers; on Dask: cores of the "
                        "node // worker processes on it, T caps it); workers x threads never "
                        "exceed a node's cores")
    p.add_argument("--resume", action="store_true",
                   help="continue the scan in DIR: completed runs are kept, interrupted ones "
                        "continue from their checkpoints, the rest run")
    p.add_argument("--retry-failed", action="store_true",
                   help="with --resume, also rerun the runs that failed")
    p.add_argument("--set", dest="overrides", action="append", default=[], metavar="KEY=VALUE",
                   help="override a key of the base deck for every run (TOML literal); repeatable")
    p.add_argument("--no-figures", action="store_true", help="tables only, no scan figures")
    p.add_argument("--figures", action="store_true",
                   help="also draw each run's own figures (default: as the scan file's run_figures)")
    p.add_argument("--quiet", action="store_true", help="no progress bar and no summary")


def main(args) -> int:
    from streamsim.scan import SchedulerError, default_out, load_scan, run_scan
    if args.retry_failed and not args.resume:
        raise ArgumentError("", "--retry-failed needs --resume")
    scan = load_scan(args.scan, args.overrides)
    for w in scan.warnings:
        warn(w)
    out = args.out or str(default_out(scan))
    res = run_scan(scan=scan, out=out, workers=args.workers, threads=args.threads,
                   scheduler=args.scheduler, local_cluster=args.local_cluster,
                   resume=args.resume, retry_failed=args.retry_failed,
                   progress=None if not args.quiet else False, quiet=args.quiet,
                   figures=not args.no_figures, run_figures=args.figures or None)
    for w in res.warnings[len(scan.warnings):]:
        warn(w)
    if not args.quiet:
        _print_summary(scan, res)
    if res.interrupted:
        from streamsim.pipeline import Interrupted
        raise Interrupted(f"{res.completed + res.failed} of {len(res.rows)} runs done; continue "
                          f"with: streamsim scan {args.scan} --out {out} --resume")
    if res.lost:
        raise SchedulerError(f"lost the scheduler with {res.lost} run(s) left; continue with "
                             "--resume")
    return 0


def _fmt(v, spec=".3g") -> str:
    return "-" if v is None else format(v, spec) if isinstance(v, (int, float)) else str(v)


_NU, _NU_BOUND = "coherence.frequency_cutoff_hz", "coherence.frequency_cutoff_lower_bound_hz"


def _nu_c(r: dict) -> str:
    """The cutoff frequency of a row, ">=" its lower bound when grid-limited, "-" when none."""
    if r.get(_NU) is not None:
        return _fmt(r[_NU])
    return ">=" + _fmt(r[_NU_BOUND]) if r.get(_NU_BOUND) is not None else "-"


def _print_summary(scan, res) -> None:
    lines = [f"{scan.title}: {len(res.rows)} runs ({res.completed} completed, {res.failed} failed"
             + (f", {res.pending} not done" if res.pending else "") + f"); this time ran "
             f"{res.ran}, skipped {res.skipped} already done"
             + (f" [{res.executor}]" if res.executor else "")]
    if len(res.rows) <= 40:
        names = [a.name for a in scan.axes]
        head = names + (["replica"] if scan.replicas > 1 else []) + \
            ["growth ns", "theory ns", "ratio", "t_unity ns", "clump cm", "nu_c Hz", "status"]
        table = [head]
        for r in res.rows:
            table.append([_fmt(r[n]) for n in names] + ([str(r["replica"])] if scan.replicas > 1
                                                        else []) +
                         [_fmt(r["growth.growth_time_ns"]),
                          _fmt(r["growth.theory_growth_time_ns"]),
                          _fmt(r["growth.ratio"]), _fmt(r["contrast.t_unity_ns"]),
                          _fmt(r["clumps.size_median_cm"]) + ("*" if r.get("clumps.grid_limited")
                                                             else ""),
                          _nu_c(r),
                          r["status"] + (f": {r['error']}" if r["status"] == "failed" else "")])
        widths = [max(len(row[j]) for row in table) for j in range(len(head) - 1)]
        for row in table:
            lines.append("  " + "  ".join(c.rjust(w) for c, w in zip(row, widths)) + "  " + row[-1])
    if any(r.get("clumps.grid_limited") or r.get(_NU_BOUND) is not None for r in res.rows):
        lines.append("  * clump size set by the grid; >= nu_c only a lower bound (grid-limited): "
                     "raise box.cells or give the beams a temperature")
    lines.append(f"  tables: {res.tables[0]}, {res.tables[1]}" if res.tables else "")
    if res.figures:
        lines.append(f"  figures: {res.out / 'figures'} ({len(res.figures)})")
    lines.append(res.timing_line())
    print("\n".join(line for line in lines if line))
