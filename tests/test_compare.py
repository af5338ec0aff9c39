"""``vesselnet compare``: the demo scenarios, SPEC section 6 JSON, outputs and exit codes.

What the demos must show is stated in their files (collateral.yaml: occluding the
left proximal feeder reverses the left side branch and steals from the posterior
brain bed) and, for the sweep, the critical-stenosis shape of Gould et al. (1974;
REFERENCES 4.3, qualitative): fixed beds lose flow from moderate narrowing on,
autoregulating beds hold until the narrowing is severe.  Differences are checked
against the baseline and scenario flows written in the same document
(flow_change = flow - baseline flow, by definition).
"""

import csv
import json

import numpy as np
import pytest

from vesselnet.autoregulation import bed_states
from vesselnet.caution import CAUTION
from vesselnet.cli import main
from vesselnet.compare import compare_file, compare_networks, comparison_json
from vesselnet import changes
from vesselnet.demos import demo_names, demo_path
from vesselnet.lesions import lesion_table
from vesselnet.model import Network
from vesselnet.solve import solve
from vesselnet.testing import assert_invariants

MMHG = 133.322387415


@pytest.fixture(scope="module")
def steal():
    return compare_file(demo_path("collateral_steal"))


@pytest.fixture(scope="module")
def sweep():
    return compare_file(demo_path("leg_femoral_sweep"))


def test_scenario_demos_are_bundled_but_not_listed_as_networks():
    assert {"collateral_steal", "leg_femoral_sweep"} <= set(demo_names("scenario"))
    assert not {"collateral_steal", "leg_femoral_sweep"} & set(demo_names())


def test_proximal_occlusion_reverses_the_side_branch_and_steals(steal):
    """collateral.yaml: occluding left_feeder_proximal reverses left_side_branch; the left limb
    is then fed from the confluence, at the expense of the posterior brain bed."""
    occluded = steal.scenarios[0]
    assert occluded.reversed == ("left_side_branch",)
    beds = occluded.result.network.beds.index
    assert occluded.bed_flow_change_m3_s[beds["brain_posterior"]] < 0
    assert occluded.result.bed_flow_m3_s[beds["left_limb"]] > 0
    row = occluded.result.network.vessels.index["left_feeder_proximal"]
    assert occluded.result.vessel_flow_m3_s[row] == 0.0
    for outcome in steal.scenarios:
        assert_invariants(outcome.result)


def test_exercise_deepens_the_steal_and_autoregulation_holds(steal):
    """A dilated limb bed takes more from the confluence; an autoregulating posterior bed holds
    its baseline flow (its target) and reports 'holding'."""
    occluded, exercise, auto, bypass = steal.scenarios[0], steal.scenarios[2], steal.scenarios[3], steal.scenarios[4]
    k = occluded.result.network.beds.index["brain_posterior"]
    assert exercise.bed_flow_change_m3_s[k] < occluded.bed_flow_change_m3_s[k] < 0
    assert auto.result.bed_flow_m3_s[k] == pytest.approx(steal.baseline.bed_flow_m3_s[k], rel=1e-9)
    assert bed_states(auto.result)[k] == "holding"
    graft = bypass.result.network.vessels.index["bypass"]
    assert bypass.result.vessel_flow_m3_s[graft] > 0
    assert "left_side_branch" not in bypass.reversed


def test_compare_json_follows_spec_section_6(steal):
    """The keys SPEC section 6 promises, plus the caution; flow_change = flow - baseline flow."""
    doc = json.loads(json.dumps(comparison_json(steal)))
    assert doc["vesselnet"] == 1 and doc["caution"] == CAUTION and doc["units"]["flow"] == "mL/min"
    assert {"nodes", "vessels", "beds", "checks"} <= set(doc["baseline"])
    base = {b["id"]: b["flow"] for b in doc["baseline"]["beds"]}
    for scenario in doc["scenarios"]:
        assert {"name", "nodes", "vessels", "checks", "beds", "lesions", "reversed"} <= set(scenario)
        for bed in scenario["beds"]:
            assert {"id", "flow", "share", "pressure", "flow_change", "flow_change_percent", "state"} <= set(bed)
            assert bed["flow_change"] == pytest.approx(bed["flow"] - base[bed["id"]], abs=1e-6)
            assert bed["flow_change_percent"] == pytest.approx(100 * bed["flow_change"] / base[bed["id"]], rel=1e-6)
        for lesion in scenario["lesions"]:
            assert {"vessel", "pressure_drop", "pressure_ratio"} <= set(lesion)
            assert 0 < lesion["pressure_ratio"] <= 1 and lesion["pressure_drop"] > 0
        assert scenario["checks"]["mass_balance"] < 1e-9
    assert doc["scenarios"][0]["reversed"] == ["left_side_branch"]
    pieces = [v for v in doc["scenarios"][4]["vessels"] if v["id"].startswith("left_feeder_distal.")]
    assert [v["origin"] for v in pieces] == ["left_feeder_distal", "left_feeder_distal"]


def test_sweep_shows_the_critical_stenosis_shape(sweep):
    """Foot flow against severity: with fixed beds it falls steadily (more than 10 % by 70 %);
    with autoregulating beds it holds to 85 % and falls beyond (Gould et al. 1974, qualitative)."""
    k = sweep.baseline.network.beds.index["foot"]
    fixed = [s for s in sweep.scenarios if "autoregulating" not in s.name]
    auto = [s for s in sweep.scenarios if "autoregulating" in s.name]
    severity = [float(s.name.split()[1]) for s in fixed]
    assert severity == [0, 20, 40, 50, 60, 70, 75, 80, 85, 90, 95] == [float(s.name.split()[1]) for s in auto]
    fixed_flow = np.array([s.result.bed_flow_m3_s[k] for s in fixed])
    auto_flow = np.array([s.result.bed_flow_m3_s[k] for s in auto])
    base = sweep.baseline.bed_flow_m3_s[k]
    assert np.all(np.diff(fixed_flow) < 0) and fixed_flow[severity.index(70)] < 0.9 * base
    assert np.all(auto_flow[: severity.index(85) + 1] == pytest.approx(base, rel=1e-9))
    assert auto_flow[-1] < 0.95 * base and np.all(auto_flow >= fixed_flow * (1 - 1e-12))
    ratios = [float(lesion_table(s.result)["pressure_ratio"][0]) for s in fixed]
    assert np.all(np.diff(ratios) < 0) and ratios[0] > 0.99


def test_terminal_report_carries_the_caution(capsys):
    assert main(["compare", str(demo_path("collateral_steal"))]) == 0
    out = capsys.readouterr().out
    assert CAUTION in out and "Scenarios at a glance" in out and "== left feeder occluded" in out
    assert "flow reversed against the baseline in: left_side_branch" in out


def test_json_option_prints_only_json(capsys):
    assert main(["compare", "collateral_steal", "--json"]) == 0   # a bundled file by name
    out = capsys.readouterr().out
    doc = json.loads(out)
    assert doc["scenario_file"] == "Collateral steal, invented demo"


def test_output_folder_holds_json_and_tables(tmp_path, steal, capsys):
    assert main(["compare", str(demo_path("collateral_steal")), "-o", str(tmp_path / "out"), "--summary"]) == 0
    files = {p.name for p in (tmp_path / "out").iterdir()}
    assert files == {"compare.json", "beds.csv", "lesions.csv"}
    with open(tmp_path / "out" / "beds.csv") as handle:
        rows = list(csv.DictReader(handle))
    assert len(rows) == 5 * 5 and "flow_change[mL/min]" in rows[0] and rows[0]["scenario"] == "left feeder occluded"
    assert float(rows[0]["flow[mL/min]"]) == pytest.approx(steal.scenarios[0].result.bed_flow_m3_s[0] * 6e7, rel=1e-9)
    doc = json.loads((tmp_path / "out" / "compare.json").read_text())
    assert len(doc["scenarios"]) == 5
    assert "== left feeder occluded" not in capsys.readouterr().out


def test_no_convergence_exits_1_naming_the_scenario(capsys):
    assert main(["compare", str(demo_path("leg_femoral_sweep")), "--max-iterations", "1"]) == 1
    err = capsys.readouterr().err
    assert "numerical failure: scenario 'SFA 20 %'" in err and "did not converge" in err


def test_cut_off_part_is_reported_in_the_comparison(tmp_path, capsys):
    """An occlusion that cuts a dead end off from every pressure reference: exit 0, the
    warning is printed with the scenario."""
    (tmp_path / "n.yaml").write_text(
        "vesselnet: 1\nnodes: {root: {pressure: 100}}\nvessels:\n"
        "  - {id: a, from: root, to: j, length: 10, radius: 2}\n"
        "  - {id: stub, from: j, to: end, length: 5, radius: 1}\n"
        "beds:\n  - {id: organ, node: j, resistance: 20}\n")
    (tmp_path / "s.yaml").write_text("vesselnet: 1\nnetwork: n.yaml\nscenarios:\n"
                                     "  - {name: stub closed, changes: [{occlude: {vessel: stub}}]}\n")
    assert main(["compare", str(tmp_path / "s.yaml")]) == 0
    assert "warning: 1 nodes are cut off" in capsys.readouterr().out


def test_compare_networks_resolves_autoregulation_targets_from_the_baseline():
    """Code API: a bed that autoregulates without a target holds its baseline flow when a
    moderate lesion appears upstream; a fixed bed loses flow."""
    net = Network.build(nodes={"root": {"pressure_pa": 100 * MMHG}},
                        vessels=[{"id": "a", "from": "root", "to": "j", "length_m": 0.2, "radius_m": 3e-3},
                                 {"id": "b", "from": "j", "to": "x", "length_m": 0.1, "radius_m": 2e-3},
                                 {"id": "c", "from": "j", "to": "y", "length_m": 0.1, "radius_m": 2e-3}],
                        beds=[{"id": "auto", "node": "x", "resistance_pa_s_m3": 40 * MMHG / 1e-6,
                               "min_resistance_pa_s_m3": 10 * MMHG / 1e-6},
                              {"id": "fixed", "node": "y", "resistance_pa_s_m3": 40 * MMHG / 1e-6}])
    narrowed = changes.narrow(net, vessel="a", reduction=0.8, length_m=0.02)
    comparison = compare_networks(net, [("lesion", narrowed)])
    outcome = comparison.scenarios[0]
    assert outcome.result.bed_flow_m3_s[0] == pytest.approx(comparison.baseline.bed_flow_m3_s[0], rel=1e-9)
    assert outcome.bed_flow_change_percent[1] < -1
    assert bed_states(outcome.result).tolist() == ["holding", "fixed"]
    assert solve(net).bed_flow_m3_s[0] == pytest.approx(comparison.baseline.bed_flow_m3_s[0])
