"""`streamsim` command line: a thin layer over the Python API.

Each subcommand lives in its own module ``streamsim.cli.<name>`` exposing
``HELP`` (one line), ``add_arguments(parser)`` and ``main(args) -> int`` (0, or 1 when a
validation check failed). Every other outcome is an exception that :func:`main` maps to its one
line and exit status through the one table ``streamsim.cli.common.EXIT_STATUSES``: 2 bad input
(deck, scan file, arguments, run folder), 3 the run stopped on numerical trouble, 4 an
output/IO error, 130 interrupted.
"""
from __future__ import annotations

import argparse
import importlib
import sys

#: subcommand -> module; imported lazily so that `streamsim theory` does not pay for numba
COMMANDS = {
    "run": "streamsim.cli.run",
    "theory": "streamsim.cli.theory",
    "analyze": "streamsim.cli.analyze",
    "plot": "streamsim.cli.plot",
    "scan": "streamsim.cli.scan",
    "converge": "streamsim.cli.converge",
    "validate": "streamsim.cli.validate",
    "bench": "streamsim.cli.bench",
    "compare": "streamsim.cli.compare",
}


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # argparse's own errors: one line, exit 2
        print(f"argument error: {self.prog}: {message} (see {self.prog} --help)", file=sys.stderr)
        raise SystemExit(2)


def build_parser() -> argparse.ArgumentParser:
    from streamsim import __version__
    parser = _Parser(prog="streamsim", description="Relativistic 1D electrostatic PIC for "
                     "counter-streaming pair plasma, with linear theory beside every run.")
    parser.add_argument("--version", action="version", version=f"streamsim {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name, modname in COMMANDS.items():
        mod = importlib.import_module(modname)
        p = sub.add_parser(name, help=mod.HELP, description=mod.HELP)
        mod.add_arguments(p)
        p.set_defaults(_main=mod.main)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "_main", None):
        parser.print_help()
        return 2
    from streamsim.cli.common import report
    try:
        return int(args._main(args) or 0)
    except (Exception, KeyboardInterrupt) as ex:  # noqa: BLE001 - one line, one status each
        return report(ex, args)


if __name__ == "__main__":
    sys.exit(main())
