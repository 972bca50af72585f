"""`streamsim analyze RUN_DIR [options]`: analyse a run folder again (options: `add_arguments`)."""
from __future__ import annotations

import json
import sys

from streamsim.cli.common import ArgumentError, read_run_folder

HELP = "analyse a run folder again: growth fits, density contrast, clumps, coherence cutoff"


def _gamma(text: str):
    """A number, or the word 'measured'."""
    if text.strip().lower() == "measured":
        return "measured"
    try:
        return float(text)
    except ValueError:
        import argparse
        raise argparse.ArgumentTypeError(f"{text!r}: a number >= 1 or 'measured'") from None


def add_arguments(p) -> None:
    p.add_argument("run_dir", metavar="RUN_DIR", help="a run folder written by `streamsim run`")
    p.add_argument("--bulk-gamma", type=_gamma, default=None, metavar="G",
                   help="Lorentz factor of the simulation frame toward the observer for the "
                        "emission cutoff nu_c = G c k_c / 2 pi, or 'measured' (the bulk Lorentz "
                        "factor of the species that sets k_c; default: the deck's "
                        "analysis.bulk_gamma, 1 = the simulation frame)")
    p.add_argument("--clump-threshold", type=float, default=None, metavar="X",
                   help="a clump is a connected region with delta n/n > X (default: the deck's "
                        "analysis.clump_threshold, 0.5)")
    p.add_argument("--coherence-drop", type=float, default=None, metavar="X",
                   help="k_c is where the log-binned envelope of |F|^2 (its mean over each log "
                        "bin of k) falls below X times the envelope's peak for the last time, "
                        "0 < X < 1 (default: the deck's analysis.coherence_drop, 0.5)")
    p.add_argument("--json", action="store_true", help="print the summary blocks as JSON")
    p.add_argument("--no-figures", action="store_true", help="skip the figures")


def main(args) -> int:
    from streamsim import analysis, io
    from streamsim.deck import DeckError
    folder, data = read_run_folder(args.run_dir)
    try:   # the flags are checked by the deck's own key table (one line, as for a deck)
        options = analysis.options_for(data.deck, bulk_gamma=args.bulk_gamma,
                                       clump_threshold=args.clump_threshold,
                                       coherence_drop=args.coherence_drop)
    except DeckError as ex:
        flag = {"analysis.bulk_gamma": "--bulk-gamma", "analysis.clump_threshold":
                "--clump-threshold", "analysis.coherence_drop": "--coherence-drop"}
        raise ArgumentError("", str(ex).replace(ex.key, flag.get(ex.key, ex.key), 1)) from None
    results = analysis.compute(data, options)
    entries = analysis.summary_entries(results, options)
    analysis.write_outputs(results, data, folder, figures=not args.no_figures)
    io.update_summary(folder, entries)
    if args.json:
        json.dump(entries, sys.stdout, indent=2, allow_nan=False)
        sys.stdout.write("\n")
    else:
        print(analysis.terminal_lines(results))
        where = f"tables in {folder / 'analysis'} and {folder / 'analysis.h5'}"
        print(where + ("" if args.no_figures else f"; figures in {folder / 'figures'}"))
    return 0
