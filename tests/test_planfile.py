"""Plan files: what they read into, conduit presets, and located errors for bad plans.

Conduit moduli are checked against the effective moduli REFERENCES 8.6 lists ([C] from the
diametric compliances of Tai et al. 2000 [V] and the canine bypass study [V values; its authors
from memory, M], E = (R/h) / C_d at R/h = 5).  Error cases are checked for their message and
location (file:line), following STYLE's one wording.
"""

import pytest
from graft_cases import SERIES, plan_from

from vesselnet.changes import Join
from vesselnet.conduits import CONDUITS, RADIUS_OVER_THICKNESS
from vesselnet.demos import demo_names, demo_path
from vesselnet.errors import NetworkSpecError
from vesselnet.filekind import file_kind_of
from vesselnet.grafts import rank_plan
from vesselnet.planfile import DEFAULT_SAMPLES, GRAFT_TAG, check_plan_file, load_plan

GOOD = """condition: [{narrow: {vessel: d, reduction: 70%, length: 2}}]
targets: [organ]
candidates:
  - {id: g, from: root, to: k, length: 40, radius: 2, conduit: vein-autologous}
"""


@pytest.mark.parametrize("preset, modulus_mpa, digits", [
    ("artery-autologous", 0.83, 2), ("vein-autologous", 2.5, 1), ("polyester-tube", 3.7, 1),
    ("ptfe-tube", 5.6, 1)])
def test_conduit_moduli_are_those_of_references_8_6(preset, modulus_mpa, digits):
    """REFERENCES 8.6 [C]: artery 8.0 -> 0.83 MPa, vein 2.67 -> 2.5, polyester 1.8 -> 3.7,
    ePTFE 1.2 -> 5.6 (compliance in % per mmHg x 10^-2, R/h = 5)."""
    assert round(CONDUITS[preset].modulus_pa / 1e6, digits) == modulus_mpa
    assert CONDUITS[preset].source


def test_a_conduit_fills_the_wall_unless_the_candidate_gives_it(tmp_path):
    """The preset's wall: thickness r / 5 (the R/h of REFERENCES 8.6) and its modulus; a wall
    key written in the candidate wins."""
    body = GOOD + "  - {id: h, from: root, to: k, length: 40, radius: 2, conduit: ptfe-tube, wall: {modulus: 9 MPa}}\n"
    plan = plan_from(tmp_path, SERIES, body)
    vein, tube = (c.vessel for c in plan.candidates)
    assert vein["wall_thickness_m"] == pytest.approx(2e-3 / RADIUS_OVER_THICKNESS)
    assert vein["wall_modulus_pa"] == pytest.approx(CONDUITS["vein-autologous"].modulus_pa)
    assert tube["wall_modulus_pa"] == pytest.approx(9e6) and tube["wall_thickness_m"] == pytest.approx(4e-4)
    assert GRAFT_TAG in vein["tags"] and plan.candidates[0].conduit_kind == "vein"


def test_a_plan_reads_into_si_with_defaults(tmp_path):
    plan = plan_from(tmp_path, SERIES, GOOD)
    [c] = plan.candidates
    assert c.length_m == pytest.approx(0.40) and c.vessel["radius_in_m"] == pytest.approx(2e-3)
    assert plan.targets == ("organ",) and plan.territory == "" and plan.samples == DEFAULT_SAMPLES
    assert plan.condition[0].verb == "narrow"


def test_part_way_ends_are_joins(tmp_path):
    body = GOOD.replace("from: root, to: k", "from: {vessel: p, at: 0.3}, to: {vessel: d, at: 0.2}")
    [c] = plan_from(tmp_path, SERIES, body).candidates
    assert c.vessel["from"] == Join("p", 0.3) and c.vessel["to"] == Join("d", 0.2)


def test_the_demo_plan_is_bundled_as_a_plan(tmp_path):
    assert "leg_graft_plan" in demo_names("plan")
    assert "leg_graft_plan" not in demo_names()
    assert file_kind_of(demo_path("leg_graft_plan")) == "plan"
    assert "valid plan file" in check_plan_file(demo_path("leg_graft_plan"))


BAD = [
    ("unknown bed", GOOD.replace("targets: [organ]", "targets: [organs]"),
     r"plan.yaml:4:\d+ targets: unknown bed 'organs'; did you mean 'organ'"),
    ("no id", GOOD.replace("id: g, ", ""), r"plan.yaml:6:\d+ candidates\[0\]: missing key 'id'"),
    ("length and routing", GOOD.replace("length: 40", "length: 40, routing_factor: 1.2"),
     r"candidates\[0\] 'g': give exactly one of 'length' and 'routing_factor'"),
    ("neither", GOOD.replace("length: 40, ", ""),
     r"candidates\[0\] 'g': missing key 'length'; add 'length:' or 'routing_factor:'"),
    ("short route", GOOD.replace("length: 40", "routing_factor: 0.8"), r"routing_factor must be >= 1"),
    ("unknown conduit", GOOD.replace("vein-autologous", "vein-autologus"),
     r"unknown conduit 'vein-autologus'; did you mean 'vein-autologous'"),
    ("duplicate ids", GOOD + "  - {id: g, from: root, to: j, length: 40, radius: 2}\n",
     r"plan.yaml:7:\d+ candidates\[1\] 'g': duplicate candidate id"),
    ("clashing id", GOOD.replace("id: g,", "id: p,"), r"candidates\[0\] 'p'.*a vessel 'p' already exists"),
    ("unknown vessel", GOOD.replace("from: root", "from: {vessel: q, at: 0.5}"),
     r"plan.yaml:6:\d+ candidates\[0\] 'g'.*unknown vessel 'q'"),
    ("join in a lesion", GOOD.replace("from: root", "from: {vessel: d, at: 0.5}"), r"inside its lesion"),
    ("empty condition", GOOD.replace("condition: [{narrow: {vessel: d, reduction: 70%, length: 2}}]",
                                     "condition: []"), r"the condition lists no changes"),
    ("bad condition", GOOD.replace("vessel: d,", "vessel: e,"), r"plan.yaml:3:\d+ condition\[0\] narrow.*unknown vessel 'e'"),
    ("territory", "territory: coronery\n" + GOOD, r"unknown territory 'coronery'; did you mean 'coronary'"),
    ("unknown key", "targest: [organ]\n" + GOOD, r"unknown key 'targest'"),
    ("samples", GOOD + "robustness: {samples: -3}\n", r"samples must be >= 0"),
    ("no candidates", GOOD.split("candidates:")[0] + "candidates: []\n", r"the plan lists no candidates"),
]


@pytest.mark.parametrize("name, body, match", BAD, ids=[b[0] for b in BAD])
def test_bad_plans_are_reported_at_their_lines(tmp_path, name, body, match):
    with pytest.raises(NetworkSpecError, match=match):
        plan_from(tmp_path, SERIES, body)


def test_routing_needs_positions(tmp_path):
    network = SERIES.replace(", position: [0, 0, 0]", "")
    with pytest.raises(NetworkSpecError, match=r"routing_factor needs node positions, and 'root' has none"):
        plan_from(tmp_path, network, GOOD.replace("length: 40", "routing_factor: 1.1"))


def test_a_condition_that_costs_no_target_flow_is_refused(tmp_path):
    """Nothing lost, nothing to restore: the score (a fraction of the lost flow) is undefined."""
    body = GOOD.replace("narrow: {vessel: d, reduction: 70%, length: 2}", "scale_bed: {bed: organ, factor: 0.5}")
    plan = plan_from(tmp_path, SERIES, body)
    with pytest.raises(NetworkSpecError, match=r"plan.yaml:3:\d+ condition: the condition lowers the target"):
        rank_plan(plan, samples=0)
