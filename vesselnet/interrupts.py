"""Long runs that keep what they finished when interrupted.

A sweep, a Monte Carlo run or a scenario batch may take minutes; when the
user presses Ctrl-C, the items already solved are results too.  The
contract for such a run:

1. compute items in order with :func:`run_keeping_finished`, which stops
   at an interrupt and returns the finished results with ``complete=False``;
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
        Files holding the finished results ('' when nothing was written).
    """

    def __init__(self, done: int, total: int, unit: str = "items", kept: Sequence[str] = ()):
        self.done, self.total, self.unit, self.kept = int(done), int(total), unit, tuple(map(str, kept))
        where = (f"; the finished results are in {', '.join(self.kept)}" if self.kept and self.done
                 else "; nothing was finished, no output was written")
        super().__init__(f"interrupted after {self.done} of {self.total} {unit}{where}")


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
