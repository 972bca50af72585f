"""`streamsim compare DECK [options]`: PIC and Vlasov on one deck (the options: `add_arguments`)."""
from __future__ import annotations

import json

from streamsim.cli.common import ArgumentError, warn

HELP = ("run a deck with method = \"pic\" and method = \"vlasov\" and compare the nonlinear "
        "outputs side by side (compare.json, overlaid figures)")


def add_arguments(p) -> None:
    p.add_argument("deck", metavar="DECK", help="deck file (TOML); its species need a "
                   "momentum spread (theta or spread_u)")
    p.add_argument("--set", dest="overrides", action="append", default=[], metavar="KEY=VALUE",
                   help="override a deck key for both runs (repeatable)")
    p.add_argument("--out", metavar="DIR", help="folder for compare.json, compare.csv, the "
                   "figures and the two runs (pic/, vlasov/); default: the deck's "
                   "output.folder + '-compare'")
    p.add_argument("--json", action="store_true", help="print compare.json instead of the table")
    p.add_argument("--threads", type=int, default=None, metavar="T",
                   help="numba threads (default: the deck's output.threads, 0 = all cores)")
    p.add_argument("--force", action="store_true", help="run even when a numerical-health "
                   "rule refuses the deck, or over finished runs of a different deck")


def main(args) -> int:
    from streamsim import io
    from streamsim.vlasov.compare import FILE, compare
    if args.threads is not None and args.threads < 0:
        raise ArgumentError("", f"--threads must be >= 0 (0 = all cores), got {args.threads}")
    c = compare(args.deck, out=args.out, overrides=args.overrides, threads=args.threads,
                quiet=True, warn=warn, force=args.force)
    if args.json:
        print(json.dumps(io.jsonable(c.contract()), indent=2, allow_nan=False))
    else:
        print(c.table())
        print(f"outputs in {c.folder} ({FILE}, compare.csv, compare_*.png, pic/, vlasov/)")
    return 0
