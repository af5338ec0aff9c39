"""A network back into a network file (SPEC section 2) that reads back to the same network.

One entry, :func:`write_network_yaml`, writes a YAML file in one of two forms:

* **inline**: every node, vessel and bed in the YAML file, each item one
  flow mapping a line in JSON syntax (valid YAML, quoting every id safely).
  It carries everything a network holds but an occlusion: tapers, lesions,
  walls (distensible or not), tags, pulsatile inflows, Windkessel and
  autoregulating beds (a waveform read from a CSV table is written as its
  samples).  :func:`network_yaml` gives this text.
* **tables**: a small YAML file naming ``NAME_vessels.csv``,
  ``NAME_nodes.csv`` and ``NAME_beds.csv`` beside it, for networks of more
  than :data:`TABLE_THRESHOLD` vessels.  Tables cannot hold lesions, wall
  Poisson ratios, distensible walls, external pressures, walls on some
  vessels only, pulsatile inflows, Windkessel or autoregulating beds.

Both forms state every number in the file's default unit (SPEC section 1,
written in the ``units:`` map and in each table header) with
:data:`DIGITS` significant digits, so they read back to the same columns.
Which keys an item states is decided in one place (``_vessel_fields``,
``_node_fields``, ``_bed_fields``).  Comments and the layout of an original
file are not kept.

Examples
--------
>>> from vesselnet.model import Network
>>> from vesselnet.reader import read_network_text
>>> net = Network.build(nodes={"root": {"pressure_pa": 12665.6268}},
...     vessels=[{"id": "a", "from": "root", "to": "tip", "length_m": 0.1, "radius_m": 0.002}],
...     beds=[{"id": "organ", "node": "tip", "resistance_pa_s_m3": 1.33322387415e9,
...            "windkessel_proximal_pa_s_m3": 1.33322387415e8, "windkessel_compliance_m3_pa": 7.5e-11}])
>>> text = network_yaml(net)
>>> print(text.splitlines()[-1])
  - {"id": "organ", "node": "tip", "resistance": 10.0, "windkessel": {"proximal": 1.0, "compliance": 0.00999917...}}
>>> back = read_network_text(text)
>>> round(float(back.beds.windkessel_proximal_pa_s_m3[0] / net.beds.windkessel_proximal_pa_s_m3[0]), 12)
1.0

The same network without its Windkessel, as tables:

>>> import dataclasses, pathlib, tempfile
>>> from vesselnet.reader import load_network
>>> plain = dataclasses.replace(net, beds=dataclasses.replace(
...     net.beds, windkessel_proximal_pa_s_m3=np.full(1, np.nan)))
>>> paths = write_network_yaml(plain, pathlib.Path(tempfile.mkdtemp()) / "tiny.yaml", tables=True)
>>> [p.name for p in paths]
['tiny.yaml', 'tiny_vessels.csv', 'tiny_nodes.csv', 'tiny_beds.csv']
>>> print(paths[1].read_text(), end="")
id,from,to,length[cm],radius[mm]
a,root,tip,10.0,2.0
>>> load_network(paths[0]).beds.resistance_pa_s_m3 / net.beds.resistance_pa_s_m3
array([1.])
"""

from __future__ import annotations

import csv
import io
import json
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .errors import NetworkSpecError, Problem
from .model import Network
from .numtext import as_bytes, join_rows, significant_bytes
from .units import DEFAULT_UNITS, from_si
from .writers import atomic_write_many

FORMAT_VERSION = 1
DIGITS = 15
"""Significant digits of every written number (in the file's unit)."""
TABLE_THRESHOLD = 2000
"""Networks with more vessels than this are written with CSV tables (when tables can hold them)."""


def network_yaml(network: Network, *, comment: str = "") -> str:
    """The text of an inline network file describing ``network``.

    Parameters
    ----------
    network : Network
    comment : str, optional
        Text written as ``#`` comment lines at the top.

    Returns
    -------
    str
        YAML text (SPEC section 2) in the default units.

    Raises
    ------
    NetworkSpecError
        What no network file can say: an occluded vessel (apply the change
        again, or remove the vessel), an id that is empty or begins or ends
        with white space (the reader strips names).
    """
    _refuse_unwritable(network)
    ids = network.nodes.ids
    out = _head(network, comment)
    fields = _node_fields(network)
    node_lines = [f"  {_json(ids[i])}: {_json(props)}" for i in range(len(ids))
                  if (props := _item(fields, i))]
    if node_lines:
        out += ["nodes:"] + node_lines
    out.append("vessels:")
    fields = _vessel_fields(network, tables=False)
    out += ["  - " + _json({"id": vid, **_item(fields, i)}) for i, vid in enumerate(network.vessels.ids)]
    if len(network.beds):
        fields = _bed_fields(network)
        out.append("beds:")
        out += ["  - " + _json({"id": bid, **_item(fields, i)}) for i, bid in enumerate(network.beds.ids)]
    return "\n".join(out) + "\n"


def write_network_yaml(network: Network, path, *, tables: bool | None = None,
                       comment: str = "") -> list[Path]:
    """Write ``network`` as the YAML network file ``path``, inline or with CSV tables beside it.

    Parameters
    ----------
    network : Network
    path : str or Path
        The YAML file; tables go beside it as ``STEM_vessels.csv``,
        ``STEM_nodes.csv`` and ``STEM_beds.csv`` (only those with rows),
        referenced by relative paths.
    tables : bool, optional
        True: tables (refused when they cannot hold the network); False:
        inline.  By default tables above :data:`TABLE_THRESHOLD` vessels,
        unless the network holds what tables cannot (then inline).
    comment : str, optional
        Text written as ``#`` comment lines at the top of the YAML file.

    Returns
    -------
    list of Path
        The files written, the YAML file first.  All are written or none.

    Raises
    ------
    NetworkSpecError
        What no network file can say (see :func:`network_yaml`);
        ``tables=True`` for a network holding what tables cannot; a
        ``.json`` or ``.npz`` path (those names are read as other
        formats: see :func:`vesselnet.netfiles.write_network`).
    """
    path = Path(path)
    if path.suffix.lower() in (".json", ".npz"):
        raise NetworkSpecError([Problem(str(path), 0, 0, "", f"a '{path.suffix}' file is read as "
                                        "JSON or binary columns, not YAML",
                                        "name the file .yaml, or use vesselnet.netfiles.write_network")])
    _refuse_unwritable(network)
    texts = None
    if tables or tables is None and len(network.vessels) > TABLE_THRESHOLD:
        texts = _table_files(network, path, comment, required=bool(tables))
    if texts is None:
        texts = {path: network_yaml(network, comment=comment)}
    atomic_write_many(texts)
    return list(texts)


# ----------------------------------------------------------------------------- what items state

@dataclass(frozen=True)
class _Field:
    """One key an item may state: where it goes, what it holds, on which rows.

    ``key`` is the path inside a YAML item (``("wall", "thickness")``),
    ``column`` the CSV table column (a tuple for ``x, y, z``; None: tables
    cannot hold it), ``kind`` ``number`` (``values`` are the formatted
    cells, in ``unit``), ``text``, ``tags``, ``flag`` or ``object`` (a dict
    of row -> YAML value).  ``blanks``: a table column may leave rows
    empty.  ``label`` names it in messages (default: the key).
    """

    key: tuple[str, ...]
    column: str | tuple[str, ...] | None
    kind: str
    values: object
    present: np.ndarray
    blanks: bool = True
    unit: str = ""
    label: str = ""

    def inline(self, i: int):
        """The YAML value of row ``i``."""
        if self.kind == "number":
            cell = self.values[i]
            return float(cell) if cell.ndim == 0 else [float(c) for c in cell]
        return {"tags": list, "flag": bool}.get(self.kind, lambda x: x)(self.values[i])

    def cells(self) -> dict[str, object]:
        """Table column name -> cells (empty where the row does not state it)."""
        if self.kind == "number":
            cells = np.where(self.present.reshape((-1,) + (1,) * (self.values.ndim - 1)),
                             self.values, b"")
            names = self.column if isinstance(self.column, tuple) else (self.column,)
            return {name: cells[:, k] if cells.ndim == 2 else cells for k, name in enumerate(names)}
        texts = self.values if self.kind == "text" else [";".join(t) for t in self.values]
        return {self.column: np.where(self.present, as_bytes(texts), b"")}


def _number(key, column, kind: str, values_si, present, *, blanks: bool = True) -> _Field:
    return _Field(key, column, "number", _formatted(values_si, kind), np.asarray(present), blanks,
                  DEFAULT_UNITS.get(kind, ""))


def _formatted(values_si, kind: str) -> np.ndarray:
    """The one number formatter: SI values in the file's default unit for ``kind`` as ASCII
    text with :data:`DIGITS` significant digits (``repr`` of the rounded value; NaN empty)."""
    values = np.asarray(values_si, dtype=float)
    if kind != "fraction":
        values = from_si(values, kind, DEFAULT_UNITS[kind])
    return significant_bytes(values.reshape(-1), DIGITS).reshape(values.shape)


def _scalar(value_si: float, kind: str) -> float:
    return float(_formatted([value_si], kind)[0])


def _vessel_fields(network: Network, *, tables: bool) -> list[_Field]:
    v, node_ids = network.vessels, network.nodes.id_array
    every = np.ones(len(v), dtype=bool)
    taper = v.radius_in_m != v.radius_out_m
    if tables:   # a table gives every vessel one radius, or every vessel both ends
        taper = every & taper.any()
    stenosis = np.isfinite(v.stenosis_reduction)
    tags = [()] * len(v)
    for tag, rows in v.tags.items():      # sorted by tag: each row's tags come out sorted
        for r in rows.tolist():
            tags[r] = (*tags[r], tag)
    return [
        _Field(("from",), "from", "text", node_ids[v.from_node], every),
        _Field(("to",), "to", "text", node_ids[v.to_node], every),
        _number(("length",), "length", "length", v.length_m, every),
        _number(("radius",), "radius", "radius", v.radius_in_m, ~taper, blanks=False),
        _number(("radius", "in"), "radius_in", "radius", v.radius_in_m, taper, blanks=False),
        _number(("radius", "out"), "radius_out", "radius", v.radius_out_m, taper, blanks=False),
        _number(("wall", "thickness"), "wall_thickness", "radius", v.wall_thickness_m,
                np.isfinite(v.wall_thickness_m), blanks=False),
        _number(("wall", "modulus"), "wall_modulus", "modulus", v.wall_modulus_pa,
                np.isfinite(v.wall_modulus_pa), blanks=False),
        _number(("wall", "poisson"), None, "fraction", v.wall_poisson, v.wall_poisson != 0.5),
        _Field(("wall", "distensible"), None, "flag", v.distensible, v.distensible,
               label="distensible walls"),
        _number(("wall", "external_pressure"), None, "pressure", v.external_pressure_pa,
                v.external_pressure_pa != 0),
        _Field(("tags",), "tags", "tags", tags, np.array([bool(t) for t in tags], dtype=bool)),
        _number(("stenosis", "reduction"), None, "fraction", v.stenosis_reduction, stenosis),
        _number(("stenosis", "length"), None, "length", v.stenosis_length_m, stenosis),
        _number(("stenosis", "at"), None, "fraction", v.stenosis_at, stenosis),
    ]


def _node_fields(network: Network) -> list[_Field]:
    n = network.nodes
    waves = {i: _waveform(w) for i, w in n.inflow_waveforms.items()}
    pulsatile = np.isin(np.arange(len(n)), list(waves))
    return [
        _number(("pressure",), "pressure", "pressure", n.pressure_pa, np.isfinite(n.pressure_pa)),
        _Field(("inflow",), None, "object", waves, pulsatile, label="pulsatile inflow"),
        _number(("inflow",), "inflow", "flow", n.inflow_m3_s, np.isfinite(n.inflow_m3_s) & ~pulsatile),
        _number(("position",), ("x", "y", "z"), "length", n.position_m,
                np.isfinite(n.position_m).all(axis=1)),
        _number(("target_pressure",), "target_pressure", "pressure", n.target_pressure_pa,
                np.isfinite(n.target_pressure_pa)),
        _number(("hematocrit",), "hematocrit", "fraction", n.hematocrit, np.isfinite(n.hematocrit)),
    ]


def _waveform(wave) -> dict:
    if "samples_m3_s" in wave:
        return {"period": _scalar(wave["period_s"], "time"),
                "samples": _formatted(wave["samples_m3_s"], "flow").astype(float).tolist()}
    return {"stroke_volume": _scalar(wave["stroke_volume_m3"], "volume"),
            "heart_rate": _scalar(wave["heart_rate_hz"], "heart_rate"),
            "ejection_time": _scalar(wave["ejection_time_s"], "time")}


def _bed_fields(network: Network) -> list[_Field]:
    b, node_ids = network.beds, network.nodes.id_array
    drains = b.outflow_node >= 0
    windkessel = np.isfinite(b.windkessel_proximal_pa_s_m3)
    regulates = np.isfinite(b.min_resistance_pa_s_m3)
    return [
        _Field(("node",), "node", "text", node_ids[b.node], np.ones(len(b), dtype=bool)),
        _number(("resistance",), "resistance", "resistance", b.resistance_pa_s_m3,
                np.ones(len(b), dtype=bool)),
        _number(("outflow_pressure",), "outflow_pressure", "pressure", b.outflow_pressure_pa,
                ~drains & (b.outflow_pressure_pa != network.venous_pressure_pa)),
        _Field(("outflow_node",), "outflow_node", "text", node_ids[np.maximum(b.outflow_node, 0)],
               drains),
        _number(("share",), "share", "fraction", b.share, np.isfinite(b.share)),
        _number(("windkessel", "proximal"), None, "resistance", b.windkessel_proximal_pa_s_m3, windkessel),
        _number(("windkessel", "compliance"), None, "compliance", b.windkessel_compliance_m3_pa,
                windkessel),
        _number(("autoregulation", "min_resistance"), None, "resistance", b.min_resistance_pa_s_m3,
                regulates),
        _number(("autoregulation", "target_flow"), None, "flow", b.target_flow_m3_s,
                regulates & np.isfinite(b.target_flow_m3_s)),
    ]


def _item(fields: list[_Field], i: int) -> dict:
    """The YAML mapping of row ``i``: the keys its row states, nested along their paths."""
    item: dict = {}
    for f in fields:
        if f.present[i]:
            place = item
            for key in f.key[:-1]:
                place = place.setdefault(key, {})
            place[f.key[-1]] = f.inline(i)
    return item


def _refuse_unwritable(network: Network) -> None:
    """Raise for what neither form can say: occlusions, ids the reader would strip."""
    problems = []
    v = network.vessels
    if v.occluded.any():
        first = v.ids[int(np.flatnonzero(v.occluded)[0])]
        problems.append(Problem(network.source, 0, 0, f"vessels '{first}'",
                                f"{int(v.occluded.sum())} vessel(s) occluded, which a network "
                                "file cannot express", "remove the vessel or keep the change in a scenario"))
    for section in ("vessels", "nodes", "beds"):
        ids = as_bytes(getattr(network, section).id_array)
        bad = (np.strings.strip(ids) != ids) | (np.strings.str_len(ids) == 0)
        if bad.any():
            first = getattr(network, section).ids[int(np.flatnonzero(bad)[0])]
            problems.append(Problem(network.source, 0, 0, f"{section} {first!r}",
                                    f"{int(bad.sum())} id(s) empty or with leading or trailing "
                                    "spaces, which the reader strips", "strip the ids"))
    if problems:
        raise NetworkSpecError(problems)


# ----------------------------------------------------------------------------- the two forms

def _json(value) -> str:
    return json.dumps(value, ensure_ascii=False, allow_nan=False)


def _head(network: Network, comment: str) -> list[str]:
    """Comment lines, version, name, units, blood and venous pressure: what both forms begin with."""
    blood = network.blood
    viscosity = _scalar(blood.viscosity_pa_s, "viscosity")
    if blood.viscosity_law != "constant":
        viscosity = {"law": blood.viscosity_law,
                     "plasma": _scalar(blood.plasma_viscosity_pa_s, "viscosity"), "value": viscosity}
    blood_map = {"viscosity": viscosity, "density": _scalar(blood.density_kg_m3, "density"),
                 "hematocrit": _scalar(blood.hematocrit, "fraction")}
    if blood.separation != "none":
        blood_map["separation"] = blood.separation
    lines = [f"# {line}".rstrip() for line in comment.splitlines()]
    return lines + [f"vesselnet: {FORMAT_VERSION}", f"name: {_json(network.name)}",
                    "units: " + _json(DEFAULT_UNITS), "blood: " + _json(blood_map),
                    f"venous_pressure: {_json(_scalar(network.venous_pressure_pa, 'pressure'))}"]


def _table_files(network: Network, path: Path, comment: str, *, required: bool) -> dict | None:
    """Path -> text of the YAML file and its tables; None (or, when ``required``, a
    NetworkSpecError) when tables cannot hold the network."""
    sections = {"vessels": (network.vessels.id_array, _vessel_fields(network, tables=True)),
                "nodes": (network.nodes.id_array, _node_fields(network)),
                "beds": (network.beds.id_array, _bed_fields(network))}
    problems = _table_problems(network, sections)
    if problems:
        if required:
            raise NetworkSpecError(problems)
        return None
    stem = path.stem
    lines, tables = _head(network, comment), {}
    for section, (ids, fields) in sections.items():
        rows = np.logical_or.reduce([f.present for f in fields]) if section == "nodes" \
            else np.ones(len(ids), dtype=bool)
        if rows.any():
            name = f"{stem}_{section}.csv"
            lines.append(f"{section}_table: {name}")
            tables[path.with_name(name)] = _csv(ids[rows], fields, rows)
    return {path: "\n".join(lines) + "\n", **tables}


def _table_problems(network: Network, sections) -> list[Problem]:
    """What tables cannot hold, one problem per section (the first offender named)."""
    problems = []
    for section, (ids, fields) in sections.items():
        lacking = {}   # what -> rows that hold it
        whole = {f.key[0] for f in fields} - {f.key[0] for f in fields if f.column is not None}
        for f in fields:
            partial = not f.blanks and f.present.any() and not f.present.all()
            if f.column is None and f.present.any() or partial:
                what = f.label or (f.key[0] if f.key[0] in whole else " ".join(f.key))
                lacking.setdefault(what + (f" on some {section} only" if partial else ""), f.present)
        odd = [t for t in network.vessels.tags if ";" in t or t != t.strip()]
        if section == "vessels" and odd:     # a tags cell is names split at ';', stripped
            lacking[f"the tag {odd[0]!r}"] = np.isin(np.arange(len(ids)), network.vessels.tags[odd[0]])
        if lacking:
            first = int(np.flatnonzero(np.logical_or.reduce(list(lacking.values())))[0])
            listed = ", ".join(f"{what} ({int(rows.sum())} of {len(ids)})"
                               for what, rows in lacking.items())
            problems.append(Problem(network.source, 0, 0, f"{section} '{ids[first]}'",
                                    f"CSV tables cannot hold {listed}",
                                    "write the network inline (tables=False)"))
    return problems


def _csv(ids, fields: list[_Field], rows: np.ndarray) -> bytes:
    """A CSV input table: ``id``, then the columns some row states, numbers under ``name[unit]``."""
    columns = {}
    for f in fields:
        if f.present[rows].any():
            for name, cells in f.cells().items():
                columns[f"{name}[{f.unit}]" if f.unit else name] = as_bytes(cells)[rows]
    cells = [as_bytes(ids)] + list(columns.values())
    header = ",".join(["id", *columns]) + "\n"
    if not any((np.strings.find(c, char) >= 0).any() for c in cells
               for char in (b",", b'"', b"\n", b"\r")):
        return header.encode() + join_rows(cells, encoded=True)
    buffer = io.StringIO()
    csv.writer(buffer, lineterminator="\n").writerows(
        zip(*[[x.decode("utf-8") for x in c.tolist()] for c in cells]))
    return header.encode() + buffer.getvalue().encode("utf-8")
