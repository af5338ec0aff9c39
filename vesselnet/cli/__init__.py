"""The ``vesselnet`` command line: a thin shell over the library.

Each command lives in its own module of this package with ``add_parser``
and ``run``; heavy imports happen inside ``run`` so ``vesselnet --help``
stays quick.  Exit status: 0 success, 2 invalid input (one paragraph on
standard error, no traceback), 1 numerical failure.
"""

from __future__ import annotations

import argparse
import importlib
import os
import sys

COMMANDS = (
    "demo",
    "check",
    "solve",
    "compare",
    "pulse",
    "windkessel",
    "view",
    "grafts",
    "generate",
    "calibrate",
    "sensitivity",
    "uncertainty",
    "sweep",
    "convert",
)
"""Modules of this package that define a command, in help order."""

EXIT_OK, EXIT_FAILURE, EXIT_INPUT = 0, 1, 2


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every command registered."""
    parser = argparse.ArgumentParser(
        prog="vesselnet",
        description="Pressure and flow in branching blood-vessel networks. A research and "
                    "planning aid, not a medical device.")
    parser.add_argument("--version", action="version", version=f"%(prog)s {_version()}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS:
        importlib.import_module(f"{__name__}.{name}").add_parser(sub)
    return parser


def _version() -> str:
    try:
        from importlib.metadata import version

        return version("vesselnet")
    except Exception:  # not installed: running from a source tree
        return "unknown"


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the exit status."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if not args.command:
        parser.print_help()
        return EXIT_INPUT
    from ..errors import NetworkSpecError, SolveError, UnitError

    try:
        return int(args.run(args) or EXIT_OK)
    except (NetworkSpecError, UnitError) as exc:
        _error(f"invalid input:\n{exc}")
        return EXIT_INPUT
    except SolveError as exc:
        _error(f"numerical failure: {exc}")
        return EXIT_FAILURE
    except FileNotFoundError as exc:
        _error(f"{exc.filename or ''}: file not found; check the path".lstrip(": ")
               if exc.filename else str(exc))
        return EXIT_INPUT
    except KeyboardInterrupt:
        _error("interrupted; no output file was left half-written")
        return 130
    except BrokenPipeError:
        return EXIT_OK
    except Exception as exc:  # a bug: say so in one paragraph, traceback on request
        if os.environ.get("VESSELNET_DEBUG"):
            raise
        _error(f"internal error ({type(exc).__name__}: {exc}). This is a bug in vesselnet; "
               "rerun with VESSELNET_DEBUG=1 for the details and report it.")
        return EXIT_FAILURE


def _error(text: str) -> None:
    print(f"vesselnet: {text}", file=sys.stderr)
