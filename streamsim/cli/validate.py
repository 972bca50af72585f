"""`streamsim validate [options]`: the validation problems (the options: `add_arguments`)."""
from __future__ import annotations

import sys

from streamsim.cli.common import ArgumentError

HELP = ("run the validation problems against published references, print the table, write a "
        "report; exit 1 if any check fails")

DEFAULT_REPORT = "runs/out/validation"


def add_arguments(p) -> None:
    g = p.add_mutually_exclusive_group()
    g.add_argument("--quick", dest="level", action="store_const", const="quick",
                   help="small particle counts, under 3 minutes on 2 cores (the default)")
    g.add_argument("--full", dest="level", action="store_const", const="full",
                   help="production particle counts and more points per curve")
    p.set_defaults(level="quick")
    p.add_argument("--report", metavar="DIR", default=DEFAULT_REPORT,
                   help=f"folder for report.md, results.csv, results.json and the figures "
                        f"(default {DEFAULT_REPORT})")
    p.add_argument("--only", metavar="PROBLEM", action="append", default=[],
                   help="run only this problem; one problem per flag, repeat the flag for more "
                        "(--only landau --only langmuir; names: --list)")
    p.add_argument("--list", action="store_true", help="list the problems and exit")


def main(args) -> int:
    from streamsim.validation import PROBLEMS, PROBLEM_KEYS, run_validation
    if args.list:
        width = max(len(p.key) for p in PROBLEMS)
        for p in PROBLEMS:
            print(f"{p.key.ljust(width)}  {p.title}")
        return 0
    unknown = [k for k in args.only if k not in PROBLEM_KEYS]
    if unknown:
        raise ArgumentError("", f"unknown problem {', '.join(unknown)}; known: "
                            f"{', '.join(PROBLEM_KEYS)}")
    say = lambda msg: print(msg, file=sys.stderr, flush=True)  # noqa: E731
    say(f"streamsim validate --{args.level}: {len(args.only) or len(PROBLEMS)} problems")
    v = run_validation(args.level, problems=args.only or None, progress=say)
    print(v.table())
    n, bad = len(v.checks), len(v.failed)
    print(f"\n{n - bad}/{n} checks pass in {v.seconds:.0f} s"
          + ("" if not bad else "; FAILED: " + "; ".join(f"{c.problem}: {c.quantity}"
                                                         for c in v.failed)))
    try:
        path = v.write_report(args.report)
    except OSError as ex:
        from streamsim.io import OutputError
        raise OutputError(f"cannot write the report into {args.report}: {ex}") from None
    print(f"report: {path}")
    sys.stdout.flush()
    return 0 if v.passed else 1
