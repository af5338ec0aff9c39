"""Network files out by patching the original text: comments and layout survive.

A calibrated network differs from its source only in some values (bed
resistances).  Rather than writing a new file from the model, the source
text is kept and those values are replaced where they stand; the reader
gives the line and column of every value.  Beds read from a CSV table are
written to a new table beside the output, and table paths are rewritten
relative to the output's folder.

Examples
--------
>>> text = "beds:\\n  - {id: a, node: n, resistance: 40}   # kept\\n"
>>> where = yamlread.load_text(text, "x.yaml")["beds"][0].where("resistance")
>>> where
(2, 34)
>>> print(replace_values(text, [(*where, '"12.5 mmHg*s/mL"')]), end="")
beds:
  - {id: a, node: n, resistance: "12.5 mmHg*s/mL"}   # kept
"""

from __future__ import annotations

import csv
import io
import os
from collections.abc import Sequence
from pathlib import Path

import numpy as np

from . import yamlread
from .units import MMHG_PA
from .writers import atomic_write, spreadsheet_safe

RESISTANCE_UNIT = "mmHg*s/mL"
RESISTANCE_FACTOR = MMHG_PA * 1e6
DIGITS = 12
"""Significant digits of written values: the file reproduces targets to about 1e-12."""


def replace_values(text: str, edits: Sequence[tuple[int, int, str]]) -> str:
    """Replace scalar values that start at (line, column) by new text.

    Parameters
    ----------
    text : str
        YAML text.
    edits : sequence of (line, column, new_text)
        1-based positions of the first character of each value (as
        :meth:`vesselnet.yamlread.LocatedDict.where` reports them); the value
        is a quoted string or a plain scalar that ends before ``,``, ``]``,
        ``}``, a comment or the end of the line.

    Returns
    -------
    str
        The text with each value replaced.
    """
    lines = text.splitlines(keepends=True)
    by_line: dict[int, list[tuple[int, str]]] = {}
    for line, column, new in edits:
        by_line.setdefault(line, []).append((column, new))
    for line, items in by_line.items():
        row = lines[line - 1]
        for column, new in sorted(items, reverse=True):
            start = column - 1
            end = _scalar_end(row, start)
            row = row[:start] + new + row[end:]
        lines[line - 1] = row
    return "".join(lines)


def _scalar_end(row: str, start: int) -> int:
    """Index just past the scalar starting at ``row[start]``."""
    quote = row[start] if start < len(row) else ""
    if quote in ("'", '"'):
        i = start + 1
        while i < len(row):
            if quote == '"' and row[i] == "\\":
                i += 2
                continue
            if row[i] == quote:
                if quote == "'" and row[i + 1: i + 2] == "'":
                    i += 2
                    continue
                return i + 1
            i += 1
        return len(row.rstrip("\r\n"))
    i = start
    while i < len(row) and row[i] not in ",]}\r\n" and not (row[i] == "#" and row[i - 1] in " \t"):
        i += 1
    while i > start and row[i - 1] in " \t":
        i -= 1
    return i


def resistance_text(value_pa_s_m3: float) -> str:
    """A resistance as a quoted YAML value with its unit.

    >>> resistance_text(133.322387415e6 * 18.5)
    '"18.5 mmHg*s/mL"'
    """
    return f'"{value_pa_s_m3 / RESISTANCE_FACTOR:.{DIGITS}g} {RESISTANCE_UNIT}"'


def write_network_with_beds(source, output, network, changed: np.ndarray, *,
                            header: str = "") -> list[Path]:
    """Write ``source`` to ``output`` with new bed resistances (and Windkessel proximal parts).

    Parameters
    ----------
    source : str or Path
        The network file the beds were read from.
    output : str or Path
        The file to write (atomically).  Beds from a CSV table go to
        ``<output stem>_beds.csv`` beside it.
    network : vesselnet.model.Network
        The network read from ``source`` with new bed values; beds are in
        the order the reader produced them (YAML items first, then table rows).
    changed : ndarray of bool
        Beds whose values are to be written.
    header : str
        Comment lines put at the top (each starting with ``#``).

    Returns
    -------
    list of Path
        Files written.
    """
    source, output = Path(source), Path(output)
    beds = network.beds
    text = source.read_text(encoding="utf-8")
    doc = yamlread.load_text(text, str(source))
    items = doc.get("beds") or []
    edits = []
    for i, item in enumerate(items):
        if not changed[i]:
            continue
        edits.append((*item.where("resistance"), resistance_text(beds.resistance_pa_s_m3[i])))
        wk = item.get("windkessel")
        if isinstance(wk, dict) and "proximal" in wk:
            edits.append((*wk.where("proximal"), resistance_text(beds.windkessel_proximal_pa_s_m3[i])))
    written = []
    out_dir = output.parent
    for key in ("vessels_table", "nodes_table", "beds_table"):
        if key not in doc:
            continue
        if key == "beds_table" and changed[len(items):].any():
            table = out_dir / f"{output.stem}_beds.csv"
            atomic_write(table, beds_csv(network, np.arange(len(items), len(beds)),
                                         source.parent / str(doc[key])))
            written.append(table)
            edits.append((*doc.where(key), _quoted(table.name)))
        elif out_dir.resolve() != source.parent.resolve():
            moved = os.path.relpath(source.parent / str(doc[key]), out_dir)
            edits.append((*doc.where(key), _quoted(Path(moved).as_posix())))
    new_text = replace_values(text, edits)
    atomic_write(output, header + new_text)
    return [output] + written


def _quoted(text: str) -> str:
    return '"' + text.replace("\\", "\\\\").replace('"', '\\"') + '"'


def beds_csv(network, rows: np.ndarray, original: Path) -> str:
    """A beds table (SPEC section 2) of bed ``rows`` of ``network``.

    Resistances are written in mmHg*s/mL, outflow pressures in mmHg; the
    optional ``share`` column is kept when the ``original`` table had one.
    """
    with open(original, newline="", encoding="utf-8-sig") as handle:
        header = next(csv.reader(handle), [])
    has_share = any(h.strip().split("[")[0].strip() == "share" for h in header)
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    columns = ["id", "node", f"resistance[{RESISTANCE_UNIT}]", "outflow_pressure[mmHg]", "outflow_node"]
    writer.writerow(columns + (["share"] if has_share else []))
    beds, node_ids = network.beds, network.nodes.ids
    for i in rows:
        into = beds.outflow_node[i]
        p_out = "" if into >= 0 else _number(beds.outflow_pressure_pa[i] / MMHG_PA)
        row = [spreadsheet_safe(beds.ids[i]), spreadsheet_safe(node_ids[beds.node[i]]),
               _number(beds.resistance_pa_s_m3[i] / RESISTANCE_FACTOR), p_out,
               spreadsheet_safe(node_ids[into]) if into >= 0 else ""]
        if has_share:
            row.append("" if np.isnan(beds.share[i]) else _number(beds.share[i]))
        writer.writerow(row)
    return buffer.getvalue()


def _number(value: float) -> str:
    return repr(float(f"{value:.{DIGITS}g}"))
