"""A network back into a network file (SPEC section 2) that reads back to the same network.

Every value is written in the file's default unit (SPEC section 1, stated
in the ``units:`` map) with 15 significant digits, items as one flow
mapping a line in JSON syntax (valid YAML, quoting every id safely).
Comments and the layout of the original file are not kept.

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
"""

from __future__ import annotations

import json
import math

import numpy as np

from .errors import VesselnetError
from .model import Network
from .units import DEFAULT_UNITS, from_si

FORMAT_VERSION = 1
DIGITS = 15


def _num(value: float, kind: str):
    x = float(from_si(float(value), kind, DEFAULT_UNITS[kind])) if kind != "fraction" else float(value)
    return float(f"{x:.{DIGITS}g}")


def _line(mapping: dict) -> str:
    return json.dumps(mapping, ensure_ascii=False, allow_nan=False)


def network_yaml(network: Network) -> str:
    """The text of a network file describing ``network``.

    Parameters
    ----------
    network : Network

    Returns
    -------
    str
        YAML text (SPEC section 2) in the default units.

    Raises
    ------
    VesselnetError
        An occluded vessel (a file cannot say so: apply the change again, or
        remove the vessel).
    """
    v, beds, nodes, blood = network.vessels, network.beds, network.nodes, network.blood
    if v.occluded.any():
        first = v.ids[int(np.flatnonzero(v.occluded)[0])]
        raise VesselnetError(f"network_yaml: vessel '{first}' is occluded, which a network file "
                             "cannot express; remove the vessel or keep the change in a scenario")
    out = [f"vesselnet: {FORMAT_VERSION}", f"name: {_line(network.name)}",
           "units: " + _line(dict(DEFAULT_UNITS))]
    viscosity = {"viscosity": _num(blood.viscosity_pa_s, "viscosity")}
    if blood.viscosity_law != "constant":
        viscosity = {"viscosity": {"law": blood.viscosity_law,
                                   "plasma": _num(blood.plasma_viscosity_pa_s, "viscosity"),
                                   "value": _num(blood.viscosity_pa_s, "viscosity")}}
    blood_map = {**viscosity, "density": _num(blood.density_kg_m3, "density"),
                 "hematocrit": float(blood.hematocrit)}
    if blood.separation != "none":
        blood_map["separation"] = blood.separation
    out += ["blood: " + _line(blood_map),
            f"venous_pressure: {_line(_num(network.venous_pressure_pa, 'pressure'))}"]
    node_lines = [f"  {_line(nodes.ids[i])}: {_line(props)}" for i in range(len(nodes))
                  if (props := _node(network, i))]
    if node_lines:
        out += ["nodes:"] + node_lines
    out.append("vessels:")
    out += ["  - " + _line(_vessel(network, i)) for i in range(len(v))]
    if len(beds):
        out.append("beds:")
        out += ["  - " + _line(_bed(network, i)) for i in range(len(beds))]
    return "\n".join(out) + "\n"


def _node(network: Network, i: int) -> dict:
    nodes = network.nodes
    props: dict = {}
    if math.isfinite(nodes.pressure_pa[i]):
        props["pressure"] = _num(nodes.pressure_pa[i], "pressure")
    wave = nodes.inflow_waveforms.get(i)
    if wave and "samples_m3_s" in wave:
        props["inflow"] = {"period": _num(wave["period_s"], "time"),
                           "samples": [_num(q, "flow") for q in wave["samples_m3_s"]]}
    elif wave:
        props["inflow"] = {"stroke_volume": _num(wave["stroke_volume_m3"], "volume"),
                           "heart_rate": _num(wave["heart_rate_hz"], "heart_rate"),
                           "ejection_time": _num(wave["ejection_time_s"], "time")}
    elif math.isfinite(nodes.inflow_m3_s[i]):
        props["inflow"] = _num(nodes.inflow_m3_s[i], "flow")
    if np.isfinite(nodes.position_m[i]).all():
        props["position"] = [_num(x, "length") for x in nodes.position_m[i]]
    if math.isfinite(nodes.target_pressure_pa[i]):
        props["target_pressure"] = _num(nodes.target_pressure_pa[i], "pressure")
    return props


def _vessel(network: Network, i: int) -> dict:
    v = network.vessels
    ids = network.nodes.ids
    item = {"id": v.ids[i], "from": ids[v.from_node[i]], "to": ids[v.to_node[i]],
            "length": _num(v.length_m[i], "length")}
    r_in, r_out = v.radius_in_m[i], v.radius_out_m[i]
    item["radius"] = _num(r_in, "radius") if r_in == r_out else \
        {"in": _num(r_in, "radius"), "out": _num(r_out, "radius")}
    wall = {}
    if math.isfinite(v.wall_thickness_m[i]):
        wall["thickness"] = _num(v.wall_thickness_m[i], "radius")
    if math.isfinite(v.wall_modulus_pa[i]):
        wall["modulus"] = _num(v.wall_modulus_pa[i], "modulus")
    if v.wall_poisson[i] != 0.5:
        wall["poisson"] = float(v.wall_poisson[i])
    if v.distensible[i]:
        wall["distensible"] = True
    if v.external_pressure_pa[i] != 0:
        wall["external_pressure"] = _num(v.external_pressure_pa[i], "pressure")
    if wall:
        item["wall"] = wall
    tags = v.tags_of(i)
    if tags:
        item["tags"] = list(tags)
    if math.isfinite(v.stenosis_reduction[i]):
        item["stenosis"] = {"reduction": float(v.stenosis_reduction[i]),
                            "length": _num(v.stenosis_length_m[i], "length"),
                            "at": float(v.stenosis_at[i])}
    return item


def _bed(network: Network, i: int) -> dict:
    beds = network.beds
    item = {"id": beds.ids[i], "node": network.nodes.ids[beds.node[i]],
            "resistance": _num(beds.resistance_pa_s_m3[i], "resistance")}
    if beds.outflow_node[i] >= 0:
        item["outflow_node"] = network.nodes.ids[beds.outflow_node[i]]
    elif beds.outflow_pressure_pa[i] != network.venous_pressure_pa:
        item["outflow_pressure"] = _num(beds.outflow_pressure_pa[i], "pressure")
    if math.isfinite(beds.share[i]):
        item["share"] = float(beds.share[i])
    if math.isfinite(beds.windkessel_proximal_pa_s_m3[i]):
        item["windkessel"] = {"proximal": _num(beds.windkessel_proximal_pa_s_m3[i], "resistance"),
                              "compliance": _num(beds.windkessel_compliance_m3_pa[i], "compliance")}
    return item
