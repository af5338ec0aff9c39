"""Results out: JSON (SPEC section 5), CSV tables, written atomically.

Values are converted from SI to the display units once, here.  Floats are
written with 10 significant digits so that the same input gives the same
bytes; NaN becomes JSON ``null`` and an empty CSV cell.

Examples
--------
>>> from vesselnet.model import Network
>>> from vesselnet.solve import solve
>>> net = Network.build(nodes={"r": {"pressure_pa": 13332.2}},
...     vessels=[{"id": "a", "from": "r", "to": "t", "length_m": 0.1, "radius_m": 0.002}],
...     beds=[{"id": "organ", "node": "t", "resistance_pa_s_m3": 1.3332e8}])
>>> doc = result_json(solve(net))
>>> doc["beds"][0]["id"], round(doc["beds"][0]["share"], 3), doc["units"]["flow"]
('organ', 1.0, 'mL/min')
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
import tempfile
from pathlib import Path

import numpy as np

from .result import SteadyResult
from .units import DISPLAY_UNITS, from_si
from .walls import volume_summary

FORMAT_VERSION = 1
SIGNIFICANT_DIGITS = 10

# (output name, SI column of the result table, unit kind or None for plain numbers)
NODE_COLUMNS = (("pressure", "pressure_pa", "pressure"), ("inflow", "inflow_m3_s", "flow"))
VESSEL_COLUMNS = (("flow", "flow_m3_s", "flow"), ("pressure_drop", "pressure_drop_pa", "pressure"),
                  ("mean_velocity", "mean_velocity_m_s", "velocity"), ("wss", "wss_pa", "wss"),
                  ("reynolds", "reynolds", None), ("reversed", "reversed", None),
                  ("resistance", "resistance_pa_s_m3", "resistance"),
                  ("viscosity", "viscosity_pa_s", "viscosity"))
BED_COLUMNS = (("flow", "flow_m3_s", "flow"), ("share", "share", None),
               ("pressure", "pressure_pa", "pressure"),
               ("perfusion_pressure", "perfusion_pressure_pa", "pressure"))
EXTRA_KINDS = {"hematocrit": None, "tube_hematocrit": None, "red_cell_flux_m3_s": "flow",
               "red_cell_delivery_m3_s": "flow",
               "lumen_radius_m": "radius", "wall_strain": None, "wall_stress_pa": "stress",
               "volume_m3": "volume"}
SI_SUFFIXES = ("_m3_s", "_m3", "_pa", "_m")
"""Unit suffixes dropped from the names of converted extra columns (``volume_m3`` -> ``volume``)."""


def extra_name(key: str) -> str:
    """Output name of a ``vessel_extra`` column: its SI suffix dropped when it is converted.

    >>> extra_name("red_cell_flux_m3_s"), extra_name("wall_stress_pa"), extra_name("hematocrit")
    ('red_cell_flux', 'wall_stress', 'hematocrit')
    """
    if EXTRA_KINDS.get(key) is None:
        return key
    return next((key[: -len(s)] for s in SI_SUFFIXES if key.endswith(s)), key)


def number(value):
    """A JSON-ready number: 10 significant digits, NaN and infinities as None.

    >>> number(0.1 + 0.2), number(float("nan")), number(np.int64(3))
    (0.3, None, 3)
    """
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    value = float(value)
    if not math.isfinite(value):
        return None
    return float(f"{value:.{SIGNIFICANT_DIGITS}g}") + 0.0  # + 0.0: no negative zero


def units_map() -> dict[str, str]:
    """The ``units`` map of every JSON result: the unit of each kind written."""
    return dict(DISPLAY_UNITS)


def _converted(table: dict[str, np.ndarray], columns) -> dict[str, np.ndarray]:
    out = {}
    for name, key, kind in columns:
        if key not in table:
            continue
        values = table[key]
        out[name] = from_si(values, kind, DISPLAY_UNITS[kind]) if kind else values
    return out


def numbers(values) -> list:
    """:func:`number` of every value of a column, a column at a time (the same values).

    >>> numbers(np.array([0.1 + 0.2, np.nan, -0.0, 2.0 / 3.0]))
    [0.3, None, 0.0, 0.6666666667]
    """
    from .numtext import significant_bytes

    v = np.asarray(values)
    if v.dtype.kind in "biu":
        return v.tolist()
    if v.dtype.kind != "f" or v.ndim != 1:
        return [number(x) for x in v]
    v = v.astype(float) + 0.0                       # no negative zero
    finite = np.isfinite(v)
    texts = significant_bytes(np.where(finite, v, 0.0), SIGNIFICANT_DIGITS)
    out = list(map(float, texts))                   # repr of the rounded float, read back
    for i in np.flatnonzero(~finite).tolist():
        out[i] = None
    return out


class Records(list):
    """Items of one JSON list, each a flat mapping: :func:`dumps` writes them a line each
    without looking inside."""


def _records(ids, fixed: dict[str, object], columns: dict[str, np.ndarray]) -> Records:
    keys = ["id", *fixed, *columns]
    cells = [list(ids), *(list(v) for v in fixed.values()), *(numbers(v) for v in columns.values())]
    return Records(dict(zip(keys, row)) for row in zip(*cells))


def nodes_json(result: SteadyResult) -> list[dict]:
    """The ``nodes`` list: id, pressure (and boundary inflow where nonzero)."""
    table = result.node_table()
    cols = _converted(table, NODE_COLUMNS)
    records = _records(table["id"].tolist(), {}, {"pressure": cols["pressure"]})
    for record, inflow in zip(records, cols["inflow"]):
        if inflow != 0:
            record["inflow"] = number(inflow)
    return records


def _with_extras(cols: dict[str, np.ndarray], extra) -> dict[str, np.ndarray]:
    for key, values in extra.items():
        kind = EXTRA_KINDS.get(key)
        name = extra_name(key)
        cols[name] = from_si(values, kind, DISPLAY_UNITS[kind]) if kind else values
    return cols


def vessel_columns(result: SteadyResult) -> dict[str, np.ndarray]:
    """Per-vessel output columns in display units, extras included."""
    return _with_extras(_converted(result.vessel_table(ids=False), VESSEL_COLUMNS), result.vessel_extra)


def bed_columns(result: SteadyResult) -> dict[str, np.ndarray]:
    """Per-bed output columns in display units, extras included."""
    return _with_extras(_converted(result.bed_table(ids=False), BED_COLUMNS), result.bed_extra)


def vessels_json(result: SteadyResult) -> list[dict]:
    """The ``vessels`` list: id, from, to, flow, pressure drop, velocity, wss, Reynolds, ..."""
    table = result.vessel_table()
    return _records(table["id"].tolist(), {"from": table["from"].tolist(), "to": table["to"].tolist()},
                    vessel_columns(result))


def beds_json(result: SteadyResult) -> list[dict]:
    """The ``beds`` list: id, node, flow, share, pressure, perfusion pressure, extras."""
    table = result.bed_table()
    return _records(table["id"].tolist(), {"node": table["node"].tolist()}, bed_columns(result))


def checks_json(result: SteadyResult) -> dict:
    """The ``checks`` map: mass balance, law residual, iterations, solver, residual history."""
    checks = {"mass_balance": number(result.mass_balance), "law_residual": number(result.law_residual),
              "iterations": int(result.iterations), "solver": result.solver,
              "solver_reason": result.solver_reason,
              "residual_history": [number(h) for h in result.residual_history],
              "condition": number(result.condition_estimate)}
    checks.update({key: _json_ready(value) for key, value in result.extra_checks.items()})
    return checks


def _json_ready(value):
    """Numbers through :func:`number`, lists and mappings item by item, text as is."""
    if isinstance(value, dict):
        return {str(k): _json_ready(v) for k, v in value.items()}
    if isinstance(value, (list, tuple, np.ndarray)):
        return [_json_ready(v) for v in value]
    return value if isinstance(value, str) or value is None else number(value)


def result_json(result: SteadyResult) -> dict:
    """The whole ``solve --json`` document (SPEC section 5)."""
    return {"vesselnet": FORMAT_VERSION, "network": result.network.name, "units": units_map(),
            "inflow": number(from_si(result.inflow_m3_s, "flow", DISPLAY_UNITS["flow"])),
            "nodes": nodes_json(result), "vessels": vessels_json(result), "beds": beds_json(result),
            "checks": checks_json(result), "warnings": list(result.warnings),
            **({"volumes": volumes_json(result)} if "volume_m3" in result.vessel_extra else {})}


def volumes_json(result: SteadyResult) -> dict:
    """The ``volumes`` map: blood volume of the vessels, total and per tag (display units)."""
    summary = volume_summary(result)
    unit = DISPLAY_UNITS["volume"]

    def entry(part):
        return {"volume": number(from_si(part["volume_m3"], "volume", unit)),
                "share": number(part["share"])}

    return {"total": number(from_si(summary["total_m3"], "volume", unit)),
            "unstressed": number(from_si(summary["unstressed_m3"], "volume", unit)),
            "stressed": number(from_si(summary["stressed_m3"], "volume", unit)),
            "by_tag": {tag: entry(part) for tag, part in summary["by_tag"].items()},
            "untagged": entry(summary["untagged"])}


def dumps(document) -> str:
    """JSON text with a fixed layout (same input, same bytes): one item a line.

    >>> print(dumps({"a": 1, "items": [{"id": "x", "v": 2.5}]}))
    {
     "a": 1,
     "items": [
      {"id": "x", "v": 2.5}
     ]
    }
    <BLANKLINE>
    """
    return _dump(document, 0) + "\n"


_ENCODER = json.JSONEncoder(ensure_ascii=False, allow_nan=False)


def _dump(value, depth: int) -> str:
    pad = " " * (depth + 1)
    if isinstance(value, Records) and value:
        return "[\n" + ",\n".join(pad + line for line in map(_ENCODER.encode, value)) + "\n" \
            + " " * depth + "]"
    if isinstance(value, dict) and any(isinstance(v, (dict, list)) for v in value.values()):
        items = [f"{pad}{json.dumps(str(k), ensure_ascii=False)}: {_dump(v, depth + 1)}"
                 for k, v in value.items()]
        return "{\n" + ",\n".join(items) + "\n" + " " * depth + "}"
    if isinstance(value, list) and value and all(isinstance(v, (dict, list)) for v in value):
        items = [pad + _dump(v, depth + 1) for v in value]
        return "[\n" + ",\n".join(items) + "\n" + " " * depth + "]"
    return _ENCODER.encode(value)


def atomic_write(path, text: str | bytes) -> None:
    """Write ``text`` (or UTF-8 ``bytes``) to ``path`` through a temporary file and a rename.

    An error or an interrupt leaves either the old file or none, never a
    partial one (the temporary file is removed).  The new file gets the old
    one's permissions, or the usual ones (``0o666`` less the umask), and
    reaches the disk before the rename.
    """
    atomic_write_many({path: text})


def atomic_write_many(texts) -> None:
    """Write several files so that an error or interrupt changes none of them.

    Every text goes to a temporary file beside its target first; only when
    all are written are they renamed into place, one quick rename each.

    Parameters
    ----------
    texts : mapping of path to str
    """
    temporary: list[tuple[str, Path]] = []
    try:
        for path, text in texts.items():
            path = Path(path)
            handle, tmp = tempfile.mkstemp(dir=path.parent or ".", prefix=f".{path.name}.",
                                           suffix=".tmp")
            temporary.append((tmp, path))
            binary = isinstance(text, bytes)
            with os.fdopen(handle, "wb" if binary else "w", **({} if binary else
                           {"encoding": "utf-8", "newline": ""})) as out:
                out.write(text)
                out.flush()
                os.fsync(out.fileno())
            os.chmod(tmp, _mode_for(path))
        while temporary:
            tmp, path = temporary[0]
            os.replace(tmp, path)
            temporary.pop(0)
    except BaseException:
        for tmp, _ in temporary:
            try:
                os.unlink(tmp)
            except OSError:
                pass
        raise


def _mode_for(path: Path) -> int:
    """Permissions for a new file at ``path``: the existing file's, else 0o666 less the umask."""
    try:
        return os.stat(path).st_mode & 0o7777
    except OSError:
        mask = os.umask(0)
        os.umask(mask)
        return 0o666 & ~mask


def spreadsheet_safe(cell: str) -> str:
    """Neutralise text that a spreadsheet would run as a formula.

    >>> spreadsheet_safe("=HYPERLINK(1)"), spreadsheet_safe("sfa")
    ("'=HYPERLINK(1)", 'sfa')
    """
    return "'" + cell if cell[:1] in ("=", "+", "-", "@", "\t", "\r") else cell


def csv_text(ids, text_columns: dict[str, list], columns: dict[str, np.ndarray],
             units: dict[str, str]) -> str:
    """One CSV table: ``id`` first, then text columns, then numbers with ``name[unit]`` headers.

    Built a column at a time (:mod:`vesselnet.numtext`), so 10^6 rows take
    seconds, not minutes; cells are those of ``csv.writer`` with
    :func:`number` and :func:`spreadsheet_safe` applied.  Text columns may be
    lists of str or numpy arrays of str or UTF-8 bytes.
    """
    return _csv_bytes(ids, text_columns, columns, units).decode("utf-8")


def _csv_bytes(ids, text_columns, columns, units) -> bytes:
    from .numtext import join_rows

    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    header = ["id"] + list(text_columns)
    header += [f"{name}[{units[name]}]" if units.get(name) else name for name in columns]
    writer.writerow(header)
    cells = [_text_cells(ids)] + [_text_cells(c) for c in text_columns.values()]
    cells += [_number_cells(values) for values in columns.values()]
    head = buffer.getvalue().encode("utf-8")
    if not len(cells[0]):
        return head
    return head + join_rows(cells, encoded=True)


_RISKY_START = (b"=", b"+", b"-", b"@", b"\t", b"\r")
_NEEDS_QUOTES = (b",", b'"', b"\r", b"\n")


def _text_cells(values):
    """Text cells made spreadsheet-safe and quoted as ``csv.writer`` quotes them."""
    from .numtext import as_bytes

    cells = as_bytes(values)
    if not len(cells):
        return cells
    risky = np.zeros(len(cells), dtype=bool)
    for prefix in _RISKY_START:
        risky |= np.strings.startswith(cells, prefix)
    for char in _NEEDS_QUOTES:
        risky |= np.strings.find(cells, char) >= 0
    rows = np.flatnonzero(risky)
    if len(rows):
        fixed = [_quoted(spreadsheet_safe(x.decode("utf-8"))).encode("utf-8")
                 for x in cells[rows].tolist()]
        width = max(cells.dtype.itemsize, max(map(len, fixed)))
        cells = cells.astype(f"S{width}")
        cells[rows] = fixed
    return cells


def _quoted(cell: str) -> str:
    return '"' + cell.replace('"', '""') + '"' if any(c in cell for c in ',"\r\n') else cell


def _number_cells(values):
    """Cells of one numeric column: :func:`number` written as ``repr``; NaN and infinities empty."""
    from .numtext import significant_bytes

    values = np.asarray(values)
    if values.dtype.kind == "b":
        return np.where(values, b"true", b"false")
    if values.dtype.kind in "iu":
        return values.astype("S")
    if values.dtype.kind == "f":
        return significant_bytes(values, SIGNIFICANT_DIGITS)
    out = []
    for x in values.tolist():
        value = number(x)
        out.append("" if value is None else str(value).lower() if isinstance(value, bool) else repr(value))
    return out


def write_tables(result: SteadyResult, directory) -> list[Path]:
    """Write ``nodes.csv``, ``vessels.csv`` and ``beds.csv`` (SPEC section 5) into ``directory``."""
    from .numtext import as_bytes

    directory = Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    kinds = {name: kind for name, _, kind in NODE_COLUMNS + VESSEL_COLUMNS + BED_COLUMNS}
    kinds.update({extra_name(k): v for k, v in EXTRA_KINDS.items()})
    units = {name: DISPLAY_UNITS[kind] for name, kind in kinds.items() if kind}
    net = result.network
    node_ids = as_bytes(net.nodes.id_array)   # once: from, to and node are gathers of it
    nodes = result.node_table(ids=False)
    tables = {
        "nodes.csv": (node_ids, {}, _converted(nodes, NODE_COLUMNS)),
        "vessels.csv": (as_bytes(net.vessels.id_array), {"from": node_ids[net.vessels.from_node],
                                                     "to": node_ids[net.vessels.to_node]},
                        vessel_columns(result)),
        "beds.csv": (as_bytes(net.beds.id_array), {"node": node_ids[net.beds.node]},
                     bed_columns(result)),
    }
    texts = {directory / name: _csv_bytes(ids, text, numbers, units)
             for name, (ids, text, numbers) in tables.items()}
    atomic_write_many(texts)
    return list(texts)


def write_arrays(result: SteadyResult, path) -> Path:
    """Write every per-node, per-vessel and per-bed result (SI) into one ``.npz`` file.

    The binary counterpart of :func:`write_tables` for large networks.  Keys
    are ``<table>_<column>`` of :meth:`~vesselnet.result.SteadyResult.node_table`,
    ``vessel_table`` and ``bed_table`` (``vessel_flow_m3_s``, ``node_pressure_pa``,
    ``bed_share`` ...), with ids as ``node_id``, ``vessel_id``, ``bed_id`` (bytes when
    all ASCII, a quarter of the size: ``.astype(str)`` gives text; else text) and
    node references as rows of ``node_id`` (``vessel_from_node``,
    ``vessel_to_node``, ``bed_node``); ``checks`` holds the JSON checks map as
    text.  Read back with ``numpy.load(path)``.
    """
    path = Path(path)
    net = result.network
    from .numtext import compact_text

    arrays = {"node_id": compact_text(net.nodes.id_array),
              "vessel_id": compact_text(net.vessels.id_array),
              "bed_id": compact_text(net.beds.id_array),
              "vessel_from_node": net.vessels.from_node, "vessel_to_node": net.vessels.to_node,
              "bed_node": net.beds.node}
    for prefix, table in (("node", result.node_table(ids=False)),
                          ("vessel", result.vessel_table(ids=False)),
                          ("bed", result.bed_table(ids=False))):
        for key, values in table.items():
            arrays[f"{prefix}_{key}"] = np.asarray(values)
    arrays["checks"] = np.array(json.dumps(checks_json(result)))
    return save_npz(path, arrays)


def save_npz(path, arrays: dict[str, np.ndarray]) -> Path:
    """Write ``arrays`` as an uncompressed ``.npz`` (what :func:`numpy.savez` writes), atomically.

    Each array goes from its own memory into the file: no per-chunk copies,
    which at 10^6 rows saves a fifth of the writing time.  A temporary file
    beside ``path`` is renamed into place when complete; an error or an
    interrupt leaves the old file or none.

    >>> import tempfile
    >>> out = save_npz(Path(tempfile.mkdtemp()) / "a.npz", {"x": np.arange(3.0), "id": np.array(["p", "q"])})
    >>> with np.load(out) as data:
    ...     data["x"].tolist(), data["id"].tolist()
    ([0.0, 1.0, 2.0], ['p', 'q'])
    """
    import zipfile

    path = Path(path)
    handle, tmp = tempfile.mkstemp(dir=path.parent or ".", prefix=f".{path.name}.", suffix=".tmp")
    os.close(handle)
    try:
        with zipfile.ZipFile(tmp, "w", zipfile.ZIP_STORED, allowZip64=True) as archive:
            for name, value in arrays.items():
                value = np.asarray(value)
                if value.dtype.hasobject:
                    raise TypeError(f"save_npz: '{name}' holds Python objects; give numbers or text")
                if not value.flags.c_contiguous:
                    value = value.copy(order="C")    # broadcast views, strided slices
                with archive.open(f"{name}.npy", "w", force_zip64=True) as member:
                    header = np.lib.format.header_data_from_array_1_0(value)
                    np.lib.format.write_array_header_2_0(member, header)
                    if value.size:
                        member.write(memoryview(value.reshape(-1).view(np.uint8)))
        os.chmod(tmp, _mode_for(path))
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    return path
