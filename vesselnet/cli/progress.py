"""A progress bar on standard error: redrawn on a terminal, plain lines otherwise.

On a terminal the bar is redrawn in place (at most ten times a second);
when standard error is a file or a pipe (a batch job's log) a plain line is
written at every tenth of the work and at the end, so logs stay short and
readable.

Examples
--------
>>> import io
>>> log = io.StringIO()
>>> bar = ProgressBar(4, "uncertainty", stream=log, clock=iter([0.0, 1.0, 2.0, 3.0, 4.0, 5.0]).__next__)
>>> for done in range(1, 5):
...     bar(done, 4)
>>> bar.close()
>>> print(log.getvalue(), end="")
uncertainty: 1/4 samples (25 %), 1.0/s, 3 s left
uncertainty: 2/4 samples (50 %), 1.0/s, 2 s left
uncertainty: 3/4 samples (75 %), 1.0/s, 1 s left
uncertainty: 4/4 samples (100 %), 1.0/s, 4 s in all
"""

from __future__ import annotations

import sys
import time

WIDTH = 28
REDRAW_S = 0.1


class ProgressBar:
    """Callable ``bar(done, total)``; call :meth:`close` when the work ends.

    Parameters
    ----------
    total : int
        Items in all.
    label : str
        What is running (the command name).
    stream : file, optional
        Default standard error.
    unit : str
        What the items are called.
    clock : callable, optional
        Seconds, monotonic (for tests).
    """

    def __init__(self, total: int, label: str, *, stream=None, unit: str = "samples", clock=None):
        self.total, self.label, self.unit = int(total), label, unit
        self.stream = stream if stream is not None else sys.stderr
        isatty = getattr(self.stream, "isatty", None)
        self.tty = bool(isatty and isatty())
        self.clock = clock or time.monotonic
        self.start = self.clock()
        self.last_draw = -float("inf")
        self.last_tenth = 0
        self.drawn = False
        self.done = 0

    def __call__(self, done: int, total: int | None = None) -> None:
        if total is not None:
            self.total = int(total)
        self.done = done
        now = self.clock()
        if self.tty:
            if now - self.last_draw < REDRAW_S and done < self.total:
                return
            self.last_draw = now
            self.stream.write("\r" + self._bar(now))
            self.stream.flush()
            self.drawn = True
            return
        tenth = int(10 * done / max(self.total, 1))
        if tenth > self.last_tenth or done >= self.total:
            self.last_tenth = tenth
            self.stream.write(self._line(now) + "\n")
            self.stream.flush()

    def _rate(self, now: float) -> float:
        return self.done / max(now - self.start, 1e-9)

    def _tail(self, now: float) -> str:
        rate = self._rate(now)
        if self.done >= self.total:
            return f"{rate:.1f}/s, {now - self.start:.0f} s in all"
        left = (self.total - self.done) / rate if rate > 0 else float("inf")
        return f"{rate:.1f}/s, {left:.0f} s left" if left != float("inf") else f"{rate:.1f}/s"

    def _line(self, now: float) -> str:
        pct = 100 * self.done / max(self.total, 1)
        return (f"{self.label}: {self.done}/{self.total} {self.unit} ({pct:.0f} %), "
                f"{self._tail(now)}")

    def _bar(self, now: float) -> str:
        fraction = self.done / max(self.total, 1)
        filled = int(round(WIDTH * fraction))
        bar = "#" * filled + "." * (WIDTH - filled)
        return (f"{self.label} [{bar}] {100 * fraction:3.0f}% {self.done}/{self.total} "
                f"{self.unit}, {self._tail(now)}  ")

    def close(self) -> None:
        """End the bar's line on a terminal."""
        if self.tty and self.drawn:
            self.stream.write("\n")
            self.stream.flush()
