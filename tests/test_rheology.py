"""The coupled flow-hematocrit-viscosity solve (vesselnet.rheology).

Checks and their sources:

* Two-path network: the coupled solution equals a fixed point computed here
  with plain numpy and scipy's brentq, from the formulas as restated in
  REFERENCES: the in-vivo viscosity law (Pries et al. 1994, Circ Res 75:904,
  section 2.2, [M]: from memory), the phase-separation law (Pries et al.
  1989/1990 and Pries & Secomb 2005, section 3.1, [M]), Poiseuille
  resistance 128 mu L / (pi D^4) (section 1.1) and flux-weighted mixing.
* A network whose linearised plain iteration has a multiplier below -1
  (computed here from the same formulas) oscillates without relaxation,
  is reported as oscillating, and converges with relaxation.
* Red-cell flux conserved at every node to 1e-9 (cells are neither made nor
  lost at a junction; common practice, no source), beds included.
* Tube hematocrit from the Fåhræus relation of Pries et al. 1990 (REFERENCES
  2.5, [M]); red-cell flux = Q * HD (definition of discharge hematocrit).
* Symmetric bifurcation: equal daughters get equal hematocrit (symmetry of
  the law, REFERENCES 3.2 row 1).
"""

import dataclasses
import json

import numpy as np
import pytest
from scipy.optimize import brentq

from vesselnet.cli import main
from vesselnet.errors import NetworkSpecError, SolveError
from vesselnet.model import Blood, Network
from vesselnet.reader import read_network_text
from vesselnet.rheology import solve_rheology
from vesselnet.solve import solve
from vesselnet.testing import assert_invariants

MMHG = 133.322387415
PLASMA = 1.2e-3


# ---- formulas as restated in REFERENCES (appendix and sections 2-3), D in um ----

def c_shape(d):
    f = 1 / (1 + 1e-11 * d**12)
    return (0.8 + np.exp(-0.075 * d)) * (-1 + f) + f


def mu_vivo94(d, h):
    """Pries et al. 1994 in-vivo relative viscosity (REFERENCES 2.2, [M])."""
    mu45 = 6 * np.exp(-0.085 * d) + 3.2 - 2.44 * np.exp(-0.06 * d**0.645)
    c = c_shape(d)
    f = (d / (d - 1.1)) ** 2
    return (1 + (mu45 - 1) * ((1 - h) ** c - 1) / ((1 - 0.45) ** c - 1) * f) * f


def fqe(fqb, d_f, d_a, d_b, h_f, law):
    """Red-cell fraction into alpha (REFERENCES 3.1, [M]), both parameter sets."""
    if law == "pries-1990":
        a = -6.96 * np.log(d_a / d_b) / d_f
        x0 = 0.4 / d_f
    else:
        q = d_a**2 / d_b**2
        a = -13.29 * ((q - 1) / (q + 1)) * (1 - h_f) / d_f
        x0 = 0.964 * (1 - h_f) / d_f
    b = 1 + 6.98 * (1 - h_f) / d_f
    if fqb <= x0:
        return 0.0
    if fqb >= 1 - x0:
        return 1.0
    x = (fqb - x0) / (1 - 2 * x0)
    return 1 / (1 + np.exp(-(a + b * np.log(x / (1 - x)))))


def two_path_network(d_f, d_a, d_b, law, *, p_in=30 * MMHG, p_out=10 * MMHG, lengths=(1e-4,) * 4):
    """in -F-> j, j -a-> k, j -b-> k, k -E-> out; diameters in m."""
    blood = Blood(viscosity_law="pries-vivo", separation=law, plasma_viscosity_pa_s=PLASMA)
    l_f, l_a, l_b, l_e = lengths
    return Network.build(
        blood=blood, nodes={"in": {"pressure_pa": p_in}, "out": {"pressure_pa": p_out}},
        vessels=[{"id": "F", "from": "in", "to": "j", "length_m": l_f, "radius_m": d_f / 2},
                 {"id": "a", "from": "j", "to": "k", "length_m": l_a, "radius_m": d_a / 2},
                 {"id": "b", "from": "j", "to": "k", "length_m": l_b, "radius_m": d_b / 2},
                 {"id": "E", "from": "k", "to": "out", "length_m": l_e, "radius_m": d_f / 2}])


def split_map(x, d_f, d_a, d_b, law, l_a, l_b, h_f=0.45):
    """Flow fraction into a that the hematocrits caused by flow fraction x give.

    Hematocrits from the separation law; the parallel paths a and b share the
    pressure drop j -> k, so Q_a / Q_b = R_b / R_a with R = 128 mu L / (pi D^4).
    """
    um = 1e6
    e = fqe(x, d_f * um, d_a * um, d_b * um, h_f, law)
    h_a, h_b = e * h_f / x, (1 - e) * h_f / (1 - x)
    r_a = mu_vivo94(d_a * um, h_a) * l_a / d_a**4
    r_b = mu_vivo94(d_b * um, h_b) * l_b / d_b**4
    return r_b / (r_a + r_b), h_a, h_b


def independent_fixed_point(d_f, d_a, d_b, law, *, p_in=30 * MMHG, p_out=10 * MMHG,
                            lengths=(1e-4,) * 4, h_f=0.45):
    """Fixed point of the two-path network with numpy and brentq only.

    Unknown: x = Q_a / Q_F.  Root of split(x) - x, bracketed by a scan that
    also shows the root is unique.  F and E carry H_F (conservation, mixing).
    """
    l_f, l_a, l_b, l_e = lengths
    g = lambda x: split_map(x, d_f, d_a, d_b, law, l_a, l_b, h_f)[0] - x  # noqa: E731
    xs = np.linspace(0.02, 0.98, 481)
    values = np.array([g(x) for x in xs])
    brackets = np.flatnonzero(np.sign(values[:-1]) != np.sign(values[1:]))
    assert brackets.size == 1, "the test geometry must have one fixed point"
    i = brackets[0]
    x = brentq(g, xs[i], xs[i + 1], xtol=1e-14, rtol=1e-14)
    _, h_a, h_b = split_map(x, d_f, d_a, d_b, law, l_a, l_b, h_f)
    um = 1e6
    mu = PLASMA * np.array([mu_vivo94(d_f * um, h_f), mu_vivo94(d_a * um, h_a),
                            mu_vivo94(d_b * um, h_b), mu_vivo94(d_f * um, h_f)])
    d = np.array([d_f, d_a, d_b, d_f])
    r = 128 * mu * np.array(lengths) / (np.pi * d**4)
    r_parallel = 1 / (1 / r[1] + 1 / r[2])
    q = (p_in - p_out) / (r[0] + r_parallel + r[3])
    return {"flow": np.array([q, x * q, (1 - x) * q, q]), "hematocrit": np.array([h_f, h_a, h_b, h_f]),
            "viscosity": mu, "x": x}


TWO_PATHS = [
    (10e-6, 8e-6, 6e-6, "pries-1990"),
    (10e-6, 8e-6, 6e-6, "pries-2005"),
    (12e-6, 6e-6, 9e-6, "pries-1990"),
    (7e-6, 7e-6, 4e-6, "pries-2005"),
]


@pytest.mark.parametrize("d_f, d_a, d_b, law", TWO_PATHS)
def test_two_paths_equal_independent_fixed_point(d_f, d_a, d_b, law):
    """Flows, hematocrits and viscosities equal the fixed point computed in the test."""
    expected = independent_fixed_point(d_f, d_a, d_b, law)
    result = solve_rheology(two_path_network(d_f, d_a, d_b, law), tolerance=1e-11)
    np.testing.assert_allclose(result.vessel_flow_m3_s, expected["flow"], rtol=1e-8)
    np.testing.assert_allclose(result.vessel_extra["hematocrit"], expected["hematocrit"],
                               rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(result.vessel_viscosity_pa_s, expected["viscosity"], rtol=1e-8)
    assert_invariants(result)


def test_oscillating_network_needs_relaxation():
    """The plain iteration's multiplier d split / dx at the fixed point is below -1
    (computed here by central differences of the test's own map), so without
    relaxation it cannot settle: reported as oscillating; with relaxation 0.5 the
    multiplier becomes 1 - 0.5 (1 - lambda), inside (-1, 1), and it converges to the
    independent fixed point."""
    geometry = (7e-6, 7e-6, 4e-6, "pries-2005")
    fixed = independent_fixed_point(*geometry)
    step = 1e-6
    lam = (split_map(fixed["x"] + step, *geometry, 1e-4, 1e-4)[0]
           - split_map(fixed["x"] - step, *geometry, 1e-4, 1e-4)[0]) / (2 * step)
    assert lam < -1 and abs(1 - 0.5 * (1 - lam)) < 1
    net = two_path_network(*geometry)
    with pytest.raises(SolveError, match="oscillates") as failure:
        solve_rheology(net, relaxation=1.0, anderson_memory=0)
    assert "residual first" in str(failure.value) and failure.value.ids
    for memory in (0, 5):
        result = solve_rheology(net, relaxation=0.5, anderson_memory=memory, tolerance=1e-11)
        np.testing.assert_allclose(result.vessel_flow_m3_s, fixed["flow"], rtol=1e-8)


def test_iteration_limit_is_reported():
    """Too few iterations: a SolveError with the residual history, never a silent result."""
    net = two_path_network(10e-6, 8e-6, 6e-6, "pries-1990")
    with pytest.raises(SolveError, match=r"did not converge in 2 iterations.*residual first"):
        solve_rheology(net, max_iterations=2)


def _yaml(extra_nodes="", law="pries-vivo", separation="pries-1990", hematocrit=0.45):
    return f"""
vesselnet: 1
units: {{length: um, radius: um, pressure: mmHg, resistance: mmHg*s/mL}}
blood: {{viscosity: {{law: {law}, plasma: 1.2 cP}}, separation: {separation}, hematocrit: {hematocrit}}}
nodes:
  in: {{pressure: 40}}
{extra_nodes}
vessels:
  - {{id: F, from: in, to: j, length: 100, radius: 5}}
  - {{id: a, from: j, to: k, length: 100, radius: 4}}
  - {{id: b, from: j, to: m, length: 100, radius: 3}}
  - {{id: c, from: k, to: t1, length: 80, radius: 3}}
  - {{id: d, from: k, to: t2, length: 120, radius: 3.5}}
  - {{id: e, from: m, to: t2, length: 90, radius: 3}}
beds:
  - {{id: bed1, node: t1, resistance: 2e5, outflow_pressure: 10}}
  - {{id: bed2, node: t2, resistance: 3e5, outflow_pressure: 10}}
"""


def test_red_cells_conserved_at_every_node_with_beds():
    """At every node red cells in = red cells out (vessels, beds, boundaries) to 1e-9
    of the red cells entering; the beds receive all red cells that enter."""
    result = solve_rheology(read_network_text(_yaml()), tolerance=1e-10)
    net = result.network
    v = net.vessels
    flux = result.vessel_extra["red_cell_flux_m3_s"]
    n = len(net.nodes)
    net_out = np.bincount(v.from_node, flux, n) - np.bincount(v.to_node, flux, n)
    delivery = result.bed_extra["red_cell_delivery_m3_s"]
    net_out += np.bincount(net.beds.node, delivery, n)
    entering = 0.45 * result.inflow_m3_s
    inlet = net.nodes.index["in"]
    net_out[inlet] -= entering
    assert np.abs(net_out).max() < 1e-9 * entering
    assert abs(delivery.sum() - entering) < 1e-9 * entering


def test_generated_network_conserves_red_cells():
    """The same balance on a generated mesh (junctions of three and four vessels)."""
    from vesselnet.generate import microvascular_network

    result = solve_rheology(microvascular_network(500, seed=6021))
    net = result.network
    v = net.vessels
    flux = result.vessel_extra["red_cell_flux_m3_s"]
    n = len(net.nodes)
    net_out = np.bincount(v.from_node, flux, n) - np.bincount(v.to_node, flux, n)
    net_out += np.bincount(net.beds.node, result.bed_extra["red_cell_delivery_m3_s"], n)
    entering = 0.45 * result.inflow_m3_s
    net_out[net.nodes.index["inlet"]] -= entering
    assert np.abs(net_out).max() < 1e-9 * entering
    assert_invariants(result)


def test_outputs_follow_their_definitions():
    """Red-cell flux = Q HD; tube hematocrit by the Fåhræus relation (Pries et al. 1990,
    REFERENCES 2.5, [M]), below HD in microvessels; bed delivery = bed flow x the
    hematocrit of the vessel feeding its node (a single feeding vessel here)."""
    result = solve_rheology(read_network_text(_yaml()))
    h = result.vessel_extra["hematocrit"]
    q = result.vessel_flow_m3_s
    np.testing.assert_allclose(result.vessel_extra["red_cell_flux_m3_s"], q * h, rtol=1e-14)
    d_um = 2e6 * result.network.vessels.radius_in_m
    ratio = h + (1 - h) * (1 + 1.7 * np.exp(-0.415 * d_um) - 0.6 * np.exp(-0.011 * d_um))
    np.testing.assert_allclose(result.vessel_extra["tube_hematocrit"], h * ratio, rtol=1e-12)
    assert np.all(result.vessel_extra["tube_hematocrit"] < h)
    ids = result.network.vessels.index
    delivery = dict(zip(result.network.beds.ids, result.bed_extra["red_cell_delivery_m3_s"]))
    np.testing.assert_allclose(delivery["bed1"], result.bed_flow_m3_s[0] * h[ids["c"]], rtol=1e-12)
    checks = result.extra_checks["rheology"]
    assert checks["iterations"] == len(checks["residual_history"]) >= 2
    assert max(checks["hematocrit_residual"], checks["flow_residual"]) <= checks["tolerance"]


@pytest.mark.parametrize("law", ["pries-1990", "pries-2005"])
def test_symmetric_bifurcation_splits_evenly(law):
    """Equal daughters draining to equal pressures: equal flow and hematocrit 0.45
    (REFERENCES 3.2 first row: FQB 0.5 gives FQE 0.5)."""
    blood = Blood(viscosity_law="pries-vitro", separation=law)
    net = Network.build(blood=blood, nodes={"in": {"pressure_pa": 5000.0},
                                            "o1": {"pressure_pa": 1000.0}, "o2": {"pressure_pa": 1000.0}},
                        vessels=[{"id": "F", "from": "in", "to": "j", "length_m": 2e-4, "radius_m": 5e-6},
                                 {"id": "a", "from": "j", "to": "o1", "length_m": 2e-4, "radius_m": 4e-6},
                                 {"id": "b", "from": "j", "to": "o2", "length_m": 2e-4, "radius_m": 4e-6}])
    h = solve_rheology(net).vessel_extra["hematocrit"]
    np.testing.assert_allclose(h, 0.45, rtol=1e-9)


def test_inlet_hematocrit_per_node_mixes_by_flux():
    """Two inlets of hematocrit 0.3 and 0.6 (node key `hematocrit`) joining: the mixed
    vessel carries sum Q_i H_i / sum Q_i (REFERENCES 3.1, flux-weighted mixing)."""
    text = """
vesselnet: 1
units: {length: um, radius: um, pressure: mmHg}
blood: {viscosity: {law: pries-vitro}, separation: pries-1990, hematocrit: 0.45}
nodes:
  p: {pressure: 40, hematocrit: 0.3}
  q: {pressure: 35, hematocrit: 60%}
  out: {pressure: 10}
vessels:
  - {id: one, from: p, to: j, length: 100, radius: 5}
  - {id: two, from: q, to: j, length: 100, radius: 4}
  - {id: joined, from: j, to: out, length: 100, radius: 6}
"""
    result = solve_rheology(read_network_text(text), tolerance=1e-10)
    q = result.vessel_flow_m3_s
    h = result.vessel_extra["hematocrit"]
    np.testing.assert_allclose(h[:2], [0.3, 0.6], rtol=1e-12)
    np.testing.assert_allclose(h[2], (q[0] * 0.3 + q[1] * 0.6) / (q[0] + q[1]), rtol=1e-9)


def test_zero_flow_vessel_gives_no_nan():
    """A bridge between two points of equal pressure carries no flow (Wheatstone
    balance by symmetry): finite hematocrit and viscosity everywhere."""
    blood = Blood(viscosity_law="pries-vivo", separation="pries-2005")
    seg = {"length_m": 1e-4}
    net = Network.build(blood=blood, nodes={"in": {"pressure_pa": 5000.0}, "out": {"pressure_pa": 1000.0}},
                        vessels=[{"id": "F", "from": "in", "to": "j", "radius_m": 5e-6, **seg},
                                 {"id": "u1", "from": "j", "to": "x", "radius_m": 4e-6, **seg},
                                 {"id": "u2", "from": "j", "to": "y", "radius_m": 4e-6, **seg},
                                 {"id": "bridge", "from": "x", "to": "y", "radius_m": 3e-6, **seg},
                                 {"id": "d1", "from": "x", "to": "k", "radius_m": 4e-6, **seg},
                                 {"id": "d2", "from": "y", "to": "k", "radius_m": 4e-6, **seg},
                                 {"id": "E", "from": "k", "to": "out", "radius_m": 5e-6, **seg}])
    result = solve_rheology(net)
    assert abs(result.vessel_flow_m3_s[3]) < 1e-12 * abs(result.vessel_flow_m3_s[0])
    assert np.all(np.isfinite(result.vessel_extra["hematocrit"]))
    assert np.all(np.isfinite(result.vessel_viscosity_pa_s))


def test_plasma_only_daughter_is_counted():
    """A daughter taking less than X0 = 0.4 / D_F of the flow gets no red cells
    (REFERENCES 3.1: FQE = 0 for FQB <= X0), and is counted as plasma-only."""
    blood = Blood(viscosity_law="pries-vivo", separation="pries-1990")
    net = Network.build(blood=blood, nodes={"in": {"pressure_pa": 5000.0}, "o1": {"pressure_pa": 1000.0},
                                            "o2": {"pressure_pa": 1000.0}},
                        vessels=[{"id": "F", "from": "in", "to": "j", "length_m": 1e-4, "radius_m": 4e-6},
                                 {"id": "a", "from": "j", "to": "o1", "length_m": 1e-4, "radius_m": 4e-6},
                                 {"id": "b", "from": "j", "to": "o2", "length_m": 3e-3, "radius_m": 2e-6}])
    result = solve_rheology(net)
    q = result.vessel_flow_m3_s
    assert q[2] / q[0] < 0.4 / 8          # below X0 for D_F = 8 um
    assert result.vessel_extra["hematocrit"][2] == 0
    assert result.extra_checks["rheology"]["plasma_only_vessels"] == 1


def test_constant_viscosity_with_separation_is_one_pass():
    """With a constant viscosity the flows are those of the plain solve; hematocrit is
    marched once."""
    net = read_network_text(_yaml(law="constant"))
    result = solve_rheology(net)
    plain = solve(dataclasses.replace(net, blood=dataclasses.replace(net.blood, separation="none")))
    np.testing.assert_allclose(result.vessel_flow_m3_s, plain.vessel_flow_m3_s, rtol=1e-12)
    assert result.extra_checks["rheology"]["iterations"] == 1
    assert "hematocrit" in result.vessel_extra


def test_solve_dispatches_to_the_coupled_solve():
    """solve() honours the law named in the file: the same result as solve_rheology."""
    net = read_network_text(_yaml())
    a, b = solve(net), solve_rheology(net)
    np.testing.assert_array_equal(a.vessel_flow_m3_s, b.vessel_flow_m3_s)
    assert "rheology" in a.extra_checks


def test_out_of_range_inputs_warn():
    """Diameters below the fitted 3.3 um (in vitro, Pries et al. 1992 abstract) and a
    plasma viscosity given in the wrong unit are named in the warnings."""
    text = _yaml().replace("radius: 3}", "radius: 1.5}").replace("plasma: 1.2 cP", "plasma: 12 cP")
    result = solve_rheology(read_network_text(text))
    joined = " ".join(result.warnings)
    assert "narrower than the fitted range" in joined and "'b'" in joined
    assert "plasma viscosity" in joined


@pytest.mark.parametrize("option, value, match", [
    ("relaxation", 0.0, "relaxation"), ("relaxation", 1.5, "relaxation"),
    ("tolerance", -1.0, "tolerance"), ("max_iterations", 0, "max_iterations"),
    ("anderson_memory", -1, "anderson_memory"),
])
def test_bad_options_raise(option, value, match):
    with pytest.raises(NetworkSpecError, match=match):
        solve_rheology(read_network_text(_yaml()), **{option: value})


def test_singular_diameter_names_the_vessel():
    """The in-vivo law divides by D - 1.1 um (REFERENCES 2.2): refused, naming the vessel."""
    text = _yaml().replace("{id: e, from: m, to: t2, length: 90, radius: 3}",
                           "{id: e, from: m, to: t2, length: 90, radius: 0.5}")
    with pytest.raises(NetworkSpecError, match=r"'e'.*1\.1 um"):
        solve_rheology(read_network_text(text))


def test_series_beds_are_refused():
    """Beds draining into a node would carry red cells the march cannot follow."""
    text = _yaml().replace("outflow_pressure: 10}", "outflow_node: in}", 1)
    with pytest.raises(NetworkSpecError, match="outflow_node"):
        solve_rheology(read_network_text(text))


@pytest.mark.parametrize("snippet, match", [
    ("  j: {hematocrit: 45}", "hematocrit must be at least 0 and below 1"),
    ("  j: {hematocrit: -0.1}", "hematocrit"),
])
def test_bad_node_hematocrit_is_a_located_error(snippet, match):
    with pytest.raises(NetworkSpecError, match=match):
        read_network_text(_yaml(extra_nodes=snippet), "net.yaml")


def test_cli_json_carries_rheology(tmp_path, capsys):
    """`vesselnet solve --json`: hematocrit, tube hematocrit, red-cell flux, viscosity per
    vessel; red-cell delivery per bed; rheology iterations and residuals in checks."""
    path = tmp_path / "net.yaml"
    path.write_text(_yaml())
    assert main(["solve", str(path), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    vessel = doc["vessels"][0]
    assert {"hematocrit", "tube_hematocrit", "red_cell_flux", "viscosity"} <= set(vessel)
    assert "red_cell_delivery" in doc["beds"][0]
    rheology = doc["checks"]["rheology"]
    assert rheology["iterations"] == len(rheology["residual_history"])
    assert rheology["viscosity_law"] == "pries-vivo"


def test_cli_tables_carry_rheology(tmp_path, capsys):
    path = tmp_path / "net.yaml"
    path.write_text(_yaml())
    assert main(["solve", str(path), "-o", str(tmp_path / "out")]) == 0
    vessels = (tmp_path / "out" / "vessels.csv").read_text().splitlines()[0]
    beds = (tmp_path / "out" / "beds.csv").read_text().splitlines()[0]
    assert "hematocrit" in vessels and "red_cell_flux[mL/min]" in vessels
    assert "red_cell_delivery[mL/min]" in beds
    out = capsys.readouterr().out
    assert "rheology: viscosity pries-vivo" in out and "red cells [mL/min]" in out


def test_cli_reports_non_convergence_with_exit_1(tmp_path, capsys):
    """An iteration that cannot converge within the limit, and one that oscillates,
    end with exit status 1 and the residual history in the message."""
    path = tmp_path / "net.yaml"
    path.write_text(_yaml())
    assert main(["solve", str(path), "--rheology-iterations", "2"]) == 1
    err = capsys.readouterr().err
    assert "numerical failure" in err and "did not converge in 2 iterations" in err
    assert "residual first" in err
    two_paths = tmp_path / "two_paths.yaml"
    two_paths.write_text("""
vesselnet: 1
units: {length: um, radius: um, pressure: mmHg}
blood: {viscosity: {law: pries-vivo, plasma: 1.2 cP}, separation: pries-2005}
nodes: {in: {pressure: 30}, out: {pressure: 10}}
vessels:
  - {id: F, from: in, to: j, length: 100, diameter: 7}
  - {id: a, from: j, to: k, length: 100, diameter: 7}
  - {id: b, from: j, to: k, length: 100, diameter: 4}
  - {id: E, from: k, to: out, length: 100, diameter: 7}
""")
    assert main(["solve", str(two_paths), "--relaxation", "1", "--anderson-memory", "0"]) == 1
    assert "oscillates" in capsys.readouterr().err
    assert main(["solve", str(two_paths), "--relaxation", "0.5", "--anderson-memory", "0"]) == 0
