"""`streamsim converge [DECK] [options]`: a resolution study (the options: `add_arguments`)."""
from __future__ import annotations

import json
from pathlib import Path

from streamsim.cli.common import ArgumentError, add_executor_arguments, warn

HELP = ("resolution study: the deck at several levels of cells and particles per cell, with the "
        "change, observed order, Richardson estimate and a verdict for each headline output")


def add_arguments(p) -> None:
    p.add_argument("deck", nargs="?", default=None, metavar="DECK",
                   help="deck file (TOML); none = the built-in default")
    p.add_argument("--factor", type=float, default=2.0, metavar="F",
                   help="refinement of box.cells and particles per cell per level (default 2)")
    p.add_argument("--levels", type=int, default=3, metavar="L", help="levels (default 3)")
    p.add_argument("--replicas", type=int, default=None, metavar="R",
                   help="runs per level for decks with random loading or random phases "
                        "(default 3; 1 for fully quiet decks)")
    p.add_argument("--tolerance", type=float, default=0.10, metavar="T",
                   help="relative change between the two finest levels that counts as "
                        "converged (default 0.1)")
    p.add_argument("--out", metavar="DIR",
                   help="study folder (default: runs/out/converge-<deck file name without "
                        ".toml>, converge-default without DECK)")
    add_executor_arguments(p)
    p.add_argument("--set", dest="overrides", action="append", default=[], metavar="KEY=VALUE",
                   help="override a deck key for every level (TOML literal); repeatable")
    p.add_argument("--json", action="store_true", help="print converge.json on stdout")
    p.add_argument("--figures", action="store_true", help="also draw each run's own figures")
    p.add_argument("--quiet", action="store_true", help="no progress bar and no table")


def main(args) -> int:
    from streamsim.pipeline import Interrupted
    from streamsim.scan import SchedulerError, run_scan
    from streamsim.scan import converge as cv
    if not 0 < args.tolerance < 1:
        raise ArgumentError("", f"--tolerance {args.tolerance:g}: must be in (0, 1)")
    scan, deck, levels, reps = cv.build_study(args.deck, factor=args.factor,
                                              levels=args.levels, replicas=args.replicas,
                                              overrides=args.overrides)
    if args.replicas and args.replicas > 1 and reps == 1:
        warn("every species has quiet loading and the phases are not random, so replicas "
             "would be the same run; running 1 per level")
    stem = Path(args.deck).stem if args.deck else "default"
    out = Path(args.out or Path("runs") / "out" / f"converge-{stem}")
    old = cv.read_manifest_scan(out)
    if old is not None and "mode" in old:   # a study written before the scan key was renamed
        old["combine"] = old.pop("mode")
    if old is not None and old != scan.to_dict():
        raise ArgumentError("", f"{out} holds another study or scan; choose another --out")
    res = run_scan(scan=scan, out=out, workers=args.workers, scheduler=args.scheduler,
                   local_cluster=args.local_cluster, resume=True,
                   progress=None if not args.quiet else False, quiet=args.quiet, figures=False,
                   run_figures=args.figures)
    for w in res.warnings:
        warn(w)
    study = cv.collect_study(scan, out, levels, args.factor, reps, args.tolerance)
    cv.write_study(study, out)
    if args.json:
        from streamsim import io
        print(json.dumps(io.jsonable(study), indent=2, allow_nan=False))
    elif not args.quiet:
        print(table(study, res, out))
    if res.interrupted:
        raise Interrupted(f"continue with the same command (resumes {out})")
    if res.lost:
        raise SchedulerError(f"lost the scheduler with {res.lost} run(s) left; run the same "
                             "command again to continue")
    return 0


def _f(v, spec=".4g"):
    return "-" if v is None else format(v, spec)


def table(study: dict, res, out) -> str:
    lines = [f"{study['deck']}: {len(res.rows)} runs ({res.completed} completed, {res.failed} "
             f"failed); factor {study['factor']:g}, {study['replicas']} replica(s) per level"]
    for name, o in study["outputs"].items():
        vals = "  ".join(f"{lv['cells']}: {_f(lv['value'])}"
                         + (f" +- {_f(lv['err'], '.2g')}" if lv["err"] is not None else "")
                         for lv in o["levels"])
        extra = (f"; order {_f(o['order'], '.2g')}, Richardson {_f(o['extrapolated'])}"
                 if o["order"] is not None else "")
        lines.append(f"  {name} [{o['unit']}]  {vals}  change {_f(o['change'], '.3g')}"
                     f"{extra}  -> {o['verdict']}"
                     + (f" ({o['reason']})" if o.get("reason") else ""))
    lines.append(f"  converge.csv, converge.json, converge.png in {out}")
    lines.append(res.timing_line())
    return "\n".join(line for line in lines if line)
