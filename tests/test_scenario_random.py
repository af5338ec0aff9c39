"""Random networks with random lesions, part-way joins and autoregulating beds.

Checks: mass balance at every node and every element's law (vesselnet.testing,
Kirchhoff's laws, common practice); splitting a vessel without changing it leaves
the solution unchanged (series resistances add; the taper integral is additive);
and the same nonlinear networks solved by the circuit simulator ngspice, with each
lesion and autoregulating bed as a behavioural current source (tests/spice_oracle.py
runs ngspice; 1 V per mmHg, 1 A per mL/s).
"""

import numpy as np
import pytest
import spice_oracle

from vesselnet import changes
from vesselnet.autoregulation import bed_states, with_targets
from vesselnet.changes import Join
from vesselnet.errors import NetworkSpecError
from vesselnet.model import Network
from vesselnet.solve import element_groups, solve
from vesselnet.testing import assert_invariants

MMHG = 133.322387415
OHM = MMHG / 1e-6            # 1 mmHg*s/mL in Pa*s/m^3
AMP = 1e-6                   # 1 mL/s in m^3/s
SEEDS = [31337, 4711, 8086, 65537, 1234567]


def random_network(seed: int, n_vessels: int = 80) -> Network:
    """A random tree with loops, tapers, two fixed pressures, a prescribed inflow, beds at leaves."""
    rng = np.random.default_rng(seed)
    n_tree = int(0.85 * n_vessels)
    edges = [(int(rng.integers(0, i)), i) for i in range(1, n_tree + 1)]
    while len(edges) < n_vessels:
        a, b = (int(x) for x in rng.integers(0, n_tree + 1, 2))
        if a != b:
            edges.append((a, b))
    vessels = []
    for k, (a, b) in enumerate(edges):
        r_in = float(rng.uniform(0.8e-3, 4e-3))
        vessels.append({"id": f"v{k}", "from": f"n{a}", "to": f"n{b}", "length_m": float(rng.uniform(0.02, 0.25)),
                        "radius_in_m": r_in, "radius_out_m": r_in * float(rng.uniform(0.7, 1.0)), "tags": [f"t{k % 4}"]})
    parents = {a for a, _ in edges[:n_tree]}
    leaves = [i for i in range(1, n_tree + 1) if i not in parents]
    beds = [{"id": f"b{i}", "node": f"n{i}", "resistance_pa_s_m3": float(rng.uniform(0.5, 5)) * OHM,
             "outflow_pressure_pa": float(rng.choice([0.0, 5.0])) * MMHG} for i in leaves]
    inner = [i for i in range(1, n_tree + 1) if i in parents]
    fixed, inflow = rng.choice(inner, 2, replace=False)
    nodes = {"n0": {"pressure_pa": 100 * MMHG}, f"n{fixed}": {"pressure_pa": 90 * MMHG},
             f"n{inflow}": {"inflow_m3_s": 2 * AMP}}
    return Network.build(nodes=nodes, vessels=vessels, beds=beds)


def add_lesions(net: Network, rng, count: int) -> Network:
    for row in rng.choice(len(net.vessels), count, replace=False):
        net = changes.narrow(net, vessel=net.vessels.ids[row], reduction=float(rng.uniform(0.3, 0.9)),
                             length_m=float(net.vessels.length_m[row] * rng.uniform(0.05, 0.6)),
                             at=float(rng.uniform(0, 1)))
    return net


def add_joins(net: Network, rng, count: int) -> Network:
    """Random grafts between points part-way along random vessels (or nodes)."""
    made = 0
    while made < count:
        v1, v2 = rng.choice(len(net.vessels), 2, replace=False)
        ends = [Join(net.vessels.ids[v1], float(rng.uniform(0.05, 0.95))),
                Join(net.vessels.ids[v2], float(rng.uniform(0.05, 0.95))) if made % 2 else
                net.nodes.ids[int(rng.integers(0, len(net.nodes)))]]
        graft = {"id": f"graft{made}", "from": ends[0], "to": ends[1], "length_m": float(rng.uniform(0.05, 0.4)),
                 "radius_m": float(rng.uniform(1e-3, 3e-3))}
        try:
            net = changes.add_vessel(net, graft)
        except NetworkSpecError:   # a join inside a lesion, or onto the vessel's own end: try again
            continue
        made += 1
    return net


def autoregulating(net: Network, rng, count: int) -> Network:
    """Some beds autoregulate (reserve 2-4) with targets near their present flow (they can
    hold) or 5-8 times it (they cannot: exhausted)."""
    rows = rng.choice(len(net.beds), count, replace=False)
    base = solve(net)
    net = changes.autoregulate(net, beds=[net.beds.ids[i] for i in rows], reserve=float(rng.uniform(2, 4)))
    factor = np.ones(len(net.beds))
    factor[rows] = np.where(np.arange(count) % 2, rng.uniform(0.8, 1.2, count), rng.uniform(5, 8, count))
    return with_targets(net, base.bed_flow_m3_s * factor)


@pytest.mark.parametrize("seed", SEEDS)
def test_random_lesions_and_joins_keep_every_law(seed):
    """Mass balance to 1e-9 and every element (vessel, lesion, bed, autoregulating bed) on its law."""
    rng = np.random.default_rng(seed)
    net = add_joins(add_lesions(random_network(seed), rng, 15), rng, 6)
    net = autoregulating(net, rng, 5)
    result = solve(net)
    report = assert_invariants(result, rtol=1e-9)
    assert report["mass_balance"] <= 1e-9 and report["law"] <= 1e-9
    assert {"holding", "exhausted"} <= set(bed_states(result))


@pytest.mark.parametrize("seed", SEEDS)
def test_splitting_a_vessel_changes_nothing(seed):
    """Split random vessels (tapered, some with lesions) at random points outside their
    lesions: pressures at the original nodes, bed flows and the flow of every piece are
    those of the unsplit network."""
    rng = np.random.default_rng(seed + 1)
    net = add_lesions(random_network(seed), rng, 20)
    base = solve(net)
    split, cuts = net, 0
    for row in rng.choice(len(net.vessels), 12, replace=False):
        fractions = sorted(rng.uniform(0.02, 0.98, int(rng.integers(1, 4))))
        try:
            split, _ = changes.split_vessel(split, net.vessels.ids[row], fractions)
        except NetworkSpecError:   # a point inside the lesion
            continue
        cuts += 1
    assert cuts >= 6
    result = solve(split)
    n = len(net.nodes)
    scale = np.abs(base.pressure_pa).max()
    np.testing.assert_allclose(result.pressure_pa[:n], base.pressure_pa, rtol=1e-10, atol=1e-12 * scale)
    np.testing.assert_allclose(result.bed_flow_m3_s, base.bed_flow_m3_s, rtol=1e-9,
                               atol=1e-12 * np.abs(base.bed_flow_m3_s).max())
    index = net.vessels.index
    origin = [index[vid.split(".")[0]] for vid in split.vessels.ids]
    np.testing.assert_allclose(result.vessel_flow_m3_s, base.vessel_flow_m3_s[origin], rtol=1e-9,
                               atol=1e-12 * np.abs(base.vessel_flow_m3_s).max())
    assert_invariants(result)


def ngspice_nonlinear(net: Network):
    """The network as a circuit: resistors for linear elements, behavioural current sources
    I = 2V/(r + sqrt(r^2 + 4k|V|)) for lesions and I = min(Q_t, V/R_min) for autoregulating
    beds, solved by ngspice's own Newton iteration (.op)."""
    groups = element_groups(net, np.full(len(net.vessels), net.blood.viscosity_pa_s))
    n = len(net.nodes)
    lines, vectors, order = ["* vesselnet test: nonlinear network"], [], []

    def node(i):
        return f"n{i}" if i >= 0 else "0"

    k = 0
    for g in groups:
        for j in range(len(g.a)):
            a, b = node(int(g.a[j])), node(int(g.b[j]))
            ref = "" if g.b[j] >= 0 else f"r{k}"
            if ref:
                lines.append(f"VR{k} {ref} 0 DC {spice_oracle._num(g.ground_pa[j] / MMHG)}")
            end = ref or b
            law = g.law
            if hasattr(law, "conductance"):
                lines.append(f"R{k} {a} m{k} {spice_oracle._num(1 / law.conductance[j] / OHM)}")
            elif hasattr(law, "quadratic"):
                r, q = law.resistance[j] / OHM, law.quadratic[j] / (MMHG / AMP**2)
                lines.append(f"B{k} {a} m{k} I=2*V({a},m{k})/({spice_oracle._num(r)}+sqrt("
                             f"{spice_oracle._num(r * r)}+{spice_oracle._num(4 * q)}*abs(V({a},m{k}))))")
            else:
                t, rmin = law.target_flow_m3_s[j] / AMP, law.min_resistance_pa_s_m3[j] / OHM
                lines.append(f"B{k} {a} m{k} I=min({spice_oracle._num(t)},V({a},m{k})/{spice_oracle._num(rmin)})")
            lines.append(f"VM{k} m{k} {end} DC 0")
            vectors.append(f"i(vm{k})")
            order.append((g.kind, int(g.rows[j])))
            k += 1
    for i, p in enumerate(net.nodes.pressure_pa):
        if not np.isnan(p):
            lines.append(f"VF{i} n{i} 0 DC {spice_oracle._num(p / MMHG)}")
    for i, q in enumerate(net.nodes.inflow_m3_s):
        if not np.isnan(q):
            lines.append(f"II{i} 0 n{i} DC {spice_oracle._num(q / AMP)}")
    table = spice_oracle._run(lines, "op", [f"v(n{i})" for i in range(n)] + vectors)[0, 1:]
    vessel_flow, bed_flow = np.zeros(len(net.vessels)), np.zeros(len(net.beds))
    for (kind, row), amps in zip(order, table[n:]):
        (vessel_flow if kind == "vessel" else bed_flow)[row] = amps * AMP
    return table[:n] * MMHG, vessel_flow, bed_flow


@pytest.mark.parametrize("seed", SEEDS[:3])
def test_lesions_and_autoregulation_match_ngspice(seed):
    """Pressures and flows of a random nonlinear network agree with ngspice to 1e-6."""
    rng = np.random.default_rng(seed + 2)
    net = autoregulating(add_joins(add_lesions(random_network(seed, 60), rng, 12), rng, 3), rng, 4)
    result = solve(net)
    assert {"holding", "exhausted"} <= set(bed_states(result))
    pressure, vessel_flow, bed_flow = ngspice_nonlinear(net)
    np.testing.assert_allclose(result.pressure_pa, pressure, rtol=1e-6)
    scale = np.abs(vessel_flow).max()
    np.testing.assert_allclose(result.vessel_flow_m3_s, vessel_flow, rtol=1e-6, atol=1e-8 * scale)
    np.testing.assert_allclose(result.bed_flow_m3_s, bed_flow, rtol=1e-6, atol=1e-8 * scale)
