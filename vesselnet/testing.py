"""Invariants every steady solution must satisfy, for tests and for users.

Call :func:`assert_invariants` after any solve: mass is conserved at every
node, each element obeys its law (Q*R = dP on linear vessels), total inflow
equals total outflow, and result rows match the input ids.

Examples
--------
>>> from vesselnet.model import Network
>>> from vesselnet.solve import solve
>>> net = Network.build(nodes={"r": {"pressure_pa": 13332.2}},
...     vessels=[{"id": "a", "from": "r", "to": "j", "length_m": 0.1, "radius_m": 0.002},
...              {"id": "b", "from": "j", "to": "t", "length_m": 0.1, "radius_m": 0.001}],
...     beds=[{"id": "organ", "node": "t", "resistance_pa_s_m3": 1.3332e8}])
>>> report = assert_invariants(solve(net))
>>> report["mass_balance"] < 1e-12 and report["law"] < 1e-12
True
"""

from __future__ import annotations

import numpy as np

from .result import SteadyResult
from .solve import element_groups


class InvariantError(AssertionError):
    """A solution breaks an invariant."""


def nodal_imbalance(result: SteadyResult) -> np.ndarray:
    """Net flow out of every node (vessels, beds and prescribed inflows), m^3/s.

    Zero at nodes whose pressure is unknown; at fixed-pressure nodes it is
    minus the flow the boundary supplies.
    """
    net = result.network
    v, beds, nodes = net.vessels, net.beds, net.nodes
    n = len(nodes)
    out = np.bincount(v.from_node, result.vessel_flow_m3_s, n) - np.bincount(v.to_node, result.vessel_flow_m3_s, n)
    out += np.bincount(beds.node, result.bed_flow_m3_s, n)
    series = beds.outflow_node >= 0
    out -= np.bincount(beds.outflow_node[series], result.bed_flow_m3_s[series], n)
    out -= np.where(np.isnan(nodes.inflow_m3_s), 0.0, nodes.inflow_m3_s)
    return out


def check_invariants(result: SteadyResult) -> dict[str, float]:
    """Measure the invariants; returns relative errors (0 is perfect).

    Returns
    -------
    dict
        ``mass_balance``: largest nodal imbalance at free nodes over total
        inflow; ``global_balance``: |inflow - outflow| over inflow; ``law``:
        largest |dP - law(Q)| over the largest dP; ``ids``: 0 when result
        rows equal the input ids, else 1.
    """
    net = result.network
    fixed = ~np.isnan(net.nodes.pressure_pa)
    determined = ~np.isnan(result.pressure_pa)
    imbalance = nodal_imbalance(result)
    total_in = max(result.inflow_m3_s, 1e-300)
    free = ~fixed & determined
    to_ground = net.beds.outflow_node < 0
    outflow = result.bed_flow_m3_s[to_ground].sum() - result.boundary_inflow_m3_s[
        result.boundary_inflow_m3_s < 0].sum()
    inflow = result.boundary_inflow_m3_s[result.boundary_inflow_m3_s > 0].sum()
    groups = element_groups(net, result.vessel_viscosity_pa_s)
    law, scale = 0.0, 1e-300
    p = np.nan_to_num(result.pressure_pa)
    for g in groups:
        flows = (result.vessel_flow_m3_s if g.kind == "vessel" else result.bed_flow_m3_s)[g.rows]
        drop = g.pressure_drop(p)
        law = max(law, float(np.abs(drop - g.law_pressure_drop(p, flows)).max(initial=0.0)))
        scale = max(scale, float(np.abs(drop).max(initial=0.0)))
    ids_ok = (tuple(result.node_table()["id"]) == net.nodes.ids
              and tuple(result.vessel_table()["id"]) == net.vessels.ids
              and tuple(result.bed_table()["id"]) == net.beds.ids
              and len(result.vessel_flow_m3_s) == len(net.vessels))
    return {"mass_balance": float(np.abs(imbalance[free]).max(initial=0.0)) / total_in,
            "global_balance": abs(inflow - outflow) / total_in, "law": law / scale,
            "ids": 0.0 if ids_ok else 1.0}


def assert_invariants(result: SteadyResult, *, rtol: float = 1e-9) -> dict[str, float]:
    """Raise :class:`InvariantError` when any invariant is off by more than ``rtol``.

    Returns the measured errors (see :func:`check_invariants`).
    """
    report = check_invariants(result)
    bad = {k: v for k, v in report.items() if not v <= rtol}
    if bad:
        raise InvariantError("invariants broken: " + ", ".join(f"{k} {v:.2e}" for k, v in bad.items()))
    return report
