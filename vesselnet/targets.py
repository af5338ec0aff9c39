"""Calibration targets kept apart from the network: a small YAML file of measurements.

A network file may carry its own targets (bed ``share:``, node
``target_pressure:``); a targets file adds to them or replaces them, so the
same network can be fitted to several sets of measurements::

    vesselnet: 1
    description: resting distribution of cardiac output
    units: {pressure: mmHg, flow: mL/min}
    inflow: 450 mL/min      # total inflow: only for networks fed at a fixed pressure
    pressures:              # target mean pressures at nodes
      heart: 93.3 mmHg
    shares:                 # bed flow as a fraction of the total inflow
      brain_right: 5.6%
    flows:                  # or the bed flow itself
      kidney_left: 550 mL/min

Examples
--------
>>> from vesselnet.model import Network
>>> from vesselnet.yamlread import load_text
>>> net = Network.build(nodes={"root": {"inflow_m3_s": 1e-4}},
...     vessels=[{"id": "a", "from": "root", "to": "t", "length_m": 0.1, "radius_m": 0.002},
...              {"id": "b", "from": "root", "to": "u", "length_m": 0.1, "radius_m": 0.002}],
...     beds=[{"id": "x", "node": "t", "resistance_pa_s_m3": 1e9},
...           {"id": "y", "node": "u", "resistance_pa_s_m3": 1e9}])
>>> doc = load_text("vesselnet: 1\\npressures: {root: 90}\\nshares: {x: 40%, y: 60%}\\n", "t.yaml")
>>> targets = read_targets(doc, net, "t.yaml")
>>> [float(s) for s in targets.network.beds.share], round(float(targets.network.nodes.target_pressure_pa[0]))
([0.4, 0.6], 11999)
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from .fields import near_miss
from .model import Network
from .reader import begin_file

TOP_KEYS = ("vesselnet", "name", "description", "units", "inflow", "pressures", "shares", "flows")


@dataclass(frozen=True, eq=False)
class Targets:
    """A network with the file's targets put in, and the targets that are not columns."""

    network: Network
    bed_flow_m3_s: dict[str, float]
    inflow_m3_s: float | None


def load_targets(path, network: Network) -> Targets:
    """Read a targets file for ``network`` (every problem located)."""
    from .yamlread import load_file

    return read_targets(load_file(path), network, str(path))


def read_targets(doc, network: Network, file: str = "<input>") -> Targets:
    """Put the targets of a parsed targets file into ``network`` (see the module notes)."""
    fr = begin_file(doc, file, TOP_KEYS,
                    "start it with 'vesselnet: 1' and list 'shares:'")
    nodes, beds = network.nodes, network.beds
    target_p = nodes.target_pressure_pa.copy()
    for node, _ in (fr.mapping(doc, "pressures", "pressures") or {}).items():
        if str(node) not in nodes.index:
            fr.add(doc["pressures"].key_where(node), "pressures", f"no node '{node}' in the network",
                   near_miss(node, nodes.ids) or "check the node id")
            continue
        target_p[nodes.index[str(node)]] = fr.quantity(doc["pressures"], node, "pressure",
                                                       f"pressures '{node}'", required=True)
    share = beds.share.copy()
    flows: dict[str, float] = {}
    for key, kind in (("shares", "fraction"), ("flows", "flow")):
        section = fr.mapping(doc, key, key) or {}
        for bed in section:
            if str(bed) not in beds.index:
                fr.add(section.key_where(bed), key, f"no bed '{bed}' in the network",
                       near_miss(bed, beds.ids) or "check the bed id")
                continue
            if key == "flows" and bed in (doc.get("shares") or {}):
                fr.add(section.key_where(bed), key, f"bed '{bed}' has both a share and a flow target",
                       "keep one")
                continue
            options = {"between": (0.0, 1.0)} if key == "shares" else {"positive": True}
            value = fr.quantity(section, bed, kind, f"{key} '{bed}'", required=True, **options)
            if key == "shares":
                share[beds.index[str(bed)]] = value
            else:
                flows[str(bed)] = value
                share[beds.index[str(bed)]] = np.nan
    inflow = fr.quantity(doc, "inflow", "flow", "inflow", positive=True) if "inflow" in doc else None
    fr.raise_if_any()
    network = dataclasses.replace(
        network, nodes=dataclasses.replace(nodes, target_pressure_pa=target_p),
        beds=dataclasses.replace(beds, share=share))
    return Targets(network=network, bed_flow_m3_s=flows, inflow_m3_s=inflow)
