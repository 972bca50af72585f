"""Reproduce the validation figures (and report) of `streamsim validate`.

    python analysis/validation_figures.py --full [--out DIR]     # re-run at production counts
    python analysis/validation_figures.py --quick [--out DIR]    # the small version
    python analysis/validation_figures.py --from DIR/results.json [--out DIR]   # re-plot only

Figures are written as DIR/<problem>.png (default DIR: runs/out/validation-figures), together
with report.md and results.csv when the problems are re-run.
"""
from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    g = ap.add_mutually_exclusive_group()
    g.add_argument("--full", dest="level", action="store_const", const="full")
    g.add_argument("--quick", dest="level", action="store_const", const="quick")
    g.add_argument("--from", dest="source", metavar="RESULTS_JSON",
                   help="re-plot from a results.json written by streamsim validate")
    ap.set_defaults(level="full")
    ap.add_argument("--out", default="runs/out/validation-figures", metavar="DIR")
    ap.add_argument("--only", action="append", default=[], metavar="PROBLEM")
    args = ap.parse_args(argv)
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    from streamsim.validation.report import FIGURES
    if args.source:
        data = json.loads(Path(args.source).read_text())["data"]
        for key, d in data.items():
            if key in FIGURES and (not args.only or key in args.only) and d:
                FIGURES[key](d, out / f"{key}.png")
                print(out / f"{key}.png")
        return 0
    from streamsim.validation import run_validation
    v = run_validation(args.level, problems=args.only or None,
                       progress=lambda m: print(m, file=sys.stderr, flush=True))
    path = v.write_report(out)
    print(v.table())
    print(f"report and figures: {path.parent}")
    return 0 if v.passed else 1


if __name__ == "__main__":
    sys.exit(main())
