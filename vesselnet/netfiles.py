"""Network files for generated and large networks: binary tables (.npz) and JSON.

``.npz`` holds the network's columns in SI as numpy arrays (no pickles):
node, vessel and bed ids, node references as rows, every numeric column,
tags, and a small JSON header (format, name, blood, venous pressure,
pulsatile inflows).  It reads back in milliseconds per 10^5 vessels and is
checked like any other input.  ``.json`` holds the same document as the
YAML format (SPEC section 2), with SI units declared in its ``units`` map.
:func:`write_network` writes either; :func:`vesselnet.reader.load_network`
reads YAML, JSON or npz by suffix.

Examples
--------
>>> import pathlib, tempfile
>>> from vesselnet.model import Network
>>> net = Network.build(nodes={"r": {"pressure_pa": 12000.0}},
...     vessels=[{"id": "a", "from": "r", "to": "t", "length_m": 0.1, "radius_m": 0.002}],
...     beds=[{"id": "organ", "node": "t", "resistance_pa_s_m3": 1e9}])
>>> folder = pathlib.Path(tempfile.mkdtemp())
>>> from vesselnet.reader import load_network
>>> back = load_network(write_network(net, folder / "tiny.npz"))
>>> back.vessels.ids, float(back.vessels.radius_in_m[0]), back.beds.ids
(('a',), 0.002, ('organ',))
>>> load_network(write_network(net, folder / "tiny.json")).nodes.ids
('r', 't')
"""

from __future__ import annotations

import dataclasses
import json
import zipfile
from pathlib import Path

import numpy as np

from .errors import NetworkSpecError, Problem
from .model import Blood, Network
from .numtext import ascii_text, compact_text
from .topology import topology_problems

NPZ_FORMAT = "vesselnet-columns"
NPZ_VERSION = 2
"""Version 2 stores constant columns as one value and ASCII ids as bytes."""
READ_VERSIONS = (1, 2)
SUFFIXES = (".yaml", ".yml", ".json", ".npz")
SI_UNITS = {"length": "m", "radius": "m", "pressure": "Pa", "flow": "m3/s",
            "viscosity": "Pa*s", "density": "kg/m3", "modulus": "Pa",
            "resistance": "Pa*s/m3", "volume": "m3", "compliance": "m3/Pa", "time": "s",
            "heart_rate": "Hz"}
_NODE_COLUMNS = ("pressure_pa", "inflow_m3_s", "position_m", "target_pressure_pa", "line")
_VESSEL_COLUMNS = ("from_node", "to_node", "length_m", "radius_in_m", "radius_out_m",
                   "wall_thickness_m", "wall_modulus_pa", "wall_poisson", "distensible",
                   "external_pressure_pa", "stenosis_reduction", "stenosis_length_m",
                   "stenosis_at", "occluded", "line")
_BED_COLUMNS = ("node", "resistance_pa_s_m3", "outflow_pressure_pa", "outflow_node", "share",
                "windkessel_proximal_pa_s_m3", "windkessel_compliance_m3_pa", "line")
_POSITIVE = {"vessels": ("length_m", "radius_in_m", "radius_out_m"),
             "beds": ("resistance_pa_s_m3",)}
MAX_NAMED = 5


def write_network(network: Network, path) -> Path:
    """Write ``network`` as ``.npz`` (binary columns) or ``.json`` (SPEC section 2, SI units)."""
    from .writers import atomic_write, save_npz

    path = Path(path)
    suffix = path.suffix.lower()
    if suffix == ".npz":
        save_npz(path, network_arrays(network))
    elif suffix == ".json":
        atomic_write(path, json.dumps(network_document(network), ensure_ascii=False) + "\n")
    else:
        raise NetworkSpecError([Problem(str(path), 0, 0, "output",
                                        f"cannot write a network as '{suffix or path.name}'",
                                        "use an output name ending in .npz or .json")])
    return path


def network_arrays(network: Network) -> dict[str, np.ndarray]:
    """The arrays of the ``.npz`` form (SI, node references as rows).

    A column whose rows all hold one value is stored as that value alone
    (one dimension fewer: 0-d, or one row of node positions), and ids that
    are all ASCII as bytes: a generated 10^6-vessel network shrinks from
    260 to 92 MB, and reads back in a third of the time.
    """
    nodes, v, beds = network.nodes, network.vessels, network.beds
    header = {"format": NPZ_FORMAT, "version": NPZ_VERSION, "name": network.name,
              "blood": dataclasses.asdict(network.blood),
              "venous_pressure_pa": network.venous_pressure_pa,
              "inflow_waveforms": {str(k): _plain(w) for k, w in nodes.inflow_waveforms.items()}}
    out = {"header": np.array(json.dumps(header)), "node_id": compact_text(nodes.id_array),
           "vessel_id": compact_text(v.id_array), "bed_id": compact_text(beds.id_array)}
    out.update({f"node_{c}": _compact_column(getattr(nodes, c)) for c in _NODE_COLUMNS})
    out.update({f"vessel_{c}": _compact_column(getattr(v, c)) for c in _VESSEL_COLUMNS})
    out.update({f"bed_{c}": _compact_column(getattr(beds, c)) for c in _BED_COLUMNS})
    names = sorted(v.tags)
    out["tag_name"] = np.array(names, dtype=str)
    out["tag_rows"] = np.concatenate([v.tags[t] for t in names]) if names else np.zeros(0, np.int64)
    out["tag_count"] = np.array([len(v.tags[t]) for t in names], dtype=np.int64)
    return out


def _compact_column(values: np.ndarray) -> np.ndarray:
    """One row when every row is the same (NaNs count as equal), else the column."""
    values = np.asarray(values)
    if len(values) > 1:
        first = values[:1]
        same = values == first
        if values.dtype.kind == "f":
            same |= np.isnan(values) & np.isnan(first)
        if same.all():
            return np.array(values[0])
    return values


def _expanded(arrays: dict[str, np.ndarray], sizes: dict[str, int]) -> None:
    """Columns stored as one value (see :func:`network_arrays`) back to full, read-only views;
    byte ids back to text."""
    for key, value in arrays.items():
        section = key.split("_")[0]
        if section not in sizes:
            continue
        if key.endswith("_id"):
            if value.dtype.kind == "S":
                arrays[key] = ascii_text(value)
        elif value.ndim == (2 if key == "node_position_m" else 1) - 1:
            arrays[key] = np.broadcast_to(value, (sizes[section],) + value.shape)


def _plain(value):
    if isinstance(value, dict):
        return {k: _plain(x) for k, x in value.items()}
    if isinstance(value, (tuple, list)):
        return [_plain(x) for x in value]
    return value.item() if isinstance(value, np.generic) else value


def read_npz(path) -> Network:
    """Read and check a network written as ``.npz`` by :func:`write_network`."""
    file = str(path)
    try:
        with np.load(path, allow_pickle=False) as data:
            arrays = {k: data[k] for k in data.files}
        for value in arrays.values():
            value.flags.writeable = False     # ours alone: the model need not copy them
        header = json.loads(str(arrays["header"]))
        if header.get("format") != NPZ_FORMAT:
            raise KeyError("header")
    except FileNotFoundError:
        raise
    except (OSError, ValueError, KeyError, zipfile.BadZipFile) as exc:
        raise NetworkSpecError([Problem(file, 0, 0, "file", f"not a vesselnet .npz network ({exc})",
                                        "write it with 'vesselnet convert IN OUT.npz'")]) from None
    if header.get("version") not in READ_VERSIONS:
        raise NetworkSpecError([Problem(file, 0, 0, "header",
                                        f"format version {header.get('version')!r} is not supported",
                                        f"this vesselnet reads versions "
                                        + ", ".join(map(str, READ_VERSIONS)))])
    problems = _check_arrays(file, arrays, compact=header.get("version", 1) >= 2)
    if problems:
        raise NetworkSpecError(problems)
    node_ids = arrays["node_id"]
    counts = arrays["tag_count"]
    starts = np.concatenate([[0], np.cumsum(counts)])
    tags = {str(t): arrays["tag_rows"][starts[k]:starts[k + 1]]
            for k, t in enumerate(arrays["tag_name"].tolist())}
    vessels = {"id": arrays["vessel_id"],
               **{c: arrays[f"vessel_{c}"] for c in _VESSEL_COLUMNS}}
    beds = {"id": arrays["bed_id"], **{c: arrays[f"bed_{c}"] for c in _BED_COLUMNS}}
    nodes = {"id": node_ids, **{c: arrays[f"node_{c}"] for c in _NODE_COLUMNS}}
    waveforms = {str(node_ids[int(k)]): {key: tuple(x) if isinstance(x, list) else x for key, x in w.items()}
                 for k, w in header.get("inflow_waveforms", {}).items()}
    blood = Blood(**header.get("blood", {}))
    network = Network.from_columns(vessels=vessels, nodes=nodes, beds=beds, tags=tags,
                                   name=header.get("name") or Path(file).stem, blood=blood,
                                   venous_pressure_pa=float(header["venous_pressure_pa"]),
                                   source=file, inflow_waveforms=waveforms)
    problems = topology_problems(network)
    if problems:
        raise NetworkSpecError(problems)
    return network


def _check_arrays(file: str, arrays: dict[str, np.ndarray], compact: bool = True) -> list[Problem]:
    """Shapes, unique ids, references in range, values finite and in range; all problems.

    With ``compact`` (version 2) columns stored as one value are expanded first.
    """
    problems: list[Problem] = []
    needed = ["node_id", "vessel_id", "bed_id", "tag_name", "tag_rows", "tag_count"]
    needed += [f"node_{c}" for c in _NODE_COLUMNS] + [f"vessel_{c}" for c in _VESSEL_COLUMNS]
    needed += [f"bed_{c}" for c in _BED_COLUMNS]
    missing = [k for k in needed if k not in arrays]
    if missing:
        return [Problem(file, 0, 0, "file", "missing arrays " + ", ".join(missing),
                        "write it with 'vesselnet convert IN OUT.npz'")]
    sizes = {"node": len(arrays["node_id"]), "vessel": len(arrays["vessel_id"]),
             "bed": len(arrays["bed_id"])}
    stored_ids = {k: arrays[k] for k in ("node_id", "vessel_id", "bed_id")}
    if compact:
        _expanded(arrays, sizes)
    for key, value in arrays.items():
        section = key.split("_")[0]
        if section in sizes and (value.ndim == 0 or len(value) != sizes[section]):
            problems.append(Problem(file, 0, 0, key, f"has {len(value) if value.ndim else 0} rows, expected "
                                    f"{sizes[section]}", "rewrite the file"))
    if problems:
        return problems
    n_nodes = sizes["node"]

    def report(section, rows, message, ids):
        for i in rows[:MAX_NAMED].tolist():
            problems.append(Problem(file, 0, 0, f"{section}[{i}] '{ids[i]}'", message))
        if len(rows) > MAX_NAMED:
            problems.append(Problem(file, 0, 0, section, f"and {len(rows) - MAX_NAMED} more"))

    for section, prefix in (("nodes", "node"), ("vessels", "vessel"), ("beds", "bed")):
        dup = duplicated(stored_ids[f"{prefix}_id"])
        if dup:
            problems.append(Problem(file, 0, 0, section, "duplicate ids " + ", ".join(map(repr, dup)),
                                    "give each item its own id"))
    v_ids, b_ids = arrays["vessel_id"], arrays["bed_id"]
    for key in ("from_node", "to_node"):
        rows = arrays[f"vessel_{key}"]
        report("vessels", np.flatnonzero((rows < 0) | (rows >= n_nodes)),
               f"{key} is not a node row (0..{n_nodes - 1})", v_ids)
    frm, to = arrays["vessel_from_node"], arrays["vessel_to_node"]
    report("vessels", np.flatnonzero(frm == to), "the vessel starts and ends at one node (a self-loop)",
           v_ids)
    for key, allow_none in (("node", False), ("outflow_node", True)):
        rows = arrays[f"bed_{key}"]
        bad = (rows >= n_nodes) | ((rows < 0) if not allow_none else (rows < -1))
        report("beds", np.flatnonzero(bad), f"{key} is not a node row", b_ids)
    for section, prefix in (("vessels", "vessel"), ("beds", "bed")):
        ids = arrays[f"{prefix}_id"]
        for column in _POSITIVE[section]:
            values = arrays[f"{prefix}_{column}"]
            report(section, np.flatnonzero(~(np.isfinite(values) & (values > 0))),
                   f"{column} must be finite and > 0", ids)
    touched = np.zeros(n_nodes, dtype=bool)
    ok = (frm >= 0) & (frm < n_nodes) & (to >= 0) & (to < n_nodes)
    touched[frm[ok]] = True
    touched[to[ok]] = True
    report("nodes", np.flatnonzero(~touched), "no vessel joins this node", arrays["node_id"])
    return problems


def duplicated(ids: np.ndarray) -> list[str]:
    """Ids that occur more than once (up to five), exactly, without Python strings.

    Each id's bytes, in 8-byte lanes, give a 64-bit key (one-to-one for ids
    of up to 8 bytes); keys are bucketed by their top bits, only ids sharing
    a bucket are sorted, and only ids with equal keys are compared as
    strings.  At 10^6 ids this takes a few hundredths of a second.

    >>> duplicated(np.array([b"a", b"b", b"a"])), duplicated(np.array(["x", "yy", "x", "yy"]))
    (['a'], ['x', 'yy'])
    """
    ids = np.asarray(ids)
    if len(ids) < 2:
        return []
    if ids.dtype.kind not in "SU":
        ids = ids.astype(str)
    size = ids.dtype.itemsize
    lanes = -(-size // 8)
    raw = np.zeros((len(ids), 8 * lanes), dtype=np.uint8)
    raw[:, :size] = np.ascontiguousarray(ids).view(np.uint8).reshape(len(ids), size)
    words = raw.view(np.uint64)
    key = words[:, 0].copy()
    with np.errstate(over="ignore"):
        for k in range(1, lanes):
            key *= np.uint64(0x100000001B3)
            key ^= key >> np.uint64(29)
            key ^= words[:, k]
        key *= np.uint64(0x9E3779B97F4A7C15)     # odd: one lane stays one-to-one
    # a bucket from the top bits; only ids sharing one are sorted and compared
    bits = max(int(len(ids) - 1).bit_length() + 2, 1)
    bucket = (key >> np.uint64(64 - bits)).astype(np.int64)
    crowded = np.flatnonzero(np.bincount(bucket, minlength=1 << bits)[bucket] > 1)
    order = crowded[np.argsort(key[crowded], kind="stable")]
    sorted_key = key[order]
    same = np.flatnonzero(sorted_key[1:] == sorted_key[:-1])
    if not len(same):
        return []
    rows = np.unique(np.concatenate([order[same], order[same + 1]]))
    suspects = [x.decode("utf-8", "replace") if isinstance(x, bytes) else x
                for x in ids[rows].tolist()]
    seen, dup = set(), []
    for x in suspects:
        if x in seen and x not in dup:
            dup.append(x)
        seen.add(x)
    return dup[:MAX_NAMED]


def network_document(network: Network) -> dict:
    """The network as a SPEC section 2 document in SI units (for ``.json``)."""
    nodes, v, beds = network.nodes, network.vessels, network.beds
    doc: dict = {"vesselnet": 1, "name": network.name, "units": dict(SI_UNITS)}
    blood = network.blood
    viscosity = (blood.viscosity_pa_s if blood.viscosity_law == "constant" else
                 {"law": blood.viscosity_law, "plasma": blood.plasma_viscosity_pa_s,
                  "value": blood.viscosity_pa_s})
    doc["blood"] = {"viscosity": viscosity, "density": blood.density_kg_m3,
                    "hematocrit": blood.hematocrit, "separation": blood.separation}
    doc["venous_pressure"] = network.venous_pressure_pa
    node_doc = {}
    for i, node_id in enumerate(nodes.ids):
        props = {}
        for key, column in (("pressure", nodes.pressure_pa), ("inflow", nodes.inflow_m3_s),
                            ("target_pressure", nodes.target_pressure_pa)):
            if not np.isnan(column[i]):
                props[key] = float(column[i])
        if i in nodes.inflow_waveforms:
            props["inflow"] = _waveform_document(nodes.inflow_waveforms[i])
        if not np.isnan(nodes.position_m[i]).all():
            props["position"] = [float(x) for x in nodes.position_m[i]]
        if props:
            node_doc[node_id] = props
    doc["nodes"] = node_doc
    tags_of: dict[int, list[str]] = {}
    for tag, rows in sorted(v.tags.items()):
        for r in rows.tolist():
            tags_of.setdefault(r, []).append(tag)
    node_ids = nodes.ids
    cols = {name: getattr(v, name).tolist() for name in _VESSEL_COLUMNS}
    vessels = []
    for i, vid in enumerate(v.ids):
        r_in, r_out = cols["radius_in_m"][i], cols["radius_out_m"][i]
        item = {"id": vid, "from": node_ids[cols["from_node"][i]], "to": node_ids[cols["to_node"][i]],
                "length": cols["length_m"][i],
                "radius": r_in if r_in == r_out else {"in": r_in, "out": r_out}}
        wall = {k: cols[c][i] for k, c in (("thickness", "wall_thickness_m"),
                                          ("modulus", "wall_modulus_pa"))
                if not np.isnan(cols[c][i])}
        if wall:
            wall["poisson"] = cols["wall_poisson"][i]
            if cols["distensible"][i]:
                wall["distensible"] = True
            if cols["external_pressure_pa"][i]:
                wall["external_pressure"] = cols["external_pressure_pa"][i]
            item["wall"] = wall
        if i in tags_of:
            item["tags"] = tags_of[i]
        if not np.isnan(cols["stenosis_reduction"][i]):
            item["stenosis"] = {"reduction": cols["stenosis_reduction"][i],
                                "length": cols["stenosis_length_m"][i], "at": cols["stenosis_at"][i]}
        vessels.append(item)
    doc["vessels"] = vessels
    bed_items = []
    bcols = {name: getattr(beds, name).tolist() for name in _BED_COLUMNS}
    for i, bid in enumerate(beds.ids):
        item = {"id": bid, "node": node_ids[bcols["node"][i]],
                "resistance": bcols["resistance_pa_s_m3"][i]}
        if bcols["outflow_node"][i] >= 0:
            item["outflow_node"] = node_ids[bcols["outflow_node"][i]]
        elif bcols["outflow_pressure_pa"][i] != network.venous_pressure_pa:
            item["outflow_pressure"] = bcols["outflow_pressure_pa"][i]
        if not np.isnan(bcols["share"][i]):
            item["share"] = bcols["share"][i]
        if not np.isnan(bcols["windkessel_proximal_pa_s_m3"][i]):
            item["windkessel"] = {"proximal": bcols["windkessel_proximal_pa_s_m3"][i],
                                  "compliance": bcols["windkessel_compliance_m3_pa"][i]}
        bed_items.append(item)
    doc["beds"] = bed_items
    return doc


def _waveform_document(wave) -> dict:
    if "samples_m3_s" in wave:
        return {"period": wave["period_s"], "samples": list(wave["samples_m3_s"])}
    return {"stroke_volume": wave["stroke_volume_m3"], "heart_rate": wave["heart_rate_hz"],
            "ejection_time": wave["ejection_time_s"]}


def read_json(path) -> Network:
    """Read and check a JSON network file (the YAML document's structure, SPEC section 2)."""
    from .reader import read_network
    from .yamlread import LocatedDict, LocatedList

    file = str(path)
    try:
        with open(path, encoding="utf-8") as handle:
            raw = json.load(handle, object_pairs_hook=_no_duplicates)
    except json.JSONDecodeError as exc:
        raise NetworkSpecError([Problem(file, exc.lineno, exc.colno, "file",
                                        f"not valid JSON: {exc.msg}")]) from None
    except ValueError as exc:
        raise NetworkSpecError([Problem(file, 0, 0, "file", str(exc), "keep one of them")]) from None

    def located(value):
        if isinstance(value, dict):
            out = LocatedDict((k, located(x)) for k, x in value.items())
            out.file, out.line, out.column = file, 0, 0
            out._where, out._key_where = {}, {}
            return out
        if isinstance(value, list):
            out = LocatedList(located(x) for x in value)
            out.file, out.line, out.column = file, 0, 0
            out._where = []
            return out
        return value

    return read_network(located(raw), file, Path(path).parent)


def _no_duplicates(pairs):
    keys = [k for k, _ in pairs]
    if len(set(keys)) != len(keys):
        dup = sorted({k for k in keys if keys.count(k) > 1})
        raise ValueError(f"duplicate key {dup[0]!r} in a JSON object")
    return dict(pairs)
