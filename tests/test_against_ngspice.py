"""Random networks solved by vesselnet and by the circuit simulator ngspice.

The outside reference is ngspice (Debian package), solving the same network as
a resistor circuit: pressure as voltage (1 V per mmHg), flow as current
(1 A per mL/s), resistance in mmHg*s/mL as ohms (tests/spice_oracle.py).
"""

import numpy as np
import pytest
import spice_oracle

from vesselnet.model import Network
from vesselnet.resistance import tapered_resistance
from vesselnet.solve import solve
from vesselnet.testing import assert_invariants

MMHG = 133.322387415
OHM = MMHG / 1e-6          # 1 mmHg*s/mL in Pa*s/m^3
AMP = 1e-6                 # 1 mL/s in m^3/s


def random_network(seed: int, n_vessels: int) -> Network:
    """A random tree with extra loop-closing vessels, several fixed-pressure inlets,
    prescribed inflows, and beds to two outflow pressures."""
    rng = np.random.default_rng(seed)
    n_tree = int(n_vessels * 0.85)
    parents = [int(rng.integers(0, i)) for i in range(1, n_tree + 1)]
    edges = [(p, i) for i, p in enumerate(parents, start=1)]
    n_nodes = n_tree + 1
    while len(edges) < n_vessels:
        a, b = rng.integers(0, n_nodes, 2)
        if a != b:
            edges.append((int(a), int(b)))
    vessels = []
    for k, (a, b) in enumerate(edges):
        r_in = rng.uniform(0.3e-3, 3e-3)
        r_out = r_in * rng.uniform(0.7, 1.0) if k % 3 == 0 else r_in
        vessels.append({"id": f"v{k}", "from": f"n{a}", "to": f"n{b}",
                        "length_m": rng.uniform(0.005, 0.2), "radius_in_m": r_in, "radius_out_m": r_out})
    leaves = sorted(set(range(n_nodes)) - {p for p in parents})
    beds = [{"id": f"bed{i}", "node": f"n{leaf}", "resistance_pa_s_m3": rng.uniform(0.5, 50) * OHM,
             "outflow_pressure_pa": (5.0 if i % 2 else 12.0) * MMHG} for i, leaf in enumerate(leaves)]
    nodes = {"n0": {"pressure_pa": 100 * MMHG}}
    inner = [i for i in range(1, n_nodes) if i not in leaves]
    for k in rng.choice(inner, size=min(2, len(inner)), replace=False):
        nodes[f"n{k}"] = {"pressure_pa": rng.uniform(80, 110) * MMHG}
    for k in rng.choice([i for i in inner if f"n{i}" not in nodes], size=2, replace=False):
        nodes[f"n{k}"] = {"inflow_m3_s": rng.uniform(0.1, 5) * AMP}
    return Network.build(nodes=nodes, vessels=vessels, beds=beds)


def ngspice_solution(net: Network):
    v, beds, nodes = net.vessels, net.beds, net.nodes
    r = tapered_resistance(v.length_m, v.radius_in_m, v.radius_out_m, net.blood.viscosity_pa_s) / OHM
    resistors = [(int(a), int(b), float(x)) for a, b, x in zip(v.from_node, v.to_node, r)]
    resistors += [(int(n), None, float(x / OHM), float(p / MMHG))
                  for n, x, p in zip(beds.node, beds.resistance_pa_s_m3, beds.outflow_pressure_pa)]
    fixed = {i: float(p / MMHG) for i, p in enumerate(nodes.pressure_pa) if not np.isnan(p)}
    injections = {i: float(q / AMP) for i, q in enumerate(nodes.inflow_m3_s) if not np.isnan(q)}
    volts, amps = spice_oracle.solve_dc(len(nodes), resistors, fixed, injections)
    return volts * MMHG, amps[: len(v)] * AMP, amps[len(v):] * AMP


@pytest.mark.parametrize(("seed", "n_vessels"), [(20261201, 50), (7331, 120), (90210, 250), (4242, 500)])
def test_random_network_matches_ngspice(seed, n_vessels):
    """Pressures and flows agree with ngspice to 1e-6 relative (its print precision is higher)."""
    net = random_network(seed, n_vessels)
    result = solve(net)
    assert_invariants(result)
    pressure, vessel_flow, bed_flow = ngspice_solution(net)
    np.testing.assert_allclose(result.pressure_pa, pressure, rtol=1e-6)
    scale = np.abs(vessel_flow).max()
    np.testing.assert_allclose(result.vessel_flow_m3_s, vessel_flow, rtol=1e-6, atol=1e-9 * scale)
    np.testing.assert_allclose(result.bed_flow_m3_s, bed_flow, rtol=1e-6, atol=1e-9 * scale)
