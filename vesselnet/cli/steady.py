"""Shared pieces of the steady-solve commands."""

from __future__ import annotations

import sys


def emit(text: str) -> None:
    """Print a report on standard output."""
    sys.stdout.write(text if text.endswith("\n") else text + "\n")


def print_warnings(warnings) -> None:
    """Warnings go to standard error so ``--json`` output stays clean."""
    for w in warnings:
        print(f"vesselnet: warning: {w}", file=sys.stderr)
