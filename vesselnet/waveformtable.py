"""Tabulated periodic waveforms (one cardiac cycle) from CSV files.

A waveform table has two columns, ``time`` and the quantity (``flow`` or
``pressure``), with units in the header as in the input tables
(``time[ms],flow[mL/s]``; a header without a unit uses the file's default).
Times start at 0 and increase strictly.  The last row closes the cycle: its
time is the period T (its value should repeat the first row's; a different
value is taken as given, a jump at the end of the cycle).  The samples are
interpolated linearly onto :data:`TABLE_SAMPLES` evenly spaced times
t_k = k T / N, the form in which a network holds waveforms (SPEC 7).

Examples
--------
>>> import pathlib, tempfile
>>> path = pathlib.Path(tempfile.mkdtemp()) / "inflow.csv"
>>> _ = path.write_text("time[s],flow[mL/s]\\n0,0\\n0.1,300\\n0.3,0\\n0.8,0\\n")
>>> table = read_waveform_table(path, "flow", {"time": "s", "flow": "mL/min"})
>>> print(table.period_s, table.problems, round(table.samples.mean() * 1e6, 3))
0.8 [] 56.25
"""

from __future__ import annotations

import csv
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import Problem, UnitError
from .units import factor

TABLE_SAMPLES = 1024
"""Evenly spaced samples a tabulated waveform is interpolated onto."""

_HEADER = re.compile(r"\s*([A-Za-z_][A-Za-z_0-9]*)\s*(?:\[\s*([^\]]*?)\s*\])?\s*")


@dataclass
class WaveformTable:
    """A waveform read from a table: ``period_s``, SI ``samples`` (evenly spaced), problems."""

    period_s: float = float("nan")
    samples: np.ndarray = field(default_factory=lambda: np.zeros(0))
    problems: list[Problem] = field(default_factory=list)


def read_waveform_table(path, kind: str, units: dict[str, str], *, shown_as: str | None = None,
                        n_samples: int = TABLE_SAMPLES) -> WaveformTable:
    """Read a ``time,<kind>`` CSV table of one cycle into evenly spaced SI samples.

    Parameters
    ----------
    path : str or Path
    kind : {'flow', 'pressure'}
        The second column's name and unit kind.
    units : dict
        Default unit per kind (``time`` and ``kind``) for headers without one.
    shown_as : str, optional
        File name used in messages (default ``path``).
    n_samples : int
        Evenly spaced samples to interpolate onto.

    Returns
    -------
    WaveformTable
        With problems (located by file and line) instead of values when the
        table cannot be used.
    """
    name = shown_as or str(path)
    out = WaveformTable()

    def problem(line, message, fix=""):
        out.problems.append(Problem(name, line, 0, f"{kind} waveform", message, fix))
        return out

    try:
        with open(Path(path), newline="", encoding="utf-8-sig") as handle:
            rows = [(k + 1, r) for k, r in enumerate(csv.reader(handle)) if r and any(c.strip() for c in r)]
    except (OSError, UnicodeDecodeError, csv.Error) as exc:
        return problem(0, f"cannot read the waveform table: {getattr(exc, 'strerror', None) or exc}",
                       "check the path (relative to the YAML file) and that it is UTF-8 CSV")
    if len(rows) < 3:
        return problem(1, f"a waveform table needs a header and at least 2 rows, got {max(len(rows) - 1, 0)}",
                       f"give a header 'time,{kind}' and one row per sample over one cycle")
    header_line, header = rows[0]
    wanted = ("time", kind)
    scales = []
    matches = [_HEADER.fullmatch(cell) for cell in header]
    names = [m.group(1) if m else cell.strip() for m, cell in zip(matches, header)]
    if names != list(wanted):
        return problem(header_line, f"the columns must be 'time,{kind}', got '{','.join(header)}'",
                       f"use the header 'time[s],{kind}[unit]'")
    for col, m in zip(wanted, matches):
        unit = m.group(2) or units.get(col)
        try:
            scales.append(factor(unit, col))
        except UnitError as exc:
            return problem(header_line, str(exc))
    values = []
    for line, row in rows[1:]:
        try:
            if len(row) != 2:
                raise ValueError
            values.append((float(row[0]), float(row[1]), line))
        except ValueError:
            return problem(line, f"expected two numbers, got {','.join(row)!r}", "one time and one value a row")
    t = np.array([v[0] for v in values]) * scales[0]
    y = np.array([v[1] for v in values]) * scales[1]
    lines = [v[2] for v in values]
    if not np.isfinite(t).all() or not np.isfinite(y).all():
        return problem(lines[0], "every time and value must be finite")
    if t[0] != 0:
        return problem(lines[0], f"the first time must be 0, got {values[0][0]}",
                       "shift the times so that the cycle starts at 0")
    step = np.diff(t)
    if np.any(step <= 0):
        k = int(np.argmax(step <= 0)) + 1
        return problem(lines[k], f"times must increase, got {values[k][0]} after {values[k - 1][0]}",
                       "sort the rows by time and drop duplicates")
    period = float(t[-1])
    out.period_s = period
    out.samples = np.interp(np.arange(int(n_samples)) * period / int(n_samples), t, y)
    return out
