"""The downstream hematocrit march.

Checks and their sources:

* Red-cell conservation at every node (common practice, no source: cells are
  neither made nor lost at a junction), on random networks whose flows come
  from a resistor-network solve (scipy.sparse), so they obey mass balance.
* Flux-weighted mixing at converging nodes, H = sum Q_i H_i / sum Q_i
  (REFERENCES 3.1, Pries et al. 1990 [M]).
* Daughter hematocrits of a single bifurcation equal the REFERENCES 3.2 rows
  (formulas as remembered, [M]).
* A symmetric tree keeps the inlet hematocrit (symmetry of the law).
* An oracle: the vectorised march equals a slow, obvious per-node march in
  networkx's topological order on the same documented rules.
"""

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp
from scipy.sparse.linalg import spsolve

from vesselnet.errors import NetworkSpecError, SolveError
from vesselnet.hematocrit import march_hematocrit
from vesselnet.phase_separation import LAWS, red_cell_fraction

UM = 1e-6
NAN = np.nan


def random_network(seed, n_nodes, *, n_joins, n_sources, chain_bias):
    """A random tree with extra joins, flows from a resistor-network solve.

    Node 0 is held at unit pressure; beds (conductance to zero pressure) sit on
    every leaf and on a few interior nodes; `n_sources` interior nodes inject a
    fixed flow.  Kirchhoff's current law is solved with scipy's sparse solver,
    so the flows balance at every node.  About a third of the vessels are
    stored against their flow (negative flow).  Diameters follow the flow
    (Murray's law, D ~ Q^(1/3)), jittered by 15 %.
    """
    rng = np.random.default_rng(seed)
    parent = np.array([k - 1 if rng.random() < chain_bias else rng.integers(0, k)
                       for k in range(1, n_nodes)])
    src = np.concatenate([parent, rng.integers(0, n_nodes, n_joins)])
    dst = np.concatenate([np.arange(1, n_nodes), rng.integers(0, n_nodes, n_joins)])
    keep = src != dst
    src, dst = src[keep], dst[keep]
    g = rng.uniform(0.5, 2.0, src.size)
    degree = np.bincount(src, minlength=n_nodes) + np.bincount(dst, minlength=n_nodes)
    g_bed = np.where(degree == 1, rng.uniform(0.2, 1.0, n_nodes), 0.0)
    g_bed[rng.choice(np.arange(1, n_nodes), n_nodes // 20, replace=False)] += 0.3
    g_bed[0] = 0.0
    inject = np.zeros(n_nodes)
    inject[rng.choice(np.arange(1, n_nodes), n_sources, replace=False)] = rng.uniform(
        0.05, 0.3, n_sources)
    lap = sp.coo_matrix((np.concatenate([g, g, -g, -g]),
                         (np.concatenate([src, dst, src, dst]),
                          np.concatenate([src, dst, dst, src]))), shape=(n_nodes, n_nodes))
    lap = (lap + sp.diags(g_bed)).tocsr()
    free = np.arange(1, n_nodes)
    rhs = inject[free] - lap[free][:, [0]].toarray().ravel() * 1.0
    p = np.ones(n_nodes)
    p[free] = spsolve(lap[free][:, free].tocsc(), rhs, permc_spec="MMD_AT_PLUS_A")
    flow = g * (p[src] - p[dst])
    boundary = inject - g_bed * p
    boundary[0] = (np.bincount(src, flow, minlength=n_nodes)
                   - np.bincount(dst, flow, minlength=n_nodes))[0]
    flip = rng.random(src.size) < 0.3
    src, dst = np.where(flip, dst, src), np.where(flip, src, dst)
    flow = np.where(flip, -flow, flow)
    scale_m3_s = 1e-11
    h_in = np.full(n_nodes, NAN)
    h_in[0] = 0.45
    h_in[inject > 0] = rng.uniform(0.2, 0.6, n_sources)
    # Murray-like sizes, D ~ Q^(1/3), jittered: parents larger than daughters
    diameter = np.maximum(40 * UM * np.cbrt(np.abs(flow) / np.abs(flow).max()), 5 * UM)
    diameter *= rng.uniform(0.85, 1.15, src.size)
    return n_nodes, src, dst, flow * scale_m3_s, diameter, h_in, boundary * scale_m3_s


def red_cell_residual(n, src, dst, flow, hematocrit, h_in, boundary):
    """Per-node red-cell imbalance relative to the network's red-cell inflow.

    In: vessel inflows Q H plus boundary inflow Q_ext H_ext.  Out: vessel
    outflows Q H plus the outlet, whose blood flow is what mass balance leaves
    (in - out through vessels) and which draws the node's mixed blood.
    """
    q = np.abs(flow)
    up = np.where(flow >= 0, src, dst)
    down = np.where(flow >= 0, dst, src)
    q_ext = np.maximum(boundary, 0.0)
    e_ext = np.where(q_ext > 0, q_ext * np.nan_to_num(h_in), 0.0)
    e_in = np.bincount(down, q * hematocrit, minlength=n) + e_ext
    q_in = np.bincount(down, q, minlength=n) + q_ext
    e_out = np.bincount(up, q * hematocrit, minlength=n)
    q_outlet = q_in - np.bincount(up, q, minlength=n)
    mixed = np.divide(e_in, q_in, out=np.zeros(n), where=q_in > 0)
    residual = e_in - e_out - mixed * np.maximum(q_outlet, 0.0)
    return residual / e_ext.sum()


def slow_march(n, src, dst, flow, diameter, h_in, boundary, law, ratio=1e-10):
    """The documented rules, node by node in networkx's topological order."""
    q = np.abs(flow)
    threshold = ratio * max(q.max(), boundary.max())
    up = np.where(flow >= 0, src, dst)
    down = np.where(flow >= 0, dst, src)
    flowing = q > threshold
    graph = nx.DiGraph()
    graph.add_nodes_from(range(n))
    graph.add_edges_from(zip(up[flowing], down[flowing]))
    h = np.zeros(src.size)
    node_h = np.full(n, NAN)
    for node in nx.topological_sort(graph):
        ins = [e for e in np.flatnonzero(flowing & (down == node))]
        outs = [e for e in np.flatnonzero(flowing & (up == node))]
        q_ext = boundary[node] if boundary[node] > threshold else 0.0
        red = sum(q[e] * h[e] for e in ins) + (q_ext * h_in[node] if q_ext else 0.0)
        q_out = sum(q[e] for e in outs)
        through = max(sum(q[e] for e in ins) + q_ext, q_out)
        if through == 0:
            continue
        node_h[node] = red / through
        if len(outs) >= 2 and len(ins) == 1 and q_ext == 0 and law != "none":
            raw = [float(red_cell_fraction(
                q[j] / q_out, diameter[ins[0]], diameter[j],
                np.sqrt(sum(diameter[k] ** 2 for k in outs if k != j)), node_h[node], law=law))
                for j in outs]
            total = sum(raw)
            for j, r in zip(outs, raw):
                fqe = r / total if total > 0 else q[j] / q_out
                h[j] = fqe * node_h[node] * q_out / q[j]
        else:
            for j in outs:
                h[j] = node_h[node]
    for e in np.flatnonzero(~flowing):
        a, b = node_h[up[e]], node_h[down[e]]
        h[e] = a if not np.isnan(a) else b if not np.isnan(b) else np.nansum(
            np.maximum(boundary, 0) * h_in) / np.maximum(boundary, 0).sum()
    return h


NETWORKS = [
    dict(seed=20240611, n_nodes=60, n_joins=0, n_sources=0, chain_bias=0.0),
    dict(seed=7310, n_nodes=120, n_joins=6, n_sources=1, chain_bias=0.3),
    dict(seed=99991, n_nodes=300, n_joins=15, n_sources=3, chain_bias=0.5),
    dict(seed=424242, n_nodes=200, n_joins=40, n_sources=2, chain_bias=0.8),
]


@pytest.mark.parametrize("law", LAWS)
@pytest.mark.parametrize("spec", NETWORKS, ids=lambda s: f"seed{s['seed']}")
def test_red_cells_conserved_at_every_node(spec, law):
    """Red-cell flux Q*H balances at every node to 1e-9 of the total red-cell inflow
    (conservation of cells; common practice, no source), with outlets drawing the mixed
    blood of their node, and the hematocrit is finite and >= 0 everywhere."""
    net = random_network(**spec)
    n, src, dst, flow, diameter, h_in, boundary = net
    assert abs(boundary.sum()) < 1e-9 * np.abs(boundary).sum()      # the flows do balance
    h = march_hematocrit(*net, law=law)
    assert np.all(np.isfinite(h)) and np.all(h >= 0)
    residual = red_cell_residual(n, src, dst, flow, h, h_in, boundary)
    assert np.max(np.abs(residual)) < 1e-9


@pytest.mark.parametrize("law", LAWS)
@pytest.mark.parametrize("spec", NETWORKS, ids=lambda s: f"seed{s['seed']}")
def test_equals_slow_march(spec, law):
    """Oracle: the vectorised march (chains, levels) equals the obvious per-node march in
    networkx's topological order, on the same rules."""
    net = random_network(**spec)
    np.testing.assert_allclose(march_hematocrit(*net, law=law), slow_march(*net, law=law),
                               rtol=1e-10, atol=1e-14)


def test_large_network_conserves_red_cells():
    """Same conservation check on 20 000 vessels with long chains (pointer jumping)."""
    net = random_network(20250101, 20000, n_joins=200, n_sources=5, chain_bias=0.9)
    h = march_hematocrit(*net, law="pries-2005")
    n, src, dst, flow, _, h_in, boundary = net
    assert np.max(np.abs(red_cell_residual(n, src, dst, flow, h, h_in, boundary))) < 1e-9


def _symmetric_tree(levels, branching):
    """A tree in which every node divides into `branching` equal daughters."""
    src, dst, diameter, flow = [], [], [], []
    src.append(0), dst.append(1), diameter.append(30 * UM), flow.append(1e-11)
    frontier, n = [(1, 30 * UM, 1e-11)], 2
    for _ in range(levels):
        nxt = []
        for node, d, q in frontier:
            for _ in range(branching):
                child = (n, d * branching ** (-1 / 3), q / branching)  # Murray's law
                src.append(node), dst.append(n), diameter.append(child[1]), flow.append(child[2])
                nxt.append(child)
                n += 1
        frontier = nxt
    boundary = np.zeros(n)
    boundary[0] = 1e-11
    for node, _, q in frontier:
        boundary[node] = -q
    h_in = np.full(n, NAN)
    h_in[0] = 0.45
    return n, np.array(src), np.array(dst), np.array(flow), np.array(diameter), h_in, boundary


@pytest.mark.parametrize("law", LAWS)
@pytest.mark.parametrize("branching", [2, 3])
def test_symmetric_tree_keeps_inlet_hematocrit(law, branching):
    """Equal daughters with equal flow share red cells equally, so every vessel of a
    symmetric tree carries the inlet hematocrit (symmetry of the law, REFERENCES 3.2 row 1)."""
    h = march_hematocrit(*_symmetric_tree(6 if branching == 2 else 4, branching), law=law)
    np.testing.assert_allclose(h, 0.45, rtol=0, atol=1e-12)


# REFERENCES 3.2 [C from remembered formulas, M]: FQB, diameters (um), law, H_alpha, H_beta
BIFURCATION_ROWS = [
    (0.3, (10, 8, 8), "pries-1990", 0.3240, 0.5040),
    (0.3, (10, 8, 6), "pries-2005", 0.2654, 0.5291),
    (0.03, (10, 8, 8), "pries-2005", 0.0, 0.4639),
    (0.3, (50, 40, 40), "pries-2005", 0.4230, 0.4616),
]


@pytest.mark.parametrize("fqb, diameters_um, law, h_alpha, h_beta", BIFURCATION_ROWS)
def test_single_bifurcation_matches_table_3_2(fqb, diameters_um, law, h_alpha, h_beta):
    """One feed vessel dividing in two: the march gives the daughter hematocrits of
    REFERENCES 3.2 (to the table's 4 decimals), the plasma-only daughter exactly 0."""
    d_f, d_a, d_b = (d * UM for d in diameters_um)
    q = 2e-12
    h = march_hematocrit(4, [0, 1, 1], [1, 2, 3], [q, fqb * q, (1 - fqb) * q], [d_f, d_a, d_b],
                         [0.45, NAN, NAN, NAN], [q, 0, -fqb * q, -(1 - fqb) * q], law=law)
    assert h[0] == pytest.approx(0.45, rel=1e-14, abs=0)
    assert h[1] == pytest.approx(h_alpha, abs=5e-5)
    assert h[2] == pytest.approx(h_beta, abs=5e-5)
    if h_alpha == 0.0:
        assert h[1] == 0.0


def test_converging_and_inlet_mixing():
    """Flux-weighted mixing (REFERENCES 3.1): vessels from inlets 0 (H 0.3) and 1 (H 0.5)
    join at node 2, which also takes in blood from outside (H 0.6); the vessel leaving
    carries sum(Q H) / sum(Q)."""
    q0, q1, q2 = 1e-12, 2e-12, 0.5e-12
    h = march_hematocrit(4, [0, 1, 2], [2, 2, 3], [q0, q1, q0 + q1 + q2], [6 * UM] * 3,
                         [0.3, 0.5, 0.6, NAN], [q0, q1, q2, -(q0 + q1 + q2)], law="pries-2005")
    expected = (0.3 * q0 + 0.5 * q1 + 0.6 * q2) / (q0 + q1 + q2)
    np.testing.assert_allclose(h, [0.3, 0.5, expected], rtol=1e-14)


def test_outlet_at_dividing_node():
    """A dividing node that also has a bed: the bed draws the mixed blood, the daughters
    share the rest by the law applied to their own flows (the documented rule), and red cells
    balance (cell conservation)."""
    q_f, q_a, q_b = 3e-12, 0.6e-12, 1.4e-12          # 1e-12 leaves through the bed
    h = march_hematocrit(4, [0, 1, 1], [1, 2, 3], [q_f, q_a, q_b], [12 * UM, 9 * UM, 7 * UM],
                         [0.4, NAN, NAN, NAN], [q_f, -(q_f - q_a - q_b), -q_a, -q_b],
                         law="pries-1990")
    fqe = float(red_cell_fraction(q_a / (q_a + q_b), 12 * UM, 9 * UM, 7 * UM, 0.4,
                                  law="pries-1990"))
    assert h[1] == pytest.approx(fqe * 0.4 * (q_a + q_b) / q_a, rel=1e-13, abs=0)
    assert q_a * h[1] + q_b * h[2] + (q_f - q_a - q_b) * 0.4 == pytest.approx(q_f * 0.4,
                                                                               rel=1e-13, abs=0)


@pytest.mark.parametrize("law", ["pries-1990", "pries-2005"])
def test_trifurcation_pairwise_rule(law):
    """Three daughters: each daughter against the union of the others, then the FQEs
    renormalised; red cells balance exactly, a daughter below X0 gets plasma only, and the
    rest are enriched (the documented rule; cell conservation)."""
    q = np.array([1e-12, 0.01e-12, 0.39e-12, 0.6e-12])
    d = np.array([10, 5, 7, 8]) * UM
    h = march_hematocrit(5, [0, 1, 1, 1], [1, 2, 3, 4], q, d, [0.45, NAN, NAN, NAN, NAN],
                         [q[0], 0, -q[1], -q[2], -q[3]], law=law)
    assert h[1] == 0.0                                  # FQB 0.01 < X0 (0.04 / 0.053)
    assert np.dot(q[1:], h[1:]) == pytest.approx(q[0] * 0.45, rel=1e-13, abs=0)
    raw = red_cell_fraction(q[1:] / q[0], d[0], d[1:],
                            np.sqrt([d[2]**2 + d[3]**2, d[1]**2 + d[3]**2, d[1]**2 + d[2]**2]),
                            0.45, law=law)
    np.testing.assert_allclose(h[1:] * q[1:] / (0.45 * q[0]), raw / raw.sum(), rtol=1e-13)


@pytest.mark.filterwarnings("error")
def test_zero_flow_vessels_give_no_nan():
    """Zero flow (a balanced bridge, a dead end, a stagnant pair) gives finite hematocrits
    taken from the mixed blood of a node they touch, and no numpy warning."""
    # 0 -> 1 feeds the bifurcation 1 -> {2, 3}; 2, 3 -> 4 rejoin; 2 - 3 is a balanced
    # bridge; 4 -> 5 a dead end; 5 - 6 a stagnant pair; 4 drains through its bed.
    src = np.array([0, 1, 1, 2, 3, 2, 4, 5])
    dst = np.array([1, 2, 3, 4, 4, 3, 5, 6])
    q = np.array([2e-12, 1e-12, 1e-12, 1e-12, 1e-12, 0.0, 0.0, 0.0])
    d = np.array([10, 8, 8, 8, 8, 5, 6, 6]) * UM
    h_in = np.array([0.45, NAN, NAN, NAN, NAN, NAN, NAN])
    boundary = np.array([2e-12, 0, 0, 0, -2e-12, 0, 0])
    h = march_hematocrit(7, src, dst, q, d, h_in, boundary, law="pries-2005")
    assert np.all(np.isfinite(h))
    np.testing.assert_allclose(h, 0.45, rtol=1e-14)   # symmetric: everything stays 0.45


@pytest.mark.filterwarnings("error")
def test_all_flows_zero():
    """No flow at all: every vessel gets the (mean) inlet hematocrit, without nan."""
    h = march_hematocrit(3, [0, 1], [1, 2], [0.0, 0.0], [5 * UM, 5 * UM],
                         [0.4, NAN, 0.5], [0.0, 0.0, 0.0], law="pries-1990")
    np.testing.assert_allclose(h, 0.45)


@pytest.mark.parametrize("law", LAWS)
def test_noisy_flows_create_no_red_cells(law):
    """Flows from a solve balance only to rounding: here each vessel of a chain with one
    division carries 1e-8 more than the one before.  No red cells are created: the red-cell
    flux Q H stays that of the inlet (cell conservation), exactly up to rounding."""
    grow = 1 + 1e-8
    q = 1e-12 * grow ** np.arange(5)
    flow = np.array([q[0], q[1], q[2], 0.5 * q[3], 0.5 * q[3], 0.5 * q[4]])
    src, dst = np.array([0, 1, 2, 3, 3, 4]), np.array([1, 2, 3, 4, 5, 6])
    boundary = np.array([q[0], 0, 0, 0, 0, -0.5 * q[3], -0.5 * q[4]])
    h = march_hematocrit(7, src, dst, flow, np.full(6, 8 * UM), [0.45] + [NAN] * 6, boundary,
                         law=law)
    assert flow[0] * h[0] == pytest.approx(q[0] * 0.45, rel=1e-14, abs=0)
    assert flow[2] * h[2] == pytest.approx(q[0] * 0.45, rel=1e-14, abs=0)
    assert flow[3] * h[3] + flow[4] * h[4] == pytest.approx(q[0] * 0.45, rel=1e-14, abs=0)
    assert flow[5] * h[5] == pytest.approx(flow[3] * h[3], rel=1e-14, abs=0)


def _ring(tiny):
    """Inlet 0 -> 1, ring 1 -> 2 -> 3 -> 1 plus outlet at 3; the ring's closing vessel
    3 -> 1 carries `tiny` (relative to the through flow)."""
    q = 1e-12
    src, dst = np.array([0, 1, 2, 3]), np.array([1, 2, 3, 1])
    flow = np.array([q, q * (1 + tiny), q * (1 + tiny), q * tiny])
    boundary = np.array([q, 0, 0, -q])
    return 4, src, dst, flow, np.full(4, 8 * UM), np.array([0.45, NAN, NAN, NAN]), boundary


def test_noise_level_cycle_is_ignored():
    """A noise-level circulating flow (1e-14 of the through flow) is below the negligible
    threshold: the march runs and conserves cells."""
    h = march_hematocrit(*_ring(1e-14), law="pries-2005")
    np.testing.assert_allclose(h, 0.45, rtol=1e-12)


def test_directed_cycle_raises():
    """A real circulating flow makes a directed cycle: SolveError naming nodes."""
    with pytest.raises(SolveError, match="directed cycle"):
        march_hematocrit(*_ring(0.2), law="pries-2005")
    with pytest.raises(SolveError, match="directed cycle"):
        march_hematocrit(*_ring(1e-14), law="pries-2005", negligible_flow_ratio=0.0)


def test_pure_circulating_loop_raises():
    """A loop of pass-through nodes with circulating flow and nothing entering."""
    with pytest.raises(SolveError, match="directed cycle through nodes"):
        march_hematocrit(4, [0, 1, 2, 3], [1, 2, 0, 0], [1e-12, 1e-12, 1e-12, 0.0],
                         np.full(4, 8 * UM), [0.45, NAN, NAN, NAN], [0, 0, 0, 0],
                         law="pries-2005")


@pytest.mark.parametrize("change, error, match", [
    ({"h_in": [NAN, NAN, NAN]}, NetworkSpecError, "hematocrit is nan"),
    ({"h_in": [45.0, NAN, NAN]}, NetworkSpecError, "percentage"),
    ({"boundary": [0.0, 0.0, -1e-12]}, SolveError, "leaves through vessels"),
    ({"src": [0, 3]}, NetworkSpecError, r"node index must be in \[0, 3\)"),
    ({"src": [0, 2]}, NetworkSpecError, "joins a node to itself"),
    ({"src": [0.0, 1.0]}, NetworkSpecError, "integer node indices"),
    ({"flow": [1e-12, np.inf]}, NetworkSpecError, "flow must be finite"),
    ({"diameter": [5e-6, 0.0]}, NetworkSpecError, "diameter must be finite and > 0"),
    ({"diameter": [5e-6]}, NetworkSpecError, "one value per vessel"),
    ({"law": "pries"}, NetworkSpecError, "unknown law"),
])
def test_bad_input_raises(change, error, match):
    """Malformed or inconsistent input raises, naming the problem (BRIEF.md wording)."""
    args = {"n": 3, "src": [0, 1], "dst": [1, 2], "flow": [1e-12, 1e-12],
            "diameter": [5e-6, 5e-6], "h_in": [0.45, NAN, NAN],
            "boundary": [1e-12, 0.0, -1e-12], "law": "pries-2005"}
    args.update(change)
    with pytest.raises(error, match=match):
        march_hematocrit(args["n"], np.array(args["src"]), np.array(args["dst"]),
                         args["flow"], args["diameter"], args["h_in"], args["boundary"],
                         law=args["law"])


def test_enriched_above_one_warns():
    """Phase separation can push a daughter of dense blood above 1 (outside the law's
    range); the march warns rather than hiding it."""
    q = 1e-12
    with pytest.warns(RuntimeWarning, match="hematocrit >= 1"):
        march_hematocrit(4, [0, 1, 1], [1, 2, 3], [q, 0.9 * q, 0.1 * q], [6e-6, 3e-6, 6e-6],
                         [0.95, NAN, NAN, NAN], [q, 0, -0.9 * q, -0.1 * q], law="pries-1990")
