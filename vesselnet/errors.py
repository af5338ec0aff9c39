"""Exception types of vesselnet.

Every error raised on purpose derives from :class:`VesselnetError` and from
the matching built-in, so callers may catch either.  One wording throughout:
``where: what, got what; how to fix``.

Examples
--------
>>> err = NetworkSpecError([Problem("leg.yaml", 14, 5, "vessels[3] 'sfa'",
...                                 "radius must be > 0, got -2 mm", "give a positive radius")])
>>> print(err)
leg.yaml:14:5 vessels[3] 'sfa': radius must be > 0, got -2 mm; give a positive radius
>>> isinstance(err, ValueError)
True
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Problem:
    """One thing wrong with an input, located as precisely as known.

    Parameters
    ----------
    file : str
        File name as the user gave it ('' when not from a file).
    line, column : int
        1-based position; 0 when unknown.
    item : str
        The offending item, for example ``vessels[3] 'sfa'``.
    message : str
        What is wrong and what was found.
    fix : str
        How to fix it ('' when there is no obvious fix).
    """

    file: str
    line: int
    column: int
    item: str
    message: str
    fix: str = ""

    def __str__(self) -> str:
        where = self.file or "<input>"
        if self.line:
            where += f":{self.line}"
            if self.column:
                where += f":{self.column}"
        text = f"{where} {self.item}: {self.message}" if self.item else f"{where}: {self.message}"
        text = f"{text}; {self.fix}" if self.fix else text
        return text.translate(_ESCAPES)  # one line, no terminal escapes from hostile input


_ESCAPES = {c: f"\\x{c:02x}" for c in (*range(32), *range(127, 160))}


class VesselnetError(Exception):
    """Base class of all vesselnet errors."""


class NetworkSpecError(VesselnetError, ValueError):
    """An input file or value breaks the format's rules.

    Holds every problem found, so that all can be reported together.
    """

    def __init__(self, problems: list[Problem] | tuple[Problem, ...]):
        self.problems = tuple(problems)
        super().__init__("\n".join(str(p) for p in self.problems))

    @property
    def ids(self) -> tuple[str, ...]:
        """The offending items, in the order reported."""
        return tuple(p.item for p in self.problems)


class UnitError(VesselnetError, ValueError):
    """A quantity string could not be read: unknown unit, wrong kind, not a number."""


class TopologyError(NetworkSpecError):
    """The network graph cannot be solved: a part with no pressure reference, self-loops."""


class SolveError(VesselnetError, ArithmeticError):
    """A numerical failure: no convergence, a singular system, lost accuracy.

    Parameters
    ----------
    message : str
        What failed, with the worst residual and where.
    ids : tuple of str
        The items where it failed worst.
    """

    def __init__(self, message: str, ids: tuple[str, ...] = ()):
        self.ids = tuple(ids)
        super().__init__(message)
