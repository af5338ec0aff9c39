"""Numerical extremes: conductance ratios of 1e20, condition estimates, stagnant and cut-off parts.

The outside reference for accuracy is a 60-digit dense nodal solve with
mpmath (Kirchhoff's current law with Poiseuille conductances g = pi r^4 /
(8 mu L), REFERENCES 1.1 [M, textbook]); condition numbers are checked
against numpy's LAPACK ``cond``.
"""

import dataclasses
import json
import math
import time

import mpmath
import numpy as np
import pytest
import scipy.sparse as sp

from vesselnet import writers
from vesselnet.assembly import NodalPattern, ScaledFactor
from vesselnet.changes import occlude
from vesselnet.cli import main
from vesselnet.errors import SolveError
from vesselnet.model import Blood, Network
from vesselnet.reader import read_network_text
from vesselnet.solve import CONDITION_LIMIT, solve

MMHG_PA = 133.322387415  # conventional mmHg (common practice)
VISCOSITY = 3.5e-3


def vessel(i, a, b, length_m, radius_m):
    return {"id": f"v{i}", "from": a, "to": b, "length_m": length_m, "radius_m": radius_m}


def extreme_network(seed: int) -> Network:
    """A tree with loops whose radii span 2 um .. 3 cm and lengths 10 um .. 1 m, a bed on
    every leaf (no dead ends, so every flow is genuinely nonzero)."""
    rng = np.random.default_rng(seed)
    n = 14
    radii = np.exp(rng.uniform(np.log(2e-6), np.log(3e-2), n))
    lengths = np.exp(rng.uniform(np.log(1e-5), np.log(1.0), n))
    radii[2], lengths[2] = 3e-2, 1e-5          # the largest conductance, deep in the tree
    radii[5], lengths[5] = 2e-6, 1.0           # the smallest
    parents = [0] + [int(rng.integers(0, k)) for k in range(1, n)]
    vessels = [vessel(0, "root", "n0", lengths[0], radii[0])]
    vessels += [vessel(k, f"n{parents[k]}", f"n{k}", lengths[k], radii[k]) for k in range(1, n)]
    for extra in range(3):
        a, b = rng.choice(np.arange(1, n), 2, replace=False)
        vessels.append(vessel(n + extra, f"n{a}", f"n{b}", float(np.exp(rng.uniform(np.log(1e-5), 0))),
                              float(np.exp(rng.uniform(np.log(2e-6), np.log(3e-2))))))
    leaves = sorted(set(range(n)) - set(parents[1:]))
    beds = [{"id": f"bed{k}", "node": f"n{k}", "resistance_pa_s_m3": float(10 ** rng.uniform(8, 13))}
            for k in leaves]
    return Network.build(nodes={"root": {"pressure_pa": 100 * MMHG_PA}}, vessels=vessels, beds=beds,
                         blood=Blood(viscosity_pa_s=VISCOSITY))


def reference(net: Network, digits: int = 60):
    """Pressures, vessel and bed flows by a dense mpmath solve of Kirchhoff's law.

    Conductances are recomputed here from the inputs (Poiseuille, REFERENCES 1.1)."""
    with mpmath.workdps(digits):
        v, beds, nodes = net.vessels, net.beds, net.nodes
        pi, mu = mpmath.pi, mpmath.mpf(VISCOSITY)
        g = [pi * mpmath.mpf(float(r)) ** 4 / (8 * mu * mpmath.mpf(float(L)))
             for r, L in zip(v.radius_in_m, v.length_m)]
        gb = [1 / mpmath.mpf(float(R)) for R in beds.resistance_pa_s_m3]
        fixed = {i: mpmath.mpf(float(p)) for i, p in enumerate(nodes.pressure_pa) if not math.isnan(p)}
        free = [i for i in range(len(nodes)) if i not in fixed]
        row = {node: k for k, node in enumerate(free)}
        A, rhs = mpmath.zeros(len(free)), mpmath.zeros(len(free), 1)

        def stamp(a, b, conductance, ground=None):
            for x, y in ((a, b), (b, a)):
                if x is None or x not in row:
                    continue
                A[row[x], row[x]] += conductance
                if y is None:
                    rhs[row[x]] += conductance * ground
                elif y in row:
                    A[row[x], row[y]] -= conductance
                else:
                    rhs[row[x]] += conductance * fixed[y]

        for k in range(len(v)):
            stamp(int(v.from_node[k]), int(v.to_node[k]), g[k])
        for k in range(len(beds)):
            stamp(int(beds.node[k]), None, gb[k], mpmath.mpf(float(beds.outflow_pressure_pa[k])))
        x = mpmath.lu_solve(A, rhs)
        p = dict(fixed) | {node: x[k] for node, k in row.items()}
        q = [g[k] * (p[int(v.from_node[k])] - p[int(v.to_node[k])]) for k in range(len(v))]
        qb = [gb[k] * (p[int(beds.node[k])] - mpmath.mpf(float(beds.outflow_pressure_pa[k])))
              for k in range(len(beds))]
        return ([float(p[i]) for i in range(len(nodes))], [float(x) for x in q], [float(x) for x in qb])


@pytest.mark.parametrize("seed", [20240611, 77123, 990411])
def test_conductance_ratio_1e20_solves_to_full_accuracy(seed):
    """Radii 2 um..3 cm and lengths 10 um..1 m in one network: every pressure to 1e-12 and every
    vessel and bed flow to 1e-9 of itself against the 60-digit reference."""
    net = extreme_network(seed)
    g = np.pi * net.vessels.radius_in_m ** 4 / (8 * VISCOSITY * net.vessels.length_m)
    assert g.max() / g.min() > 1e20
    p_ref, q_ref, qb_ref = reference(net)
    result = solve(net)
    np.testing.assert_allclose(result.pressure_pa, p_ref, rtol=1e-12)
    np.testing.assert_allclose(result.vessel_flow_m3_s, q_ref, rtol=1e-9)
    np.testing.assert_allclose(result.bed_flow_m3_s, qb_ref, rtol=1e-9)
    assert result.mass_balance < 1e-10
    assert math.isfinite(result.condition_estimate) and result.condition_estimate >= 1
    assert not [w for w in result.warnings if "lost accuracy" in w]


def test_the_extreme_case_defeats_a_plain_double_solve():
    """The reference problem is hard: the same nodal system solved once in doubles
    (scipy.sparse.linalg.spsolve, flows from pressure differences) misses some flow by far more
    than 1e-3, so the accuracy test above can fail."""
    from scipy.sparse.linalg import spsolve

    net = extreme_network(20240611)
    _, q_ref, _ = reference(net)
    v, beds = net.vessels, net.beds
    g = np.pi * v.radius_in_m ** 4 / (8 * VISCOSITY * v.length_m)
    free = np.isnan(net.nodes.pressure_pa)
    a = np.concatenate([v.from_node, beds.node])
    b = np.concatenate([v.to_node, -np.ones(len(beds), int)])
    conductance = np.concatenate([g, 1 / beds.resistance_pa_s_m3])
    pattern = NodalPattern(len(net.nodes), a, b, free)
    p = np.where(free, 0.0, net.nodes.pressure_pa)
    rhs = -(pattern.node_sum(conductance * (p[a] - np.where(b >= 0, p[np.maximum(b, 0)],
                                                              beds.outflow_pressure_pa[0]))))
    p[free] = spsolve(pattern.linear_matrix(conductance).tocsc(), rhs[free])
    q_plain = g * (p[v.from_node] - p[v.to_node])
    assert np.max(np.abs(q_plain - q_ref) / np.abs(q_ref)) > 1e-3


def test_condition_is_reported_in_checks():
    result = solve(extreme_network(77123))
    doc = writers.result_json(result)
    assert doc["checks"]["condition"] == writers.number(result.condition_estimate)


def random_nodal_matrix(seed, n=9, complex_=False):
    """A grounded nodal matrix of a random connected graph with conductances over 12 decades."""
    rng = np.random.default_rng(seed)
    a = np.concatenate([np.arange(1, n), rng.integers(0, n, 6), [0, 3]])
    b = np.concatenate([rng.integers(0, np.arange(1, n)), rng.integers(0, n, 6), [-1, -1]])
    keep = a != b
    g = 10 ** rng.uniform(-12, 0, keep.sum())
    if complex_:
        g = g * (1 + 1j * rng.uniform(-2, 2, keep.sum()))
    return NodalPattern(n, a[keep], b[keep], np.ones(n, bool)).linear_matrix(g)


@pytest.mark.parametrize("seed", [3141, 2718, 1618, 4669])
def test_condition_estimate_equals_lapack_on_nodal_matrices(seed):
    """For a nodal (M-) matrix the one-solve value is the exact 1-norm condition number of the
    scaled matrix: numpy.linalg.cond(S, 1) (LAPACK) agrees to rounding."""
    factor = ScaledFactor(random_nodal_matrix(seed))
    exact = np.linalg.cond(factor.scaled.toarray(), 1)
    assert factor.condition_estimate() == pytest.approx(exact, rel=1e-8)


@pytest.mark.parametrize("seed", [5772, 1414])
def test_condition_estimate_of_complex_matrices_bounds_lapack(seed):
    """Complex (pulsatile) matrices take Higham's block estimate (scipy onenormest): a lower
    bound of the LAPACK value, and within a factor 3 of it (Higham and Tisseur 2000)."""
    factor = ScaledFactor(random_nodal_matrix(seed, complex_=True).tocsc())
    exact = np.linalg.cond(factor.scaled.toarray(), 1)
    estimate = factor.condition_estimate()
    assert exact / 3 <= estimate <= exact * (1 + 1e-10)


def hub_network():
    """A hub joined to its four spokes by very short wide vessels, fed through one long thin
    vessel and drained by beds of high resistance: the scaled matrix is nearly singular."""
    vessels = [vessel(0, "root", "hub", 1.0, 2e-5)]
    vessels += [vessel(k, "hub", f"s{k}", 1e-5, 3e-2) for k in range(1, 5)]
    beds = [{"id": f"bed{k}", "node": f"s{k}", "resistance_pa_s_m3": 1e11} for k in range(1, 5)]
    return Network.build(nodes={"root": {"pressure_pa": 100 * MMHG_PA}}, vessels=vessels, beds=beds)


def test_ill_conditioned_network_warns_with_the_estimate():
    """Above the limit the result says how many digits to trust, and the JSON carries it."""
    result = solve(hub_network())
    assert result.condition_estimate > CONDITION_LIMIT
    exact = np.linalg.cond(ScaledFactor(_jacobian(hub_network())).scaled.toarray(), 1)
    # both values carry the error of an inverse, about condition x 1e-16 relative
    assert result.condition_estimate == pytest.approx(exact, rel=1e-3)  # LAPACK
    [warning] = [w for w in result.warnings if "condition estimate" in w]
    assert "significant digits" in warning and "mass balance" in warning
    assert warning in writers.result_json(result)["warnings"]
    p_ref, q_ref, _ = reference(hub_network())
    np.testing.assert_allclose(result.pressure_pa, p_ref, rtol=1e-9)


def _jacobian(net):
    v, beds = net.vessels, net.beds
    g = np.pi * v.radius_in_m ** 4 / (8 * net.blood.viscosity_pa_s * v.length_m)
    a = np.concatenate([v.from_node, beds.node])
    b = np.concatenate([v.to_node, -np.ones(len(beds), int)])
    return NodalPattern(len(net.nodes), a, b, np.isnan(net.nodes.pressure_pa)).linear_matrix(
        np.concatenate([g, 1 / beds.resistance_pa_s_m3]))


def test_well_conditioned_network_does_not_warn():
    net = Network.build(nodes={"r": {"pressure_pa": 13332.2}},
                        vessels=[vessel(0, "r", "t", 0.1, 2e-3)],
                        beds=[{"id": "organ", "node": "t", "resistance_pa_s_m3": 1.3e10}])
    result = solve(net)
    assert result.condition_estimate < 10 and not result.warnings


HEAD = "vesselnet: 1\nnodes:\n  root: {pressure: 100}\nvessels:\n"
BED = "beds:\n  - {id: organ, node: tip, resistance: 10}\n"


@pytest.mark.parametrize("length", ["0", "0 um", "0.0 m", "-0", "1e-400", "'0 cm'"])
def test_zero_length_vessel_refused_with_a_clear_message(length, tmp_path, capsys):
    """SPEC section 2: a zero length is an error naming file, line and vessel (1e-400 is zero
    in double precision)."""
    path = tmp_path / "net.yaml"
    path.write_text(HEAD + f"  - {{id: a, from: root, to: tip, length: {length}, radius: 2}}\n" + BED)
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert f"{path}:5:" in err and "vessels[0] 'a': length must be > 0, got" in err


@pytest.mark.parametrize(("field", "text"), [("radius", "radius: 0"), ("diameter", "diameter: 0 mm")])
def test_zero_radius_refused(field, text, tmp_path, capsys):
    path = tmp_path / "net.yaml"
    path.write_text(HEAD + f"  - {{id: a, from: root, to: tip, length: 3, {text}}}\n" + BED)
    assert main(["check", str(path)]) == 2
    assert f"vessels[0] 'a': {field} must be > 0" in capsys.readouterr().err


@pytest.mark.parametrize(("vessel_text", "expect"), [
    ("length: 1e-300, radius: 2", "stalled"),
    ("length: 1, radius: 1e-300", "vessel 'a': the resistance is zero, infinite or undefined"),
    ("length: 1, radius: 1e300", "vessel 'a': the resistance is zero, infinite or undefined"),
])
def test_beyond_double_precision_fails_fast_with_a_reason(vessel_text, expect, tmp_path, capsys):
    """Conductance ratios near 1e300 cannot be solved in double precision: exit 1 with the
    reason within a second, not 50 futile Newton steps or an internal error."""
    path = tmp_path / "net.yaml"
    path.write_text(HEAD + f"  - {{id: a, from: root, to: tip, {vessel_text}}}\n" + BED)
    start = time.perf_counter()
    assert main(["solve", str(path)]) == 1
    err = capsys.readouterr().err
    assert time.perf_counter() - start < 2
    assert "numerical failure:" in err and expect in err and "internal error" not in err


def test_singular_matrix_is_a_solve_error():
    """A zero conductance leaves a node held by nothing: SolveError, not SuperLU's RuntimeError."""
    A = sp.csc_matrix(np.array([[1.0, 0.0], [0.0, 0.0]]))
    with pytest.raises(SolveError, match="singular"):
        ScaledFactor(A)


def bridge(r_left=1e-3, r_right=1e-3, bed_left=1e9, bed_right=1e9):
    """Root feeds two branches (radius r_left, r_right) joined by a bridge vessel."""
    return Network.build(
        nodes={"root": {"pressure_pa": 100 * MMHG_PA}},
        vessels=[vessel(0, "root", "a", 0.1, r_left), vessel(1, "root", "b", 0.1, r_right),
                 {"id": "bridge", "from": "a", "to": "b", "length_m": 0.05, "radius_m": 2e-3}],
        beds=[{"id": "left", "node": "a", "resistance_pa_s_m3": bed_left},
              {"id": "right", "node": "b", "resistance_pa_s_m3": bed_right}])


def test_balanced_bridge_carries_exactly_zero():
    """A symmetric Wheatstone bridge carries no flow (circuit theory, common knowledge): the
    flow is exactly +0.0 (no -0 and no rounding noise), not reversed, and written as 0.0."""
    result = solve(bridge())
    flow = result.vessel_flow_m3_s[2]
    assert flow == 0.0 and math.copysign(1.0, flow) == 1.0
    assert not result.vessel_reversed[2]
    record = writers.vessels_json(result)[2]
    assert record["flow"] == 0.0 and json.dumps(record["flow"]) == "0.0"
    assert record["reversed"] is False


def test_balanced_unequal_bridge_carries_only_rounding():
    """Balanced but unequal arms (R1/R2 = R3/R4 with different values): the exact flow is 0;
    what remains is rounding, below 1e-12 of the inflow, and never flagged reversed."""
    r_small = 1e-3 / 2 ** 0.25                      # twice the resistance of a 1 mm branch
    result = solve(bridge(r_right=r_small, bed_right=2e9))
    assert abs(result.vessel_flow_m3_s[2]) <= 1e-12 * result.inflow_m3_s
    assert not result.vessel_reversed.any()


def test_equal_fixed_pressures_give_zero_flow():
    net = Network.build(nodes={"p": {"pressure_pa": 5000.0}, "q": {"pressure_pa": 5000.0}},
                        vessels=[vessel(0, "p", "q", 0.1, 1e-3)])
    result = solve(net)
    assert result.vessel_flow_m3_s[0] == 0.0 and not result.vessel_reversed[0]
    assert math.copysign(1.0, writers.vessels_json(result)[0]["flow"]) == 1.0


def test_no_negative_zero_in_numbers():
    assert math.copysign(1.0, writers.number(-0.0)) == 1.0
    assert math.copysign(1.0, writers.number(-1e-320)) == 1.0 or writers.number(-1e-320) < 0


CUT = """vesselnet: 1
nodes:
  root: {pressure: 100}
vessels:
  - {id: trunk, from: root, to: a, length: 10, radius: 3}
  - {id: feed, from: a, to: c, length: 10, radius: 2}
  - {id: side1, from: c, to: d, length: 5, radius: 1}
  - {id: side2, from: c, to: e, length: 5, radius: 1}
  - {id: link, from: d, to: e, length: 5, radius: 1}
beds:
  - {id: organ, node: a, resistance: 10, outflow_pressure: 0}
"""


@pytest.mark.parametrize("how", ["columns", "change verb"])
def test_occlusion_cutting_off_a_part_is_reported_while_the_rest_solves(how):
    """Occluding 'feed' leaves c, d, e with no pressure reference: they are left out (pressures
    NaN, JSON null, flows 0) with a warning naming them, and the rest is the series circuit
    root -> trunk -> organ: Q = P / (R_trunk + R_bed) (resistances in series add)."""
    net = read_network_text(CUT, "cut.yaml")
    if how == "columns":
        occluded = np.array([vid == "feed" for vid in net.vessels.ids])
        net = dataclasses.replace(net, vessels=dataclasses.replace(net.vessels, occluded=occluded))
    else:
        net = occlude(net, vessel="feed")
    result = solve(net)
    ids = net.nodes.ids
    for node in ("c", "d", "e"):
        assert math.isnan(result.pressure_pa[ids.index(node)])
    assert [w for w in result.warnings if "cut off" in w and "'c'" in w and "'e'" in w]
    r_trunk = 8 * 3.5e-3 * 0.10 / (math.pi * 0.003 ** 4)          # Poiseuille, REFERENCES 1.1
    r_bed = 10 * MMHG_PA / 1e-6
    q = 100 * MMHG_PA / (r_trunk + r_bed)
    assert result.vessel_flow_m3_s[0] == pytest.approx(q, rel=1e-12)
    assert result.bed_flow_m3_s[0] == pytest.approx(q, rel=1e-12)
    assert list(result.vessel_flow_m3_s[1:]) == [0.0, 0.0, 0.0, 0.0]
    doc = json.loads(writers.dumps(writers.result_json(result)))
    assert {n["id"]: n["pressure"] for n in doc["nodes"]}["d"] is None


def test_occlusion_cut_off_through_compare_exits_0(tmp_path, capsys):
    (tmp_path / "cut.yaml").write_text(CUT)
    (tmp_path / "scen.yaml").write_text("vesselnet: 1\nnetwork: cut.yaml\nscenarios:\n"
                                        "  - {name: closed, changes: [{occlude: {vessel: feed}}]}\n")
    assert main(["compare", str(tmp_path / "scen.yaml"), "--json"]) == 0
    captured = capsys.readouterr()
    assert "cut off from every pressure reference" in captured.err
    json.loads(captured.out)


def test_network_where_nothing_flows(tmp_path, capsys):
    """Found by the fuzzer: the fixed-pressure part is a dead end and the part with the beds
    has no source, so nothing flows.  Flows are 0, shares undefined (null, shown as '-'), a
    warning says why; it was an internal error (nanargmax of all-NaN shares)."""
    (tmp_path / "net.yaml").write_text("vesselnet: 1\nvessels_table: vessels.csv\nnodes:\n"
                                       "  root: {pressure: 100}\nbeds_table: beds.csv\n")
    (tmp_path / "vessels.csv").write_text("id,from,to,length,radius\nroot,root,a,1.0,1.0\n"
                                          "a,b,00,1.0,1.0\nloop5,b,0,1.0,1.0\n")
    (tmp_path / "beds.csv").write_text("id,node,resistance\nbed4,0,1.0\nbed5,00,1.0\n")
    assert main(["solve", str(tmp_path / "net.yaml")]) == 0
    captured = capsys.readouterr()
    assert "no flow enters the network" in captured.out + captured.err
    assert main(["solve", str(tmp_path / "net.yaml"), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert [b["share"] for b in doc["beds"]] == [None, None]
    assert all(v["flow"] == 0.0 for v in doc["vessels"])
