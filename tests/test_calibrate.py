"""Calibration: targets reproduced exactly, inconsistent targets explained, the textbook body.

External references: a dense linear-algebra oracle written here from
Kirchhoff's laws and the Hagen-Poiseuille formula (numpy.linalg.solve, no
vesselnet numerics); Guyton & Hall's table of resting organ blood flow and
the resistances derived from it (REFERENCES 8.3, from memory [M], derived
values [C]); the systemic vascular resistance worked example and normal
range (REFERENCES 8.2: (93.3 - 3)/5 = 18.06 WU [V2; C]; 9-20 WU, Hurst's
The Heart via Wikipedia [V2]).
"""

import dataclasses
import re

import numpy as np
import pytest

from calib_networks import random_network, with_targets
from vesselnet.calibrate import calibrate
from vesselnet.cli import main
from vesselnet.demos import demo_path
from vesselnet.errors import NetworkSpecError
from vesselnet.model import Network
from vesselnet.reader import load_network, read_network_text
from vesselnet.solve import solve
from vesselnet.targets import load_targets
from vesselnet.testing import assert_invariants
from vesselnet.units import MMHG_PA

WU = MMHG_PA / (1e-3 / 60)          # Wood unit, mmHg*min/L, in Pa*s/m^3 (REFERENCES 8.2, [C])
ML_MIN = 1e-6 / 60
SEEDS = [20240611, 7211, 90417, 31337, 58213, 4409]


def jittered(network, rng, rows=None):
    """``network`` with shares near its present ones (x U(0.8, 1.2), renormalised over the
    terminal beds), on ``rows`` only when given: targets a lesioned network can meet."""
    present = solve(network).bed_share
    terminal = network.beds.outflow_node < 0
    share = present * rng.uniform(0.8, 1.2, len(present))
    share[terminal] /= share[terminal].sum()
    if rows is not None:
        keep = np.zeros(len(share), dtype=bool)
        keep[rows] = True
        share = np.where(keep, share, np.nan)
    return dataclasses.replace(network, beds=dataclasses.replace(network.beds, share=share))


def assert_targets_met(cal, network, rtol=1e-9):
    """Shares (or flows) and target pressures of ``network`` reproduced by the calibrated solve."""
    r = cal.result
    share = network.beds.share
    has = ~np.isnan(share)
    np.testing.assert_allclose(r.bed_share[has], share[has], rtol=0, atol=rtol)
    tp = network.nodes.target_pressure_pa
    has_p = ~np.isnan(tp)
    np.testing.assert_allclose(r.pressure_pa[has_p], tp[has_p], rtol=rtol)
    assert_invariants(r, rtol=1e-9)


@pytest.mark.parametrize("seed", SEEDS)
@pytest.mark.parametrize("lesions", [0, 2])
def test_random_inflow_networks_reproduce_targets(seed, lesions):
    """Prescribed inflow, every bed a share, a target inlet pressure: met to 1e-9."""
    rng = np.random.default_rng(seed)
    net = with_targets(random_network(rng, lesions=lesions, series=seed % 2 == 0), rng, pressure_mmhg=95.0)
    cal = calibrate(net)
    assert cal.inflow_source == "prescribed inflow"
    assert_targets_met(cal, net)


@pytest.mark.parametrize("seed", SEEDS)
@pytest.mark.parametrize("lesions", [0, 2])
def test_random_pressure_networks_reproduce_targets(seed, lesions):
    """Fixed inlet pressure, every terminal bed a share: the shares are met, total kept."""
    rng = np.random.default_rng(seed)
    net = jittered(random_network(rng, inlet="pressure", lesions=lesions), rng)
    cal = calibrate(net)
    assert_targets_met(cal, net)
    assert cal.result.inflow_m3_s == pytest.approx(solve(net).inflow_m3_s, rel=1e-9)


@pytest.mark.parametrize("seed", SEEDS[:3])
@pytest.mark.parametrize("lesions", [0, 2])
def test_partial_shares_are_shares_of_the_calibrated_total(seed, lesions):
    """Fixed inlet pressure, shares on two beds only: the others keep their resistance and the
    shares hold as fractions of the calibrated network's own inflow."""
    rng = np.random.default_rng(seed)
    base = random_network(rng, inlet="pressure", lesions=lesions)
    net = jittered(base, rng, rows=[0, 1])
    cal = calibrate(net)
    assert_targets_met(cal, net)
    untouched = ~cal.calibrated
    np.testing.assert_array_equal(cal.resistance_pa_s_m3[untouched], base.beds.resistance_pa_s_m3[untouched])


@pytest.mark.parametrize("seed", SEEDS[:3])
def test_flow_targets_and_requested_inflow(seed):
    """Flow targets on some beds, shares on the rest, a requested total inflow (fixed inlet pressure)."""
    rng = np.random.default_rng(seed)
    net = jittered(random_network(rng, inlet="pressure"), rng)
    total = 1.1 * solve(net).inflow_m3_s
    flows = {net.beds.ids[0]: float(net.beds.share[0]) * total}
    shares = net.beds.share.copy()
    shares[0] = np.nan
    cal = calibrate(dataclasses.replace(net, beds=dataclasses.replace(net.beds, share=shares)),
                    bed_flow_m3_s=flows, inflow_m3_s=total)
    assert cal.result.inflow_m3_s == pytest.approx(total, rel=1e-9)
    assert cal.result.bed_flow_m3_s[0] == pytest.approx(flows[net.beds.ids[0]], rel=1e-9)
    np.testing.assert_allclose(cal.result.bed_share[1:], net.beds.share[1:], atol=1e-9)


def poiseuille_conductance(length_m, radius_m, viscosity_pa_s):
    """pi r^4 / (8 mu L): Hagen-Poiseuille (written out here, independent of vesselnet)."""
    return np.pi * radius_m**4 / (8 * viscosity_pa_s * length_m)


@pytest.mark.parametrize("seed", SEEDS)
def test_resistances_equal_a_dense_kirchhoff_oracle(seed):
    """Derivation: with every bed's flow Q_b fixed, Kirchhoff's current law at the free nodes
    is G p = q (G the vessel Laplacian, q the inflow minus the bed flows), with p fixed at the
    target node; then R_b = (p_node - p_out) / Q_b.  Solved densely with numpy."""
    rng = np.random.default_rng(seed)
    net = with_targets(random_network(rng, loops=3), rng, pressure_mmhg=97.0)
    cal = calibrate(net)
    v, beds, n = net.vessels, net.beds, len(net.nodes)
    g = poiseuille_conductance(v.length_m, v.radius_in_m, net.blood.viscosity_pa_s)
    G = np.zeros((n, n))
    for a, b, c in zip(v.from_node, v.to_node, g):
        G[a, a] += c
        G[b, b] += c
        G[a, b] -= c
        G[b, a] -= c
    total = float(net.nodes.inflow_m3_s[0])
    q = np.zeros(n)
    q[0] = total
    flows = beds.share * total
    for k in range(len(beds)):
        q[beds.node[k]] -= flows[k]
        if beds.outflow_node[k] >= 0:
            q[beds.outflow_node[k]] += flows[k]
    p = np.zeros(n)
    p[0] = net.nodes.target_pressure_pa[0]
    free = np.arange(1, n)
    p[free] = np.linalg.solve(G[np.ix_(free, free)], q[free] - G[free, 0] * p[0])
    out = np.where(beds.outflow_node >= 0, p[np.maximum(beds.outflow_node, 0)], beds.outflow_pressure_pa)
    expected = (p[beds.node] - out) / flows
    np.testing.assert_allclose(cal.resistance_pa_s_m3, expected, rtol=1e-9)


def two_branch(**root) -> dict:
    """A root, a trunk and two branches with one bed each (for the bad-target cases)."""
    return dict(nodes={"root": root},
                vessels=[{"id": "trunk", "from": "root", "to": "fork", "length_m": 0.1, "radius_m": 0.003},
                         {"id": "left", "from": "fork", "to": "l", "length_m": 0.1, "radius_m": 0.002},
                         {"id": "right", "from": "fork", "to": "r", "length_m": 0.1, "radius_m": 0.002}],
                beds=[{"id": "a", "node": "l", "resistance_pa_s_m3": 1e9},
                      {"id": "b", "node": "r", "resistance_pa_s_m3": 1e9}])


def built(shares=(0.4, 0.6), **root):
    spec = two_branch(**root)
    for bed, s in zip(spec["beds"], shares):
        if s is not None:
            bed["share"] = s
    return Network.build(**spec)


Q = 100 * ML_MIN
P95 = 95 * MMHG_PA
BAD = [
    ("shares sum to 0.9", lambda: built((0.4, 0.5), inflow_m3_s=Q, target_pressure_pa=P95), {},
     r"do not balance.*0\.9 leaves but 1 enters"),
    ("pressure too low", lambda: built(inflow_m3_s=Q, target_pressure_pa=5.2 * MMHG_PA), {},
     r"'a'.*negative resistance.*not above its outflow pressure"),
    ("fixed and target pressure", lambda: built(pressure_pa=P95, target_pressure_pa=90 * MMHG_PA), {},
     r"fixed pressure .* and a different target_pressure"),
    ("undetermined", lambda: built(inflow_m3_s=Q), {}, r"pressures undetermined.*target_pressure"),
    ("zero share", lambda: built((0.0, 1.0), inflow_m3_s=Q, target_pressure_pa=P95), {},
     r"share 0 would need an infinite resistance"),
    ("share and flow", lambda: built(inflow_m3_s=Q, target_pressure_pa=P95), {"bed_flow_m3_s": {"a": Q / 2}},
     r"both a share and a flow target"),
    ("inflow already prescribed", lambda: built(inflow_m3_s=Q, target_pressure_pa=P95), {"inflow_m3_s": Q},
     r"prescribes its inflow"),
    ("inflow target with free beds", lambda: built((0.4, None), pressure_pa=P95), {"inflow_m3_s": Q},
     r"needs a target on every terminal bed.*'b'"),
    ("no targets", lambda: built((None, None), pressure_pa=P95), {}, r"no calibration targets"),
    ("over-determined by a free bed", lambda: built((0.4, None), inflow_m3_s=Q, target_pressure_pa=P95), {},
     r"target_pressure at 'root': cannot be met.*beds without a target \('b'\)"),
]


@pytest.mark.parametrize("name,make,options,pattern", BAD, ids=[b[0] for b in BAD])
def test_inconsistent_targets_are_explained(name, make, options, pattern):
    with pytest.raises(NetworkSpecError, match=pattern):
        calibrate(make(), **options)


def test_portal_part_without_reference_is_explained():
    """Whole-body demo: with the liver bed given a share too, the portal vein's pressure is set
    by nothing once all bed flows are fixed (the gut beds drain into it in series)."""
    net = load_targets(demo_path("whole_body_resting_targets"), load_network(demo_path("whole_body"))).network
    share = net.beds.share.copy()
    share[net.beds.index["liver"]] = 0.27
    net = dataclasses.replace(net, beds=dataclasses.replace(net.beds, share=share))
    with pytest.raises(NetworkSpecError, match=r"'portal_confluence', 'liver_sinusoids': pressures undetermined"):
        calibrate(net)


# --- Guyton & Hall resting distribution (REFERENCES 8.3) ---------------------------------

GUYTON_PERCENT = {"brain": 14, "heart": 4, "bronchi": 2, "kidneys": 22, "portal": 21,
                  "hepatic artery": 6, "skeletal muscle": 15, "bone": 5, "skin": 6,
                  "thyroid, adrenals, other": 1 + 0.5 + 3.5}
"""Guyton & Hall, Textbook of Medical Physiology, blood flow to organs under basal conditions
(% of 5000 mL/min; REFERENCES 8.3, from memory [M])."""

DEMO_GROUPS = {
    "brain": ["brain_right", "brain_left", "brain_posterior"],
    "heart": ["myocardium_lad", "myocardium_circumflex", "myocardium_rca"],
    "bronchi": ["bronchial"], "kidneys": ["kidney_right", "kidney_left"],
    "portal": ["stomach_pancreas", "spleen", "small_bowel", "large_bowel"],
    "hepatic artery": ["hepatic_arterial"],
    "skeletal muscle": ["arm_muscle_right", "arm_muscle_left", "chest_muscle", "back_muscle",
                        "thigh_muscle_right", "thigh_muscle_left", "calf_muscle_right", "calf_muscle_left"],
    "bone": ["spine_bone"],
    "skin": ["hand_skin_right", "hand_skin_left", "chest_skin", "back_skin", "leg_skin_right", "leg_skin_left"],
    "thyroid, adrenals, other": ["face_neck_right", "face_neck_left", "pelvis_right", "pelvis_left"],
}
"""Which demo beds make up each row of the table (our own assignment)."""


def guyton_whole_body(venous_mmhg=None):
    net = load_network(demo_path("whole_body"))
    if venous_mmhg is not None:
        beds = net.beds
        out = np.where(beds.outflow_node < 0, venous_mmhg * MMHG_PA, np.nan)
        net = dataclasses.replace(net, beds=dataclasses.replace(beds, outflow_pressure_pa=out))
    return load_targets(demo_path("whole_body_resting_targets"), net).network


def group_shares(network, shares):
    return {g: 100 * sum(shares[network.beds.index[b]] for b in ids) for g, ids in DEMO_GROUPS.items()}


def test_demo_targets_file_follows_the_table():
    """The shipped targets file splits each row of Guyton & Hall's table over the demo's beds;
    each row adds up to the table's percentage (REFERENCES 8.3)."""
    net = guyton_whole_body()
    got = group_shares(net, net.beds.share)
    for group, percent in GUYTON_PERCENT.items():
        assert got[group] == pytest.approx(percent, abs=1e-12), group
    assert np.isnan(net.beds.share[net.beds.index["liver"]])
    assert net.nodes.target_pressure_pa[net.nodes.index["heart"]] == pytest.approx(93.3 * MMHG_PA)


def dense_input_resistance(result) -> float:
    """Equivalent resistance seen at the heart: 1 m^3/s injected there, every terminal bed
    grounded at 0, the element resistances of the solution; dense solve (numpy)."""
    net = result.network
    n = len(net.nodes)
    G = np.zeros((n, n))
    v = net.vessels

    def stamp(a, b, g):
        G[a, a] += g
        if b >= 0:
            G[b, b] += g
            G[a, b] -= g
            G[b, a] -= g

    for a, b, r in zip(v.from_node, v.to_node, result.vessel_resistance_pa_s_m3):
        stamp(a, b, 1 / r)
    for a, b, r in zip(net.beds.node, net.beds.outflow_node, net.beds.resistance_pa_s_m3):
        stamp(a, b, 1 / r)
    q = np.zeros(n)
    heart = net.nodes.index["heart"]
    q[heart] = 1.0
    return float(np.linalg.solve(G, q)[heart])


def test_whole_body_calibrated_to_guyton_reproduces_it_and_the_textbook_resistance():
    """Calibrated to Guyton & Hall's resting distribution (REFERENCES 8.3) with a mean aortic
    pressure of 93.3 mmHg (120/80 mmHg, REFERENCES 8.1) and a right atrial pressure of 3 mmHg,
    the demo reproduces every row of the table, and its total resistance is the worked
    example's (93.3 - 3)/5 = 18.06 WU = 1445 dyn*s/cm^5 (REFERENCES 8.2 [V2; C]), inside the
    normal range 9-20 WU (Hurst's The Heart, via REFERENCES 8.2 [V2])."""
    net = guyton_whole_body(venous_mmhg=3.0)
    cal = calibrate(net)
    got = group_shares(net, cal.result.bed_share)
    for group, percent in GUYTON_PERCENT.items():
        assert got[group] == pytest.approx(percent, abs=1e-7), group
    assert 100 * cal.result.bed_share[net.beds.index["liver"]] == pytest.approx(27, abs=1e-7)
    assert cal.result.inflow_m3_s == pytest.approx(5e-3 / 60, rel=1e-12)
    heart = cal.result.pressure_pa[net.nodes.index["heart"]]
    assert heart == pytest.approx(93.3 * MMHG_PA, rel=1e-9)
    total_wu = dense_input_resistance(cal.result) / WU
    assert total_wu == pytest.approx(18.06, rel=1e-6)
    assert total_wu * WU / 1e5 == pytest.approx(1445, abs=0.5)       # dyn*s/cm^5
    assert 9 <= total_wu <= 20


def test_parallel_beds_get_the_derived_textbook_resistances():
    """Eleven beds in parallel on short wide vessels (1.4e4 Pa*s/m^3 each, below 3e-5 of any
    bed), Guyton & Hall's shares, 93.3 mmHg in and 3 mmHg out at 5 L/min: each bed's
    resistance is dP/Q_bed, as REFERENCES 8.3 derives it [C]: brain 129.0, heart 451.5,
    kidneys 82.09, liver 66.89, muscle 120.4, skin 301.0 WU (4 digits), and together they
    are 18.06 WU."""
    table = {"brain": 14, "heart": 4, "bronchi": 2, "kidneys": 22, "liver": 27, "muscle": 15,
             "bone": 5, "skin": 6, "thyroid": 1, "adrenals": 0.5, "other": 3.5}
    vessels = [{"id": f"to_{k}", "from": "aorta", "to": k, "length_m": 1e-3, "radius_m": 0.005} for k in table]
    beds = [{"id": k, "node": k, "resistance_pa_s_m3": 1e9, "share": s / 100, "outflow_pressure_pa": 3 * MMHG_PA}
            for k, s in table.items()]
    net = Network.build(nodes={"aorta": {"inflow_m3_s": 5e-3 / 60, "target_pressure_pa": 93.3 * MMHG_PA}},
                        vessels=vessels, beds=beds)
    r_wu = dict(zip(net.beds.ids, calibrate(net).resistance_pa_s_m3 / WU))
    expected = {"brain": 129.0, "heart": 451.5, "kidneys": 82.09, "liver": 66.89, "muscle": 120.4,
                "skin": 301.0}
    for bed, value in expected.items():
        assert r_wu[bed] == pytest.approx(value, rel=5e-4), bed
    assert 1 / sum(1 / r for r in r_wu.values()) == pytest.approx(18.06, rel=1e-4)


# --- the calibrated file -------------------------------------------------------------------

def test_calibrated_file_keeps_the_text_and_reproduces_the_targets(tmp_path, capsys):
    """Only the bed resistances change; reading the written file back meets the targets."""
    out = tmp_path / "calibrated.yaml"
    assert main(["calibrate", str(demo_path("whole_body")), "--targets",
                 str(demo_path("whole_body_resting_targets")), "-o", str(out)]) == 0
    report = capsys.readouterr().out
    assert "33 of 34 bed resistances calibrated" in report and "wrote" in report
    original = demo_path("whole_body").read_text().splitlines()
    written = out.read_text().splitlines()
    assert written[0].startswith("# Calibrated by vesselnet calibrate")
    changed = [(a, b) for a, b in zip(original, written[1:]) if a != b]
    assert len(written) == len(original) + 1 and len(changed) == 33
    assert all(re.sub(r'resistance: [^,}]+', "", a) == re.sub(r'resistance: [^,}]+', "", b) for a, b in changed)
    targets = load_targets(demo_path("whole_body_resting_targets"), load_network(out)).network
    result = solve(targets)
    has = ~np.isnan(targets.beds.share)
    np.testing.assert_allclose(result.bed_share[has], targets.beds.share[has], atol=1e-9)
    assert result.pressure_pa[targets.nodes.index["heart"]] == pytest.approx(93.3 * MMHG_PA, rel=1e-9)


def test_windkessel_proximal_part_keeps_its_fraction(tmp_path):
    text = """vesselnet: 1
nodes: {root: {inflow: 100 mL/min, target_pressure: 90 mmHg}}
vessels:
  - {id: trunk, from: root, to: fork, length: 10, radius: 3}
  - {id: left, from: fork, to: l, length: 10, radius: 2}
  - {id: right, from: fork, to: r, length: 10, radius: 2}
beds:
  - id: a         # block style, with a comment
    node: l
    resistance: 40
    share: 30%
    windkessel: {proximal: 4, compliance: 0.01}
  - {id: b, node: r, resistance: "40 mmHg*s/mL", share: 0.7}
"""
    source = tmp_path / "net.yaml"
    source.write_text(text)
    out = tmp_path / "sub" / "out.yaml"
    out.parent.mkdir()
    assert main(["calibrate", str(source), "-o", str(out), "--json"]) == 0
    before, after = load_network(source), load_network(out)
    ratio = after.beds.windkessel_proximal_pa_s_m3[0] / after.beds.resistance_pa_s_m3[0]
    assert ratio == pytest.approx(before.beds.windkessel_proximal_pa_s_m3[0] / before.beds.resistance_pa_s_m3[0],
                                  rel=1e-10)
    assert "# block style, with a comment" in out.read_text()
    np.testing.assert_allclose(solve(after).bed_share, [0.3, 0.7], atol=1e-9)


def test_beds_from_a_table_are_written_to_a_new_table(tmp_path):
    (tmp_path / "beds.csv").write_text("id,node,resistance[mmHg*s/mL],share\na,l,40,0.25\nb,r,40,0.75\n")
    (tmp_path / "net.yaml").write_text("""vesselnet: 1
nodes: {root: {inflow: 100, target_pressure: 90}}
vessels:
  - {id: trunk, from: root, to: fork, length: 10, radius: 3}
  - {id: left, from: fork, to: l, length: 10, radius: 2}
  - {id: right, from: fork, to: r, length: 10, radius: 2}
beds_table: beds.csv
""")
    out = tmp_path / "out" / "calibrated.yaml"
    out.parent.mkdir()
    assert main(["calibrate", str(tmp_path / "net.yaml"), "-o", str(out)]) == 0
    assert (out.parent / "calibrated_beds.csv").is_file()
    after = load_network(out)
    np.testing.assert_allclose(solve(after).bed_share, [0.25, 0.75], atol=1e-9)
    np.testing.assert_allclose(after.beds.share, [0.25, 0.75])


def test_inconsistent_file_gives_exit_2_and_one_paragraph(tmp_path, capsys):
    source = tmp_path / "bad.yaml"
    source.write_text("""vesselnet: 1
nodes: {root: {inflow: 100, target_pressure: 90}}
vessels:
  - {id: trunk, from: root, to: l, length: 10, radius: 3}
  - {id: other, from: root, to: r, length: 10, radius: 3}
beds:
  - {id: a, node: l, resistance: 40, share: 0.5}
  - {id: b, node: r, resistance: 40, share: 0.6}
""")
    assert main(["calibrate", str(source), "-o", str(tmp_path / "out.yaml")]) == 2
    err = capsys.readouterr().err
    assert "do not balance" in err and "1.1 leaves but 1 enters" in err and "Traceback" not in err
    assert not (tmp_path / "out.yaml").exists()


def test_read_network_text_shares_feed_calibration():
    """Shares and target pressures written in a network file (SPEC section 2) are the targets."""
    net = read_network_text("""vesselnet: 1
nodes: {root: {inflow: 50 mL/min, target_pressure: 80}}
vessels:
  - {id: a, from: root, to: t, length: 10, radius: 2}
  - {id: b, from: root, to: u, length: 10, radius: 2}
beds:
  - {id: x, node: t, resistance: 40, share: 20%}
  - {id: y, node: u, resistance: 40, share: 80%}
""", "t.yaml")
    cal = calibrate(net)
    np.testing.assert_allclose(cal.result.bed_share, [0.2, 0.8], atol=1e-12)
