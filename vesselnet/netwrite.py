"""A network as files: a small YAML file that references CSV tables (SPEC section 2).

The inverse of :func:`vesselnet.reader.load_network` for networks without
lesions, occlusions, distensible walls or pulsatile inflows: what large or
generated networks carry.  Lengths, radii and positions are written in
micrometres, pressures in mmHg, flows in mL/min, resistances in mmHg*s/mL,
each table header naming its unit; numbers keep 10 significant digits.

Examples
--------
>>> import pathlib, tempfile
>>> from vesselnet.model import Network
>>> from vesselnet.reader import load_network
>>> net = Network.build(nodes={"in": {"pressure_pa": 8000.0}, "out": {"pressure_pa": 2000.0}},
...     vessels=[{"id": "c", "from": "in", "to": "out", "length_m": 1e-4, "radius_m": 3e-6}])
>>> paths = write_network(net, pathlib.Path(tempfile.mkdtemp()) / "tiny.yaml")
>>> [p.name for p in paths]
['tiny.yaml', 'tiny_vessels.csv', 'tiny_nodes.csv']
>>> again = load_network(paths[0])
>>> again.vessels.ids, round(float(again.vessels.radius_in_m[0]) * 1e6, 3)
(('c',), 3.0)
"""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import numpy as np

from .errors import NetworkSpecError, Problem
from .model import Network
from .units import MMHG_PA
from .writers import atomic_write

UM = 1e-6
ML_MIN = 1e-6 / 60


def _cells(values, scale: float = 1.0) -> np.ndarray:
    """Numbers in the written unit as text with 10 significant digits, NaN as empty."""
    out = np.asarray(values, dtype=float) / scale
    return np.array(["" if not np.isfinite(x) else f"{x:.10g}" for x in out], dtype=object)


def _refuse_unwritable(network: Network) -> None:
    v = network.vessels
    problems = []
    for label, mask in (("lesions", ~np.isnan(v.stenosis_reduction)), ("occlusions", v.occluded),
                        ("distensible walls", v.distensible)):
        if mask.any():
            problems.append(Problem(network.source, 0, 0, "network",
                                    f"{int(mask.sum())} vessel(s) carry {label}, which tables "
                                    "cannot hold", "write those vessels in YAML"))
    if network.nodes.inflow_waveforms:
        problems.append(Problem(network.source, 0, 0, "network", "pulsatile inflows cannot be "
                                "written to tables", "write those nodes in YAML"))
    if problems:
        raise NetworkSpecError(problems)


def _vessel_table(network: Network) -> str:
    v, ids = network.vessels, network.nodes.ids
    nodes = np.array(ids, dtype=object)
    text = {"from": list(nodes[v.from_node]), "to": list(nodes[v.to_node])}
    tags = [""] * len(v)
    for tag, rows in v.tags.items():
        for r in rows:
            tags[r] = f"{tags[r]};{tag}" if tags[r] else tag
    if any(tags):
        text["tags"] = tags
    cols = {"length": _cells(v.length_m, UM)}
    if np.array_equal(v.radius_in_m, v.radius_out_m):
        cols["radius"] = _cells(v.radius_in_m, UM)
    else:
        cols["radius_in"] = _cells(v.radius_in_m, UM)
        cols["radius_out"] = _cells(v.radius_out_m, UM)
    if not np.isnan(v.wall_thickness_m).all():
        cols["wall_thickness"] = _cells(v.wall_thickness_m, UM)
        cols["wall_modulus"] = _cells(v.wall_modulus_pa, 1e6)
    units = {"length": "um", "radius": "um", "radius_in": "um", "radius_out": "um",
             "wall_thickness": "um", "wall_modulus": "MPa"}
    return _table(v.ids, text, cols, units)


def _node_table(network: Network) -> str:
    n = network.nodes
    cols = {"pressure": _cells(n.pressure_pa, MMHG_PA), "inflow": _cells(n.inflow_m3_s, ML_MIN),
            "hematocrit": _cells(n.hematocrit)}
    cols = {k: c for k, c in cols.items() if any(c)}
    if np.isfinite(n.position_m).any():
        for axis, k in zip("xyz", range(3)):
            cols[axis] = _cells(n.position_m[:, k], UM)
    units = {"pressure": "mmHg", "inflow": "mL/min", "x": "um", "y": "um", "z": "um"}
    return _table(n.ids, {}, cols, units)


def _bed_table(network: Network) -> str:
    b = network.beds
    text = {"node": [network.nodes.ids[i] for i in b.node]}
    if (b.outflow_node >= 0).any():
        text["outflow_node"] = [network.nodes.ids[i] if i >= 0 else "" for i in b.outflow_node]
    cols = {"resistance": _cells(b.resistance_pa_s_m3, MMHG_PA / 1e-6),
            "outflow_pressure": _cells(b.outflow_pressure_pa, MMHG_PA)}
    if not np.isnan(b.share).all():
        cols["share"] = _cells(b.share)
    return _table(b.ids, text, cols, {"resistance": "mmHg*s/mL", "outflow_pressure": "mmHg"})


def _table(ids, text, cols, units) -> str:
    """A CSV input table: ``id``, text columns, then numbers (already text) under ``name[unit]``."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["id"] + list(text) + [f"{k}[{units[k]}]" if k in units else k for k in cols])
    writer.writerows(zip(ids, *text.values(), *cols.values()))
    return buffer.getvalue()


def _blood_yaml(network: Network) -> list[str]:
    blood = network.blood
    if blood.viscosity_law == "constant":
        viscosity = f"{blood.viscosity_pa_s * 1e3:.10g} cP"
    else:
        viscosity = (f"{{law: {blood.viscosity_law}, plasma: "
                     f"{blood.plasma_viscosity_pa_s * 1e3:.10g} cP}}")
    return ["blood:", f"  viscosity: {viscosity}", f"  separation: {blood.separation}",
            f"  hematocrit: {blood.hematocrit:.10g}",
            f"  density: {blood.density_kg_m3:.10g} kg/m3"]


def write_network(network: Network, yaml_path, *, comment: str = "") -> list[Path]:
    """Write ``network`` as ``NAME.yaml`` with ``NAME_vessels.csv``, ``NAME_nodes.csv``
    (and ``NAME_beds.csv`` when it has beds) beside it.

    Parameters
    ----------
    network : Network
        Without lesions, occlusions, distensible walls or pulsatile inflows.
    yaml_path : str or Path
        The YAML file to write (``.yaml`` is added when missing); tables go
        beside it, referenced by relative paths.
    comment : str, optional
        Text written as ``#`` comment lines at the top of the YAML file.

    Returns
    -------
    list of Path
        The files written, the YAML file first.

    Raises
    ------
    NetworkSpecError
        The network holds something tables cannot carry.
    """
    _refuse_unwritable(network)
    path = Path(yaml_path)
    if path.suffix != ".yaml":
        path = path.with_name(path.name + ".yaml")
    stem = path.name.removesuffix(".yaml")
    tables = {"vessels_table": (f"{stem}_vessels.csv", _vessel_table(network)),
              "nodes_table": (f"{stem}_nodes.csv", _node_table(network))}
    if len(network.beds):
        tables["beds_table"] = (f"{stem}_beds.csv", _bed_table(network))
    lines = [f"# {line}".rstrip() for line in comment.splitlines()]
    lines += ["vesselnet: 1", f"name: {json.dumps(network.name)}",
              "units: {length: um, radius: um, pressure: mmHg, flow: mL/min}"]
    lines += _blood_yaml(network)
    lines.append(f"venous_pressure: {network.venous_pressure_pa / MMHG_PA:.10g} mmHg")
    lines += [f"{key}: {name}" for key, (name, _) in tables.items()]
    written = []
    for name, text in tables.values():
        atomic_write(path.with_name(name), text)
        written.append(path.with_name(name))
    atomic_write(path, "\n".join(lines) + "\n")
    return [path] + written
