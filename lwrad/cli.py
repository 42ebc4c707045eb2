"""The ``lwrad`` command line.

Each subcommand lives in its own module ``lwrad/commands/<name>.py`` with
``register(subparsers)``; the command's handler returns an exit code. Errors
in user input print one clear line and exit with status 2.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from lwrad._version import __version__
from lwrad.errors import InputError

__all__ = ["main", "build_parser", "COMMANDS"]

#: subcommand modules, in the order ``lwrad --help`` lists them
COMMANDS = ("demo", "run", "plot", "info", "estimate")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="lwrad",
        description=(
            "Radiation of charged-particle beams from their trajectories (Liénard–Wiechert "
            "fields): spectra, flux and power density, polarization, time-domain fields. "
            "Results are estimates; shielding, radiation safety and thermal design follow "
            "local codes and licensed practice."
        ),
    )
    parser.add_argument("--version", action="version", version=f"lwrad {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS:
        try:
            module = importlib.import_module(f"lwrad.commands.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"lwrad.commands.{name}":
                continue  # command not built yet
            raise
        module.register(sub)
    return parser


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "handler", None):
        parser.print_help()
        return 0
    try:
        return int(args.handler(args) or 0)
    except InputError as exc:
        print(f"lwrad {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"lwrad {args.command}: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
