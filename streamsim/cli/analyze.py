"""`streamsim analyze RUN_DIR [--bulk-gamma G] [--clump-threshold X] [--coherence-drop X] [--json]`."""
from __future__ import annotations

import json
import math
import sys

from streamsim.cli.common import error, output_failure, read_run_folder

HELP = "analyse a run folder again: growth fits, density contrast, clumps, coherence cutoff"


def add_arguments(p) -> None:
    p.add_argument("run_dir", metavar="RUN_DIR", help="a run folder written by `streamsim run`")
    p.add_argument("--bulk-gamma", type=float, default=None, metavar="G",
                   help="Lorentz factor of the simulation frame toward the observer for the "
                        "emission cutoff nu_c = G c k_c / 2 pi (default: the deck's "
                        "analysis.bulk_gamma, 1 = the simulation frame)")
    p.add_argument("--clump-threshold", type=float, default=None, metavar="X",
                   help="a clump is a connected region with delta n/n > X (default: the deck's "
                        "analysis.clump_threshold, 0.5)")
    p.add_argument("--coherence-drop", type=float, default=None, metavar="X",
                   help="k_c is the largest k where |F|^2 >= X times its peak, 0 < X < 1 "
                        "(default: the deck's analysis.coherence_drop, 0.5)")
    p.add_argument("--json", action="store_true", help="print the summary blocks as JSON")
    p.add_argument("--no-figures", action="store_true", help="skip the figures")


def _check(args) -> str | None:
    g, c, d = args.bulk_gamma, args.clump_threshold, args.coherence_drop
    if g is not None and not (math.isfinite(g) and g >= 1):
        return f"--bulk-gamma = {g:g}: must be >= 1"
    if c is not None and not (math.isfinite(c) and c > 0):
        return f"--clump-threshold = {c:g}: must be > 0"
    if d is not None and not (math.isfinite(d) and 0 < d < 1):
        return f"--coherence-drop = {d:g}: must be in (0, 1)"
    return None


def main(args) -> int:
    bad = _check(args)
    if bad:
        error("argument", bad)
        return 2
    folder, data = read_run_folder(args.run_dir)
    if data is None:
        return 2
    from streamsim.analysis import analyze, human_summary
    try:
        blocks = analyze(data, folder=folder, bulk_gamma=args.bulk_gamma,
                         clump_threshold=args.clump_threshold,
                         coherence_drop=args.coherence_drop, write=True,
                         figures=not args.no_figures)
    except OSError as ex:
        return output_failure(ex, folder)
    except ValueError as ex:
        error("argument", str(ex))
        return 2
    if args.json:
        json.dump(blocks, sys.stdout, indent=2, allow_nan=False)
        sys.stdout.write("\n")
    else:
        try:
            n = float(data.deck["units"]["density_cm3"])
        except (KeyError, TypeError, ValueError):
            n = 1.0e10
        print(human_summary(blocks, n))
        print(f"tables in {folder / 'analysis'} and {folder / 'analysis.h5'}; "
              f"figures in {folder / 'figures'}")
    return 0
