"""Network files (SPEC section 2) into a checked :class:`~vesselnet.model.Network`.

Every problem in a file is collected and reported together, each with
``file:line:col``, the item and, where obvious, the fix.

Examples
--------
>>> text = '''
... vesselnet: 1
... nodes: {root: {pressure: 100}}
... vessels:
...   - {id: a, from: root, to: tip, length: 10, radius: 2}
... beds:
...   - {id: organ, node: tip, resistance: 10}
... '''
>>> net = read_network_text(text, "tiny.yaml")
>>> net.vessels.ids, round(float(net.vessels.length_m[0]), 3), net.beds.ids
(('a',), 0.1, ('organ',))
"""

from __future__ import annotations

import dataclasses
import operator
from pathlib import Path

import numpy as np

from . import csvtables, waveformtable, yamlread
from .errors import NetworkSpecError, Problem, UnitError
from .fields import FieldReader, near_miss
from .model import NAN, Blood, Network
from .topology import topology_problems
from .units import DEFAULT_UNITS, MMHG_PA, factor

FORMAT_VERSION = 1
TOP_KEYS = ("vesselnet", "name", "description", "units", "blood", "venous_pressure", "nodes",
            "vessels", "beds", "vessels_table", "beds_table", "nodes_table", "distensible")
VESSEL_KEYS = ("id", "from", "to", "length", "radius", "diameter", "wall", "tags", "stenosis")
WALL_KEYS = ("thickness", "modulus", "poisson", "distensible", "external_pressure")
STENOSIS_KEYS = ("reduction", "length", "at")
NODE_KEYS = ("pressure", "inflow", "position", "target_pressure", "hematocrit")
BED_KEYS = ("id", "node", "resistance", "outflow_pressure", "outflow_node", "share", "windkessel",
            "autoregulation")
BLOOD_KEYS = ("viscosity", "density", "hematocrit", "separation")
VISCOSITY_LAWS = ("constant", "pries-vitro", "pries-vivo")
SEPARATION_LAWS = ("none", "pries-1990", "pries-2005")


def load_network(path) -> Network:
    """Read, check and return the network in a YAML file.

    Parameters
    ----------
    path : str or Path
        The network file; table paths inside it are relative to it.  A
        ``.json`` file holds the same document as JSON, a ``.npz`` file the
        binary columns written by ``vesselnet convert`` (see
        :mod:`vesselnet.netfiles`); any other name is read as YAML.

    Returns
    -------
    Network
        In SI, checked: ids unique and resolved, values in range, every
        connected part referenced to a pressure.

    Raises
    ------
    NetworkSpecError
        With every problem found, each naming file, line, item and fix.
    """
    suffix = Path(path).suffix.lower()
    if suffix in (".json", ".npz"):
        from . import netfiles

        return netfiles.read_json(path) if suffix == ".json" else netfiles.read_npz(path)
    doc = yamlread.load_file(path)
    return read_network(doc, str(path), Path(path).parent)


def read_network_text(text: str, file: str = "<input>", base_dir=".") -> Network:
    """Like :func:`load_network`, from YAML text."""
    return read_network(yamlread.load_text(text, file), file, Path(base_dir))


def read_network(doc, file: str, base_dir: Path) -> Network:
    """Build a checked network from a parsed document (see :mod:`vesselnet.yamlread`)."""
    fr = FieldReader(file)
    if not isinstance(doc, dict):
        what = "empty" if doc is None else "not a mapping of keys to values"
        raise NetworkSpecError([Problem(file, 1 if doc is not None else 0, 0, "",
                                        f"the file is {what}",
                                        "start it with 'vesselnet: 1' and list 'vessels:'")])
    check_version(fr, doc)
    fr.allow(doc, TOP_KEYS, "top level")
    read_units(fr, doc)
    blood = read_blood(fr, doc)
    venous = fr.quantity(doc, "venous_pressure", "pressure", "venous_pressure",
                         default=5 * MMHG_PA)
    vessels, tags = read_vessels(fr, doc)
    nodes, waveforms = read_nodes(fr, doc, base_dir)
    beds = read_beds(fr, doc)
    origins = {}  # section -> (first row from its table, table file): problems name the table
    for key, into in (("vessels_table", vessels), ("nodes_table", nodes), ("beds_table", beds)):
        if key in doc:
            path = fr.text(doc, key, key)
            if path:
                table = csvtables.read_table(base_dir / path, key.split("_")[0], fr.units,
                                             shown_as=path)
                fr.problems.extend(table.problems)
                origins[key.split("_")[0]] = (len(into["id"]), path)
                _append(into, table.columns, table.tags, tags)
    read_distensible(fr, doc, vessels, tags)
    if not fr.problems and not vessels["id"]:
        fr.add((doc.line, doc.column), "vessels", "the network has no vessels",
               "list at least one vessel under 'vessels:'")
    check_references(fr, vessels, nodes, beds, origins)
    fr.raise_if_any()
    network = Network.from_columns(
        vessels=vessels, nodes=nodes, beds=beds, tags=tags, name=_name(fr, doc, file),
        blood=blood, venous_pressure_pa=venous, source=file, inflow_waveforms=waveforms)
    problems = topology_problems(network)
    if problems and origins:  # their lines may be table rows: give the nodes, not a wrong place
        problems = [dataclasses.replace(p, line=0, column=0) for p in problems]
    if problems:
        raise NetworkSpecError(problems)
    return network


def begin_file(doc, file: str, top_keys, start_hint: str) -> FieldReader:
    """The opening every vesselnet file shares: a mapping, ``vesselnet: 1``, known top-level
    keys, the file's ``units:``.  Returns the reader that collects the file's problems.

    Raises
    ------
    NetworkSpecError
        The document is not a mapping; ``start_hint`` says how such a file starts.
    """
    fr = FieldReader(file)
    if not isinstance(doc, dict):
        raise NetworkSpecError([Problem(file, 1, 0, "", "the file is not a mapping of keys to values",
                                        start_hint)])
    check_version(fr, doc)
    fr.allow(doc, top_keys, "top level")
    read_units(fr, doc)
    return fr


def check_version(fr: FieldReader, doc) -> None:
    """Require ``vesselnet: 1``."""
    if "vesselnet" not in doc:
        fr.add((1, 1), "top level", "missing key 'vesselnet' (the format version)",
               f"add 'vesselnet: {FORMAT_VERSION}' as the first line")
    elif doc["vesselnet"] != FORMAT_VERSION or isinstance(doc["vesselnet"], bool):
        fr.add(doc.where("vesselnet"), "vesselnet",
               f"format version {doc['vesselnet']!r} is not supported",
               f"this vesselnet reads version {FORMAT_VERSION}")


def read_units(fr: FieldReader, doc) -> None:
    """Apply a top-level ``units:`` mapping to the reader's defaults."""
    units = fr.mapping(doc, "units", "units")
    if units is None:
        return
    fr.allow(units, DEFAULT_UNITS, "units")
    for kind, unit in units.items():
        if kind not in DEFAULT_UNITS:
            continue
        try:
            factor(str(unit), kind)
        except UnitError as exc:
            fr.add(units.where(kind), f"units.{kind}", str(exc))
            continue
        fr.units[kind] = str(unit)


def read_blood(fr: FieldReader, doc) -> Blood:
    """The ``blood:`` section; documented defaults (3.5 cP, 1060 kg/m^3, 0.45) when absent."""
    blood = fr.mapping(doc, "blood", "blood")
    if blood is None:
        return Blood()
    fr.allow(blood, BLOOD_KEYS, "blood")
    default = Blood()
    law, plasma, constant = "constant", default.plasma_viscosity_pa_s, default.viscosity_pa_s
    visc = blood.get("viscosity")
    if isinstance(visc, dict):
        fr.allow(visc, ("law", "plasma", "value"), "blood.viscosity")
        law = fr.text(visc, "law", "blood.viscosity", required=True, default="constant")
        if law not in VISCOSITY_LAWS:
            fr.add(visc.where("law"), "blood.viscosity", f"unknown viscosity law '{law}'",
                   near_miss(law, VISCOSITY_LAWS) or "use one of " + ", ".join(VISCOSITY_LAWS))
        plasma = fr.quantity(visc, "plasma", "viscosity", "blood.viscosity", positive=True,
                             default=plasma)
        constant = fr.quantity(visc, "value", "viscosity", "blood.viscosity", positive=True,
                               default=constant)
    elif visc is not None:
        constant = fr.quantity(blood, "viscosity", "viscosity", "blood", positive=True,
                               default=constant)
    separation = fr.text(blood, "separation", "blood", default="none")
    if separation not in SEPARATION_LAWS:
        fr.add(blood.where("separation"), "blood", f"unknown separation law '{separation}'",
               near_miss(separation, SEPARATION_LAWS) or "use one of " + ", ".join(SEPARATION_LAWS))
    return Blood(viscosity_pa_s=constant, viscosity_law=law, plasma_viscosity_pa_s=plasma,
                 density_kg_m3=fr.quantity(blood, "density", "density", "blood", positive=True,
                                           default=default.density_kg_m3),
                 hematocrit=fr.quantity(blood, "hematocrit", "fraction", "blood",
                                        below_one=True, default=default.hematocrit),
                 separation=separation)


def _empty_vessels() -> dict[str, list]:
    return {k: [] for k in ("id", "from", "to", "length_m", "radius_in_m", "radius_out_m",
                            "wall_thickness_m", "wall_modulus_pa", "wall_poisson", "distensible",
                            "external_pressure_pa", "stenosis_reduction", "stenosis_length_m",
                            "stenosis_at", "line")}


def read_vessels(fr: FieldReader, doc) -> tuple[dict[str, list], dict[str, list[int]]]:
    """The ``vessels:`` list as SI columns, and tag -> rows."""
    cols, tags = _empty_vessels(), {}
    items = fr.sequence(doc, "vessels", "vessels", required="vessels_table" not in doc)
    for i, v in enumerate(items or ()):
        label = f"vessels[{i}]"
        if not isinstance(v, dict):
            fr.add(items.where(i), label, "a vessel must be a mapping with id, from, to, length, radius")
            continue
        vid = fr.text(v, "id", label, required=True, default=f"#{i}")
        label = f"vessels[{i}] '{vid}'"
        fr.allow(v, VESSEL_KEYS, label)
        cols["id"].append(vid)
        cols["from"].append(fr.text(v, "from", label, required=True, default=""))
        cols["to"].append(fr.text(v, "to", label, required=True, default=""))
        length = fr.quantity(v, "length", "length", label, required=True, positive=True)
        cols["length_m"].append(length)
        r_in, r_out = read_radius(fr, v, label)
        cols["radius_in_m"].append(r_in)
        cols["radius_out_m"].append(r_out)
        wall = fr.mapping(v, "wall", label) or {}
        if wall:
            fr.allow(wall, WALL_KEYS, label + " wall")
        cols["wall_thickness_m"].append(fr.quantity(wall, "thickness", "radius", label + " wall",
                                                    positive=True))
        cols["wall_modulus_pa"].append(fr.quantity(wall, "modulus", "modulus", label + " wall",
                                                   positive=True))
        cols["wall_poisson"].append(fr.quantity(wall, "poisson", "fraction", label + " wall",
                                                between=(0.0, 0.5), default=0.5))
        distensible = fr.flag(wall, "distensible", label + " wall") if wall else False
        if distensible and not ("thickness" in wall and "modulus" in wall):
            fr.add(v.where("wall"), label, "a distensible wall needs thickness and modulus",
                   "add both to 'wall:'")
        cols["distensible"].append(distensible)
        cols["external_pressure_pa"].append(fr.quantity(wall, "external_pressure", "pressure",
                                                        label + " wall", default=0.0))
        read_stenosis(fr, v, label, length, cols)
        cols["line"].append(v.line)
        for tag in read_tags(fr, v, label):
            tags.setdefault(tag, []).append(len(cols["id"]) - 1)
    return cols, tags


def read_radius(fr: FieldReader, v, label: str) -> tuple[float, float]:
    """Radius (or diameter), possibly a taper ``{in: , out: }``; SI radii at from and to."""
    given = [k for k in ("radius", "diameter") if k in v]
    if len(given) != 1:
        fr.add((v.line, v.column), label,
               "give exactly one of 'radius' and 'diameter'" if given else "missing key 'radius'",
               "" if given else "add 'radius:' (mm by default) or 'diameter:'")
        return NAN, NAN
    key = given[0]
    scale = 0.5 if key == "diameter" else 1.0
    value = v[key]
    if isinstance(value, dict):
        fr.allow(value, ("in", "out"), f"{label} {key}")
        r_in = fr.quantity(value, "in", "radius", f"{label} {key}", required=True, positive=True)
        r_out = fr.quantity(value, "out", "radius", f"{label} {key}", required=True, positive=True)
        return r_in * scale, r_out * scale
    r = fr.quantity(v, key, "radius", label, required=True, positive=True)
    return r * scale, r * scale


def read_stenosis(fr: FieldReader, v, label: str, length: float, cols) -> None:
    """An existing lesion: diameter ``reduction`` (0..1), ``length``, position ``at``."""
    sten = fr.mapping(v, "stenosis", label)
    reduction = lesion_length = NAN
    at = 0.5
    if sten is not None:
        fr.allow(sten, STENOSIS_KEYS, label + " stenosis")
        reduction = fr.quantity(sten, "reduction", "fraction", label + " stenosis",
                                required=True, below_one=True)
        lesion_length = fr.quantity(sten, "length", "length", label + " stenosis",
                                    required=True, positive=True)
        at = fr.quantity(sten, "at", "fraction", label + " stenosis", between=(0.0, 1.0),
                         default=0.5)
        if lesion_length > length:
            fr.add(sten.where("length"), label + " stenosis",
                   "the lesion is longer than its vessel", "shorten the lesion")
    cols["stenosis_reduction"].append(reduction)
    cols["stenosis_length_m"].append(lesion_length)
    cols["stenosis_at"].append(at)


def read_tags(fr: FieldReader, v, label: str) -> list[str]:
    """A vessel's ``tags:`` list of names."""
    tags = v.get("tags")
    if tags is None:
        return []
    if isinstance(tags, str):
        tags = [tags]
    if not isinstance(tags, list) or not all(isinstance(t, (str, int)) and not isinstance(t, bool)
                                             for t in tags):
        fr.add(v.where("tags"), label, "'tags' must be a list of names, like [leg, left]")
        return []
    return [str(t) for t in tags]


def read_nodes(fr: FieldReader, doc, base_dir=Path(".")) -> tuple[dict[str, list], dict[str, dict]]:
    """The ``nodes:`` mapping as SI columns, and pulsatile inflow waveforms by node id."""
    cols = {k: [] for k in ("id", "pressure_pa", "inflow_m3_s", "position_m",
                            "target_pressure_pa", "line", "hematocrit")}
    waveforms: dict[str, dict] = {}
    nodes = fr.mapping(doc, "nodes", "nodes")
    for node_id, props in (nodes or {}).items():
        label = f"nodes '{node_id}'"
        if props is None:
            props = yamlread.LocatedDict()
            props.file, props.line, props.column = fr.file, *nodes.where(node_id)
            props._where, props._key_where = {}, {}
        if not isinstance(props, dict):
            fr.add(nodes.where(node_id), label, "a node must be a mapping like {pressure: 95}")
            continue
        fr.allow(props, NODE_KEYS, label)
        cols["id"].append(str(node_id))
        pressure = fr.quantity(props, "pressure", "pressure", label)
        cols["pressure_pa"].append(pressure)
        inflow = props.get("inflow")
        if isinstance(inflow, dict):
            wave = read_waveform(fr, inflow, label, base_dir)
            if wave:
                waveforms[str(node_id)] = wave
            cols["inflow_m3_s"].append(wave.get("mean_m3_s", NAN) if wave else NAN)
        else:
            cols["inflow_m3_s"].append(fr.quantity(props, "inflow", "flow", label))
        if "pressure" in props and "inflow" in props:
            fr.add(props.key_where("inflow"), label, "a node takes a pressure or an inflow, not both",
                   "keep one")
        cols["position_m"].append(read_position(fr, props, label))
        cols["target_pressure_pa"].append(fr.quantity(props, "target_pressure", "pressure", label))
        cols["hematocrit"].append(fr.quantity(props, "hematocrit", "fraction", label, below_one=True))
        cols["line"].append(props.line)
    return cols, waveforms


def read_position(fr: FieldReader, props, label: str) -> tuple[float, float, float]:
    """``position: [x, y]`` or ``[x, y, z]`` in the length unit."""
    pos = props.get("position")
    if pos is None:
        return (NAN, NAN, NAN)
    if not isinstance(pos, list) or len(pos) not in (2, 3):
        fr.add(props.where("position"), label, "'position' must be a list [x, y] or [x, y, z]")
        return (NAN, NAN, NAN)
    out = [fr.quantity(pos_map, 0, "length", label + " position")
           for pos_map in [_index_map(pos, k) for k in range(len(pos))]]
    return tuple(out + [0.0] * (3 - len(out)))


def _index_map(seq, k):
    """A one-key located mapping {0: seq[k]} so list items read like fields."""
    m = yamlread.LocatedDict({0: seq[k]})
    m.file, (m.line, m.column) = seq.file, seq.where(k)
    m._where, m._key_where = {0: seq.where(k)}, {0: seq.where(k)}
    return m


def read_waveform(fr: FieldReader, wave, label: str, base_dir=Path(".")) -> dict:
    """A pulsatile inflow (SPEC section 7) in SI, with its ``mean_m3_s``."""
    label = label + " inflow"
    if "csv" in wave:   # {csv: file.csv}: a table of one cycle (vesselnet.waveformtable)
        fr.allow(wave, ("csv",), label)
        path = fr.text(wave, "csv", label, required=True)
        if not path:
            return {}
        table = waveformtable.read_waveform_table(base_dir / path, "flow", fr.units, shown_as=path)
        fr.problems.extend(table.problems)
        if table.problems:
            return {}
        return {"period_s": table.period_s, "samples_m3_s": tuple(table.samples.tolist()),
                "mean_m3_s": float(np.mean(table.samples)), "csv": path}
    if "samples" in wave:
        fr.allow(wave, ("period", "samples"), label)
        period = fr.quantity(wave, "period", "time", label, required=True, positive=True)
        samples = wave.get("samples")
        if not isinstance(samples, list) or len(samples) < 2:
            fr.add(wave.where("samples"), label, "'samples' must be a list of at least 2 flows")
            return {}
        flows = [fr.quantity(_index_map(samples, k), 0, "flow", label) for k in range(len(samples))]
        return {"period_s": period, "samples_m3_s": tuple(flows),
                "mean_m3_s": float(np.mean(flows))}
    fr.allow(wave, ("stroke_volume", "heart_rate", "ejection_time"), label)
    sv = fr.quantity(wave, "stroke_volume", "volume", label, required=True, positive=True)
    hr = fr.quantity(wave, "heart_rate", "heart_rate", label, required=True, positive=True)
    et = fr.quantity(wave, "ejection_time", "time", label, required=True, positive=True)
    if et * hr >= 1:
        fr.add(wave.where("ejection_time"), label, "ejection time is longer than the heart cycle",
               "shorten ejection_time or lower heart_rate")
    return {"stroke_volume_m3": sv, "heart_rate_hz": hr, "ejection_time_s": et,
            "mean_m3_s": sv * hr}


def read_beds(fr: FieldReader, doc) -> dict[str, list]:
    """The ``beds:`` list as SI columns."""
    cols = {k: [] for k in ("id", "node", "resistance_pa_s_m3", "outflow_pressure_pa",
                            "outflow_node", "share", "windkessel_proximal_pa_s_m3",
                            "windkessel_compliance_m3_pa", "line", "target_flow_m3_s",
                            "min_resistance_pa_s_m3")}
    items = fr.sequence(doc, "beds", "beds")
    for i, b in enumerate(items or ()):
        label = f"beds[{i}]"
        if not isinstance(b, dict):
            fr.add(items.where(i), label, "a bed must be a mapping with id, node, resistance")
            continue
        bid = fr.text(b, "id", label, required=True, default=f"#{i}")
        label = f"beds[{i}] '{bid}'"
        fr.allow(b, BED_KEYS, label)
        cols["id"].append(bid)
        cols["node"].append(fr.text(b, "node", label, required=True, default=""))
        resistance = fr.quantity(b, "resistance", "resistance", label, required=True, positive=True)
        cols["resistance_pa_s_m3"].append(resistance)
        cols["outflow_pressure_pa"].append(fr.quantity(b, "outflow_pressure", "pressure", label))
        cols["outflow_node"].append(fr.text(b, "outflow_node", label))
        if "outflow_pressure" in b and "outflow_node" in b:
            fr.add(b.key_where("outflow_node"), label,
                   "a bed drains to an outflow pressure or an outflow node, not both", "keep one")
        cols["share"].append(fr.quantity(b, "share", "fraction", label, between=(0.0, 1.0)))
        wk = fr.mapping(b, "windkessel", label) or {}
        if wk:
            fr.allow(wk, ("proximal", "compliance"), label + " windkessel")
        proximal = fr.quantity(wk, "proximal", "resistance", label + " windkessel",
                               required=bool(wk), nonnegative=True)
        if proximal >= resistance:
            fr.add(wk.where("proximal"), label + " windkessel",
                   "the proximal resistance must be below the bed's total resistance",
                   "the distal part is resistance minus proximal")
        cols["windkessel_proximal_pa_s_m3"].append(proximal)
        cols["windkessel_compliance_m3_pa"].append(
            fr.quantity(wk, "compliance", "compliance", label + " windkessel", required=bool(wk),
                        positive=True))
        cols["line"].append(b.line)
        target, minimum = read_autoregulation(fr, b, label, resistance)
        cols["target_flow_m3_s"].append(target)
        cols["min_resistance_pa_s_m3"].append(minimum)
    return cols


def read_autoregulation(fr: FieldReader, b, label: str, resistance: float) -> tuple[float, float]:
    """A bed's ``autoregulation: {min_resistance: R | reserve: x, target_flow: Q}`` in SI.

    Returns (target flow, minimum resistance), NaN when absent; ``reserve``
    is the resting over the minimum resistance (>= 1).
    """
    auto = fr.mapping(b, "autoregulation", label)
    if auto is None:
        return NAN, NAN
    item = label + " autoregulation"
    fr.allow(auto, ("min_resistance", "reserve", "target_flow"), item)
    target = fr.quantity(auto, "target_flow", "flow", item, positive=True)
    given = [k for k in ("min_resistance", "reserve") if k in auto]
    if len(given) != 1:
        fr.add(b.where("autoregulation"), item,
               "give exactly one of 'min_resistance' and 'reserve'" if given else
               "missing key 'min_resistance'",
               "" if given else "add 'min_resistance:' (the fully dilated bed's resistance) or "
               "'reserve:' (resting over minimum resistance, for example 4)")
        return target, NAN
    if given[0] == "reserve":
        reserve = fr.quantity(auto, "reserve", "fraction", item, positive=True)
        if reserve < 1:
            fr.add(auto.where("reserve"), item, f"reserve must be at least 1, got {reserve:g}",
                   "the fully dilated bed cannot resist more than the resting one")
            return target, NAN
        return target, resistance / reserve
    minimum = fr.quantity(auto, "min_resistance", "resistance", item, positive=True)
    if minimum > resistance:
        fr.add(auto.where("min_resistance"), item,
               "min_resistance is above the bed's resting resistance",
               "the fully dilated bed resists less: lower it, or use 'reserve:'")
        return target, NAN
    return target, minimum


def _append(into: dict[str, list], columns: dict[str, object], table_tags, tags) -> None:
    """Join a table's columns after the YAML items of the same section (arrays stay arrays)."""
    offset = len(into["id"])
    n = len(columns.get("id", ()))
    for key in into:
        if key in columns:
            new = columns[key]
        else:
            fill = {"distensible": False, "wall_poisson": 0.5, "stenosis_at": 0.5,
                    "external_pressure_pa": 0.0, "line": 0, "outflow_node": None,
                    "position_m": (NAN, NAN, NAN)}.get(key, NAN)
            new = [fill] * n if key in ("outflow_node", "position_m") else np.full(n, fill)
        if isinstance(new, np.ndarray) and key not in ("id", "from", "to", "node", "outflow_node"):
            old = np.asarray(into[key]) if len(into[key]) else np.empty((0,) + new.shape[1:],
                                                                        dtype=new.dtype)
            into[key] = np.concatenate([old.reshape((-1,) + new.shape[1:]), new]) if offset else new
        else:
            into[key] = list(into[key]) + list(new) if offset else list(new)
    for tag, rows in (table_tags or {}).items():
        tags.setdefault(tag, []).extend(int(r) + offset for r in rows)


def check_references(fr: FieldReader, vessels, nodes, beds, origins=None) -> None:
    """Unique ids, no self-loops, every referenced node reached by a vessel.

    ``origins`` maps a section to (first row read from its table, table
    file), so that problems of table rows name the table and its line.
    """
    touched = set(vessels["from"]) | set(vessels["to"])

    def add(section, cols, i, item, message, fix=""):
        start, table = (origins or {}).get(section, (None, None))
        line = int(cols["line"][i])
        if start is not None and i >= start:
            fr.problems.append(Problem(table, line, 0, item, message, fix))
        else:
            fr.add((line, 0), item, message, fix)

    _duplicates(add, vessels, "vessels")
    _duplicates(add, beds, "beds")
    loops = any(map(operator.eq, vessels["from"], vessels["to"]))    # one C-level pass first
    for i, (vid, a, b) in enumerate(zip(vessels["id"], vessels["from"], vessels["to"]) if loops else ()):
        if a and a == b:
            add("vessels", vessels, i, f"vessels[{i}] '{vid}'",
                f"the vessel starts and ends at node '{a}' (a self-loop)", "join two different nodes")
    for i, node_id in enumerate(() if touched.issuperset(nodes["id"]) else nodes["id"]):
        if node_id not in touched:
            add("nodes", nodes, i, f"nodes '{node_id}'", "no vessel joins this node",
                near_miss(node_id, touched) or "join it with a vessel or remove it")
    bad_beds = not all(touched.issuperset(filter(None, beds[k])) for k in ("node", "outflow_node"))
    for i, bid in enumerate(beds["id"] if bad_beds else ()):
        for key in ("node", "outflow_node"):
            ref = beds[key][i]
            if ref and ref not in touched:
                add("beds", beds, i, f"beds[{i}] '{bid}'", f"{key} '{ref}' is not joined by any vessel",
                    near_miss(ref, touched) or "name a node that a vessel joins")


def _duplicates(add, cols, section: str) -> None:
    if len(set(cols["id"])) == len(cols["id"]):
        return
    seen: dict[str, int] = {}
    for i, item in enumerate(cols["id"]):
        if item in seen:
            add(section, cols, i, f"{section}[{i}] '{item}'",
                f"duplicate id (also {section}[{seen[item]}])", "give each item its own id")
        else:
            seen[item] = i


def _name(fr: FieldReader, doc, file: str) -> str:
    return fr.text(doc, "name", "name", default=Path(file).stem) or Path(file).stem


def read_distensible(fr: FieldReader, doc, vessels, tags) -> None:
    """Top-level ``distensible: {tags: [..] | all: true, external_pressure: P}`` (opt-in by tag).

    Marks the selected vessels (YAML and table rows) distensible, except
    those whose own wall says ``distensible: false``; ``external_pressure``
    applies to the selected vessels whose wall gives none.  Every selected
    vessel needs a wall thickness and modulus.
    """
    spec = fr.mapping(doc, "distensible", "distensible")
    if spec is None:
        return
    item = "distensible"
    fr.allow(spec, ("tags", "all", "external_pressure"), item)
    n = len(vessels["id"])
    if ("tags" in spec) == ("all" in spec):
        fr.add(doc.where("distensible"), item, "give exactly one of 'tags' and 'all'",
               "'tags: [venous]' selects tagged vessels, 'all: true' every vessel")
        return
    selected = np.zeros(n, dtype=bool)
    if "all" in spec:
        selected[:] = fr.flag(spec, "all", item)
    else:
        names = read_tags(fr, spec, item)
        for name in names:
            if name in tags:
                selected[tags[name]] = True
            else:
                fr.add(spec.where("tags"), item, f"no vessel carries the tag '{name}'",
                       near_miss(name, tags) or "tag the vessels or fix the name")
    own = [v.get("wall") if isinstance(v, dict) and isinstance(v.get("wall"), dict) else {}
           for v in doc.get("vessels") or () if isinstance(v, dict)]
    own += [{}] * (n - len(own))
    selected &= np.array([w.get("distensible", True) is not False for w in own], dtype=bool)
    external = fr.quantity(spec, "external_pressure", "pressure", item)
    lacking = [vessels["id"][i] for i in np.flatnonzero(selected)
               if not (vessels["wall_thickness_m"][i] > 0 and vessels["wall_modulus_pa"][i] > 0)]
    if lacking:
        shown = ", ".join(f"'{x}'" for x in lacking[:5]) + (" ..." if len(lacking) > 5 else "")
        fr.add(doc.where("distensible"), item,
               f"{len(lacking)} selected vessel(s) lack a wall thickness or modulus: {shown}",
               "give them 'wall: {thickness: , modulus: }' (or table columns wall_thickness, "
               "wall_modulus), or narrow the selection")
    for i in np.flatnonzero(selected):
        vessels["distensible"][i] = True
        if not np.isnan(external) and "external_pressure" not in own[i]:
            vessels["external_pressure_pa"][i] = external
