"""Long runs that keep what they finished when interrupted.

A sweep, a Monte Carlo run or a scenario batch may take minutes; when the
user presses Ctrl-C, the items already solved are results too.  The
contract for such a run:

1. compute items in order with :func:`run_keeping_finished`, which stops
   at an interrupt and returns the finished results with ``complete=False``
   (:func:`vesselnet.engine.run_chunked` instead raises :class:`Interrupted`
   carrying the finished items as ``partial``);
2. write the outputs of the finished items, each file atomically
   (:func:`vesselnet.writers.atomic_write_many`), marked as partial (for
   example a ``partial`` field in JSON, ``samples.partial.csv`` as name);
3. raise :class:`Interrupted` naming how far it got and where the results
   are; the command line prints that one line and exits with status 130.

Examples
--------
>>> def solve_one(k):
...     if k == 3:
...         raise KeyboardInterrupt        # Ctrl-C while item 3 runs
...     return k * k
>>> run = run_keeping_finished(range(6), solve_one)
>>> run.results, run.complete, run.done
([0, 1, 4], False, 3)
>>> print(Interrupted(run.done, 6, "scenarios", kept=["out/compare.partial.json"]))
interrupted after 3 of 6 scenarios; the finished results are in out/compare.partial.json
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field


class Interrupted(KeyboardInterrupt):
    """A long run stopped by the user, with what it finished.

    A ``KeyboardInterrupt``, so code that does not know it still stops.

    Parameters
    ----------
    done, total : int
        Items finished, items asked for.
    unit : str
        What the items are ('samples', 'scenarios', ...).
    kept : sequence of str
        Files holding the finished results (none when nothing was written).
    partial : object, optional
        The finished results themselves, for the caller to write (for
        :func:`vesselnet.engine.run_chunked`: the joined arrays of items
        ``0 .. done-1``).
    """

    def __init__(self, done: int, total: int, unit: str = "items", kept: Sequence[str] = (),
                 partial=None):
        self.done, self.total, self.unit, self.kept = int(done), int(total), unit, tuple(map(str, kept))
        self.partial = partial
        if not self.done:
            where = "; nothing was finished, no output was written"
        elif self.kept:
            where = f"; the finished results are in {', '.join(self.kept)}"
        else:
            where = "; the finished results were not kept (this run writes none when interrupted)"
        super().__init__(f"interrupted after {self.done} of {self.total} {unit}{where}")

    def kept_in(self, kept: Sequence[str], unit: str | None = None) -> "Interrupted":
        """The same interruption, naming the files that now hold the finished results."""
        return Interrupted(self.done, self.total, unit or self.unit, kept, self.partial)


@dataclass
class PartialRun:
    """Results of the items finished before an interrupt (all of them when ``complete``)."""

    results: list = field(default_factory=list)
    complete: bool = True

    @property
    def done(self) -> int:
        """Number of items finished."""
        return len(self.results)


def run_keeping_finished(items: Iterable, work: Callable) -> PartialRun:
    """``work(item)`` for each item in order, stopping cleanly at Ctrl-C.

    Parameters
    ----------
    items : iterable
    work : callable
        Computes one item's result.  Other exceptions propagate.

    Returns
    -------
    PartialRun
        The results in item order; ``complete`` is False when interrupted
        (the item running at the interrupt is not included).
    """
    run = PartialRun()
    try:
        for item in items:
            run.results.append(work(item))
    except KeyboardInterrupt:
        run.complete = False
    return run
