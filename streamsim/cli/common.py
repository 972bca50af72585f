"""Shared pieces of the subcommands: deck loading with one-line errors, messages."""
from __future__ import annotations

import sys

from streamsim.deck import Deck, DeckError, load_deck


def error(kind: str, message: str) -> None:
    """One line on stderr, ``<kind> error: <message>``; never a traceback."""
    print(f"{kind} error: {message}", file=sys.stderr)


def warn(message: str) -> None:
    print(f"warning: {message}", file=sys.stderr)


def add_deck_arguments(parser, deck_help: str = "deck file (TOML); none = the built-in default") -> None:
    parser.add_argument("deck", nargs="?", default=None, metavar="DECK", help=deck_help)
    parser.add_argument("--set", dest="overrides", action="append", default=[], metavar="KEY=VALUE",
                        help="override a deck key, value as a TOML literal "
                             "(e.g. --set species.electrons.theta=1e-3); repeatable")


def add_executor_arguments(parser) -> None:
    """Where the runs of a scan-like command go: --workers, and --scheduler | --local-cluster."""
    parser.add_argument("--workers", type=int, default=None, metavar="N",
                        help="runs at once: local processes or LocalCluster workers (default: "
                             "one per core)")
    where = parser.add_mutually_exclusive_group()
    where.add_argument("--scheduler", metavar="ADDRESS",
                       help="send the runs to a running Dask scheduler, e.g. tcp://HOST:8786")
    where.add_argument("--local-cluster", action="store_true",
                       help="run on a dask.distributed LocalCluster on 127.0.0.1")


def run_scan_or_exit(call=None, **kwargs):
    """(result, None) of ``call(**kwargs)`` (default :func:`streamsim.scan.run_scan`; anything
    built on it, such as :func:`streamsim.scan.replicas.run_replicas`), or (None, exit status)
    after one line: a bad deck or bad arguments 2, scheduler or output failures 4."""
    from streamsim.io import OutputError
    from streamsim.scan import ScanError, ScanSetupError, SchedulerError, run_scan
    try:
        return (call or run_scan)(**kwargs), None
    except ScanError as ex:
        error("deck", str(ex))
        return None, 2
    except ScanSetupError as ex:
        error("argument", str(ex))
        return None, 2
    except SchedulerError as ex:
        error("dask", str(ex))
        return None, 4
    except OutputError as ex:
        error("output", str(ex))
        return None, 4


def deck_from_args(args) -> Deck | None:
    """The validated deck, or None after printing the one-line deck error."""
    try:
        return load_deck(args.deck, args.overrides)
    except DeckError as ex:
        error("deck", str(ex))
        return None


def read_run_folder(path):
    """(folder, RunData) of a run folder, or (folder, None) after printing a one-line error."""
    from pathlib import Path

    from streamsim import io
    folder = Path(path)
    if not folder.is_dir():
        error("run", f"{folder}: no such folder")
        return folder, None
    if not io.is_run_folder(folder):
        error("run", f"{folder} is not a streamsim run folder (no {io.FILES['deck']} and "
                     f"{io.FILES['series']})")
        return folder, None
    try:
        return folder, io.read_run(folder)
    except (OSError, KeyError, ValueError) as ex:
        error("run", f"{folder}: cannot read the run ({ex})")
        return folder, None


def output_failure(ex: OSError, folder) -> int:
    """Print one line for a failed write or read of a run folder; the exit status 4."""
    from streamsim.io import OutputError
    error("output", str(ex) if isinstance(ex, OutputError) else f"{folder}: {ex.strerror or ex}")
    return 4
