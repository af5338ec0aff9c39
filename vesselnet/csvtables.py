"""CSV tables of vessels, beds and nodes for large networks (SPEC section 2).

One item a row; the header names the columns, with the unit in brackets
(``length[cm]``); a column without a unit uses the file's default.  Numbers
are converted a whole column at a time.

Examples
--------
>>> import pathlib, tempfile
>>> path = pathlib.Path(tempfile.mkdtemp()) / "v.csv"
>>> _ = path.write_text("id,from,to,length[mm],radius[um]\\nv1,a,b,5,40\\n")
>>> table = read_table(path, "vessels", {"length": "cm", "radius": "mm"})
>>> table.columns["length_m"], table.columns["radius_in_m"], table.problems
(array([0.005]), array([4.e-05]), [])
"""

from __future__ import annotations

import csv
import io
import re
import reprlib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import Problem, UnitError
from .fields import has_control, near_miss
from .units import factor

# column name -> (model column, kind, rule); rule: "positive", "any", "fraction", "text"
SPECS: dict[str, dict[str, tuple[str, str, str]]] = {
    "vessels": {
        "id": ("id", "", "text"), "from": ("from", "", "text"), "to": ("to", "", "text"),
        "length": ("length_m", "length", "positive"),
        "radius": ("radius_m", "radius", "positive"),
        "diameter": ("diameter_m", "radius", "positive"),
        "radius_in": ("radius_in_m", "radius", "positive"),
        "radius_out": ("radius_out_m", "radius", "positive"),
        "wall_thickness": ("wall_thickness_m", "radius", "positive"),
        "wall_modulus": ("wall_modulus_pa", "modulus", "positive"),
        "tags": ("tags", "", "text"),
    },
    "beds": {
        "id": ("id", "", "text"), "node": ("node", "", "text"),
        "resistance": ("resistance_pa_s_m3", "resistance", "positive"),
        "outflow_pressure": ("outflow_pressure_pa", "pressure", "any"),
        "outflow_node": ("outflow_node", "", "text"),
        "share": ("share", "fraction", "fraction"),
    },
    "nodes": {
        "id": ("id", "", "text"), "pressure": ("pressure_pa", "pressure", "any"),
        "inflow": ("inflow_m3_s", "flow", "any"), "x": ("x", "length", "any"),
        "y": ("y", "length", "any"), "z": ("z", "length", "any"),
        "target_pressure": ("target_pressure_pa", "pressure", "any"),
        "hematocrit": ("hematocrit", "fraction", "fraction"),
    },
}
REQUIRED = {"vessels": ("id", "from", "to", "length"), "beds": ("id", "node", "resistance"),
            "nodes": ("id",)}
MAX_PROBLEMS_PER_COLUMN = 5
_HEADER = re.compile(r"\s*([A-Za-z_][A-Za-z_0-9]*)\s*(?:\[\s*([^\]]*?)\s*\])?\s*")


@dataclass
class Table:
    """What a table held: model columns in SI, vessel tags by row, problems found."""

    columns: dict[str, object] = field(default_factory=dict)
    tags: dict[str, list[int]] = field(default_factory=dict)
    problems: list[Problem] = field(default_factory=list)


def read_table(path, section: str, units: dict[str, str], *, shown_as: str | None = None) -> Table:
    """Read a ``vessels``, ``beds`` or ``nodes`` CSV table into SI columns.

    Parameters
    ----------
    path : Path
        The CSV file.
    section : {'vessels', 'beds', 'nodes'}
    units : dict
        Default unit per kind, for columns whose header gives none.
    shown_as : str, optional
        File name used in messages (default: ``path``).

    Returns
    -------
    Table
        Empty columns and the problems when the file cannot be used.
    """
    name = shown_as or str(path)
    out = Table()

    def problem(line, item, message, fix=""):
        out.problems.append(Problem(name, line, 0, item, message, fix))

    try:
        with open(Path(path), newline="", encoding="utf-8-sig") as handle:
            text = handle.read()
        split = _split_plain(text)
        rows = None if split else [r for r in csv.reader(io.StringIO(text)) if r and any(c.strip() for c in r)]
    except (OSError, UnicodeDecodeError, csv.Error, ValueError) as exc:
        problem(0, "", f"cannot read the table: {getattr(exc, 'strerror', None) or exc}",
                "check the path (relative to the YAML file) and that it is UTF-8 CSV")
        return out
    # unquoted plain tables break lines only between rows: one C-level test for every cell
    printable = bool(split) and text.replace("\r\n", "\n").replace("\n", "").isprintable()
    if split is None and not rows:
        problem(1, "", "the table is empty", "give a header line and one row per item")
        return out
    spec = SPECS[section]
    header, body = split if split else (rows[0], rows[1:])
    names, col_units = [], []
    for k, cell in enumerate(header):
        match = _HEADER.fullmatch(cell)
        if not match or match.group(1) not in spec:
            key = match.group(1) if match else cell
            problem(1, f"column {k + 1}", f"unknown column '{cell}'",
                    near_miss(key, spec) or "columns: " + ", ".join(spec))
            names.append(None)
        else:
            names.append(match.group(1))
        col_units.append(match.group(2) if match else None)
    for req in REQUIRED[section]:
        if req not in names:
            problem(1, "header", f"missing column '{req}'")
    if section == "vessels" and not ({"radius", "diameter"} & set(names)
                                     or {"radius_in", "radius_out"} <= set(names)):
        problem(1, "header", "missing column 'radius' (or 'diameter')")
    if split:
        cells = body
    else:
        bad_rows = [i for i, r in enumerate(body) if len(r) != len(header)]
        for i in bad_rows[:MAX_PROBLEMS_PER_COLUMN]:
            problem(i + 2, f"row {i + 1}", f"has {len(body[i])} cells, the header has {len(header)}")
        if out.problems:
            return out
        cells = list(zip(*body)) if body else [()] * len(header)
    if out.problems:
        return out
    for k, col_name in enumerate(names):
        target, kind, rule = spec[col_name]
        raw = cells[k]
        if rule == "text":
            out.columns[target] = texts = [c.strip() for c in raw] if not split or split.padded \
                else list(raw)
            needed = col_name in REQUIRED[section]
            if printable:      # no control character anywhere: look for empty cells only
                bad = [i for i, t in enumerate(texts) if not t] if needed and "" in texts else []
            else:
                bad = [i for i, t in enumerate(texts) if has_control(t) or needed and not t]
            for i in bad[:MAX_PROBLEMS_PER_COLUMN]:
                what = "must not be empty" if not texts[i] else \
                    f"must not contain control characters, got {texts[i]!r}"
                problem(i + 2, f"row {i + 1} {col_name}", what)
            continue
        unit = col_units[k]
        try:
            scale = factor(unit, kind) if unit else factor(units[kind], kind) \
                if kind != "fraction" else 1.0
        except UnitError as exc:
            problem(1, f"column '{header[k]}'", str(exc))
            continue
        values = _numbers(raw, lambda i, text, fix="": problem(
            i + 2, f"row {i + 1} {col_name}", f"not a number: {reprlib.repr(text)}", fix))
        if values is None:
            continue
        with np.errstate(over="ignore"):  # overflow gives inf, refused below
            values = values * scale
        values.flags.writeable = False       # a fresh column: the model need not copy it
        bad = {"positive": ~(np.isfinite(values) & (values > 0)),
               "any": np.isinf(values),
               "fraction": ~((values >= 0) & (values <= 1)) & ~np.isnan(values)}[rule]
        for i in np.flatnonzero(bad)[:MAX_PROBLEMS_PER_COLUMN]:
            need = {"positive": "> 0", "any": "finite", "fraction": "between 0 and 1"}[rule]
            problem(i + 2, f"row {i + 1} {col_name}", f"must be {need}, got {raw[i].strip()!r}")
        out.columns[target] = values
    _finish(section, out)
    return out


def _split_plain(text: str):
    """Header and columns of a table without quotes and with full rows, by ``str.split``.

    Returns None (the caller then uses the csv module, which also locates
    bad rows) when the text has quotes, blank lines, a row of the wrong
    width or no data.
    """
    if '"' in text:
        return None
    text = text.replace("\r\n", "\n")
    if not text.endswith("\n"):
        text += "\n"
    first = text.find("\n")
    header = text[:first].split(",")
    body = text[first + 1:]
    n_cols, n_rows = len(header), body.count("\n")
    if not n_rows or not header[0].strip() or "\n\n" in body or body.startswith("\n") \
            or "\n" + "," * (n_cols - 1) + "\n" in "\n" + body:
        return None
    if len(body) > csv.field_size_limit() and max(map(len, body.split("\n"))) > csv.field_size_limit():
        return None  # a cell may exceed the csv module's field limit: let it say so
    cells = body[:-1].replace("\n", ",").split(",")
    if len(cells) != n_rows * n_cols:
        return None
    return _Split(header, [cells[k::n_cols] for k in range(n_cols)],
                  " " in body or "\t" in body or "\r" in body)


class _Split(tuple):
    """(header, columns) of a plainly split table; ``padded`` when cells may need stripping."""

    def __new__(cls, header, columns, padded):
        self = super().__new__(cls, (header, columns))
        self.padded = padded
        return self


def _numbers(raw, report) -> np.ndarray | None:
    """Floats of a column; blanks become NaN; ``report(row, text)`` for bad cells."""
    try:  # the fast path: every cell a number (a typed 'nan' falls through to be refused)
        values = np.fromiter(map(float, raw), dtype=float, count=len(raw))
        if not np.isnan(values).any():
            return values
    except ValueError:
        pass
    texts = [c.strip() or "nan" for c in raw]
    typed_nan = [i for i, c in enumerate(raw) if c.strip().lower().lstrip("+-") == "nan"]
    for i in typed_nan[:MAX_PROBLEMS_PER_COLUMN]:
        report(i, raw[i].strip(), "leave the cell empty for no value")
    if typed_nan:
        return None
    try:
        values = np.array(texts, dtype=float)
    except ValueError:
        values, failed = np.empty(len(texts)), 0
        for i, t in enumerate(texts):
            try:
                values[i] = float(t)
            except ValueError:
                if failed < MAX_PROBLEMS_PER_COLUMN:
                    report(i, t)
                failed += 1
        return None
    return values


def _finish(section: str, out: Table) -> None:
    """Derive model columns: radii from diameter, positions, tags."""
    cols = out.columns
    if section == "vessels":
        if "diameter_m" in cols:
            cols["radius_m"] = cols.pop("diameter_m") / 2
        if "radius_m" in cols:
            r = cols.pop("radius_m")
            cols.setdefault("radius_in_m", r)
            cols.setdefault("radius_out_m", r)
        for i, text in enumerate(cols.pop("tags", ())):
            for tag in filter(None, (t.strip() for t in text.split(";"))):
                out.tags.setdefault(tag, []).append(i)
        cols["line"] = np.arange(2, len(cols["id"]) + 2)
    elif section == "nodes":
        n = len(cols["id"])
        xyz = [cols.pop(a, np.full(n, np.nan)) for a in ("x", "y", "z")]
        xyz[2] = np.where(np.isnan(xyz[2]) & ~np.isnan(xyz[0]), 0.0, xyz[2])
        cols["position_m"] = np.column_stack(xyz) if n else np.empty((0, 3))
        cols["line"] = np.arange(2, n + 2)
    else:
        if "outflow_node" in cols:
            cols["outflow_node"] = [x or None for x in cols["outflow_node"]]
        cols["line"] = np.arange(2, len(cols["id"]) + 2)
