"""`streamsim run [DECK] [--out DIR] [--set k=v ...] [--quiet] [--resume [RUN_DIR]]`."""
from __future__ import annotations

import sys
from pathlib import Path

from streamsim.cli.common import add_deck_arguments, error, warn
from streamsim.deck import DeckError, load_deck

HELP = "run a deck (none: the built-in symmetric pair-beam demo) and analyse it"


def add_arguments(p) -> None:
    add_deck_arguments(p)
    p.add_argument("--out", metavar="DIR", help="run folder (default: the deck's output.folder, "
                   "runs/out/<title>)")
    p.add_argument("--quiet", action="store_true",
                   help="no progress bar and no summary (warnings and refusals still go to "
                        "stderr)")
    p.add_argument("--resume", nargs="?", const=True, default=None, metavar="RUN_DIR",
                   help="continue an interrupted run from its checkpoint (RUN_DIR, else --out, "
                        "else the deck's folder; with no DECK the run folder's deck.toml is used)")
    p.add_argument("--threads", type=int, default=None, metavar="T",
                   help="numba threads (default: the deck's output.threads, 0 = all cores)")
    p.add_argument("--no-analysis", action="store_true", help="write the raw outputs only")
    p.add_argument("--force", action="store_true",
                   help="run even when a numerical-health rule refuses the deck, or over a "
                        "finished run of a different deck in the same folder")
    p.add_argument("--no-figures", action="store_true", help="analyse, but draw no figures")


def main(args) -> int:
    from streamsim import io
    if args.threads is not None and args.threads < 0:
        error("argument", f"--threads must be >= 0 (0 = all cores), got {args.threads}")
        return 2
    folder = args.out
    deck_src = args.deck
    if isinstance(args.resume, str):
        folder = args.resume
        if not (Path(folder) / io.FILES["checkpoint"]).is_file():
            error("output", f"nothing to resume: {folder} holds no {io.FILES['checkpoint']}")
            return 4
        if deck_src is None:
            deck_src = str(Path(args.resume) / io.FILES["deck"])
    try:
        deck = load_deck(deck_src, args.overrides)
    except DeckError as ex:
        error("deck", str(ex))
        return 2
    if args.resume and folder is None:
        folder = deck.output.folder
    from streamsim.pipeline import Interrupted, NumericalError, run
    try:
        result = run(deck, out=folder, quiet=args.quiet, resume=bool(args.resume),
                     analyze=not args.no_analysis, threads=args.threads, force=args.force,
                     figures=not args.no_figures, warn=warn)
    except DeckError as ex:
        error("deck", str(ex))
        return 2
    except NumericalError as ex:
        error("numerical", f"{ex}; the last good checkpoint (if any) and the diagnostics so far "
                           f"are in {folder or deck.output.folder}")
        return 3
    except Interrupted as ex:
        print(f"interrupted: {ex}", file=sys.stderr)
        return 130
    except io.OutputError as ex:
        error("output", str(ex))
        return 4
    if not args.quiet:
        _print_summary(result)
    return 0


def _print_summary(result) -> None:
    from streamsim.analysis import terminal_lines
    s = result.summary
    n = s["normalization"]
    v = s.get("vlasov")
    size = (f"{v['phase_space_cells']} phase-space cells (Vlasov), {s['wall_s']:.1f} s "
            f"({v['cell_steps_per_s'] or 0:.3g} cell-steps/s)" if v else
            f"{s['particles']} particles, {s['wall_s']:.1f} s "
            f"({s['particle_steps_per_s']:.3g} particle-steps/s)")
    lines = [f"{s['deck_title']}: {s['steps']} steps, {size}",
             f"  n_ref = {n['density_cm3']:.3g} cm^-3: 1/omega_p = {n['time_unit_ns']:.4g} ns, "
             f"c/omega_p = {n['skin_depth_cm']:.4g} cm",
             f"  energy error max {s['energy']['relative_error_max']:.2e}"]
    text = terminal_lines(result.analysis)
    if text:
        lines.append(text)
    if "analysis_error" in s:
        lines.append(f"  analysis failed: {s['analysis_error']}")
    if result.folder is not None:
        lines.append(f"  outputs in {result.folder}")
    print("\n".join(lines))
