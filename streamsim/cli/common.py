"""Shared pieces of the subcommands: the one table from exception families to exit statuses,
deck loading, run folders, messages."""
from __future__ import annotations

import sys

from streamsim.deck import Deck, InputError, load_deck


def error(kind: str, message: str) -> None:
    """One line on stderr, ``<kind> error: <message>``; never a traceback."""
    print(f"{kind} error: {message}", file=sys.stderr)


def warn(message: str) -> None:
    print(f"warning: {message}", file=sys.stderr)


# --------------------------------------------------------------------------------------------
# Exit statuses: mapped here once, from the exception families; subcommands just raise
# --------------------------------------------------------------------------------------------
class ArgumentError(InputError):
    """A bad command-line argument (``argument error: ...``, exit 2)."""


class RunFolderError(InputError):
    """A RUN_DIR that is not a readable run folder (``run error: ...``, exit 2)."""


class TheoryFailure(InputError):
    """The linear theory cannot be computed for this deck (``theory error: ...``, exit 2)."""


#: exception family (class name) -> (the word the one line starts with, exit status). The most
#: specific class of an exception's MRO that is named here wins. Families are matched by name,
#: so mapping an error never imports the engine (``streamsim theory`` stays free of numba).
#: README, "Exit statuses", lists the statuses.
EXIT_STATUSES = {
    "BrokenPipeError": (None, 0),             # stdout closed by a pager: not an error
    "ArgumentError": ("argument", 2),
    "ScanSetupError": ("argument", 2),        # --workers x --threads over the cores, ...
    "RunFolderError": ("run", 2),
    "TheoryFailure": ("theory", 2),
    "ScanError": ("scan", 2),                 # a scan file (or a converge option, "--...")
    "DeckError": ("deck", 2),                 # also health and memory refusals, another deck
    "NumericalError": ("numerical", 3),       # NaN/Inf: the run stopped
    "SchedulerError": ("dask", 4),
    "OutputError": ("output", 4),             # also a run folder in use by another run
    "MemoryError": ("memory", 4),
    "OSError": ("output", 4),                 # any other failed read or write
    "Interrupted": ("interrupted", 130),      # a checkpoint was written
    "KeyboardInterrupt": ("interrupted", 130),
}


def exit_status(ex: BaseException) -> tuple[str | None, int] | None:
    """(kind, status) of an exception by :data:`EXIT_STATUSES`, or None (an internal error)."""
    for cls in type(ex).__mro__:
        if cls.__name__ in EXIT_STATUSES and (cls.__module__.startswith("streamsim")
                                              or cls.__module__ == "builtins"):
            kind, status = EXIT_STATUSES[cls.__name__]
            if kind == "scan" and str(getattr(ex, "where", "")).startswith("--"):
                kind = "argument"             # a ScanError about a command-line option
            return kind, status
    return None


def report(ex: BaseException, args=None) -> int:
    """Print the one line for ``ex`` and return its exit status; an exception outside the
    table is an internal error (status 1; ``STREAMSIM_DEBUG=1`` re-raises it)."""
    found = exit_status(ex)
    if found is None:
        import os
        if os.environ.get("STREAMSIM_DEBUG"):
            raise ex
        print(f"streamsim: internal error ({ex.__class__.__name__}: {ex}); please report it, "
              f"and rerun with STREAMSIM_DEBUG=1 for the traceback", file=sys.stderr)
        return 1
    kind, status = found
    if kind is None:
        return status
    if kind == "interrupted":
        text = str(ex)
        print(f"interrupted: {text}" if text else "interrupted", file=sys.stderr)
    elif kind == "memory":
        print("streamsim: out of memory: use fewer particles_per_cell or cells", file=sys.stderr)
    elif kind == "numerical" and getattr(args, "run_folder", None):
        error(kind, f"{ex}; the last good checkpoint (if any) and the diagnostics so far are "
                    f"in {args.run_folder}")
    elif kind == "output" and getattr(ex, "filename", None) and not any(
            c.__name__ == "OutputError" for c in type(ex).__mro__):
        error(kind, f"{ex.filename}: {ex.strerror or ex}")   # a bare OSError of a read/write
    else:
        error(kind, str(ex))
    return status


def add_deck_arguments(parser, deck_help: str = "deck file (TOML); none = the built-in default") -> None:
    parser.add_argument("deck", nargs="?", default=None, metavar="DECK", help=deck_help)
    parser.add_argument("--set", dest="overrides", action="append", default=[], metavar="KEY=VALUE",
                        help="override a deck key, value as a TOML literal "
                             "(e.g. --set species.electrons.theta=1e-3; species.*.KEY sets "
                             "every species); repeatable")


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


def deck_from_args(args) -> Deck:
    """The validated deck of ``args.deck`` with ``args.overrides`` (raises DeckError)."""
    return load_deck(args.deck, args.overrides)


def read_run_folder(path):
    """(folder, RunData) of a run folder; raises :class:`RunFolderError` for a path that is
    not one (a file, a missing folder, a folder without a run)."""
    from pathlib import Path

    from streamsim import io
    folder = Path(path)
    if folder.is_file():
        raise RunFolderError(str(folder), "is a file, not a run folder (give the folder that "
                             "`streamsim run` wrote; a deck runs with `streamsim run DECK`)")
    if not folder.is_dir():
        raise RunFolderError(str(folder), "no such folder")
    if not io.is_run_folder(folder):
        raise RunFolderError("", f"{folder} is not a streamsim run folder (no "
                             f"{io.FILES['deck']} and {io.FILES['series']})")
    try:
        return folder, io.read_run(folder)
    except (OSError, KeyError, ValueError) as ex:
        raise RunFolderError(str(folder), f"cannot read the run ({ex})") from None
