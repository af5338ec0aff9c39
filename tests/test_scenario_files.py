"""Scenario files (SPEC section 3): reading, units, paths, and located errors.

The rules checked are those of SPEC sections 1 and 3 (units of every quantity,
one verb per change, paths relative to the scenario file, unknown ids named
with a near-miss suggestion); each bad file gives exit status 2 from the
command line.
"""

import math

import pytest

from vesselnet.cli import main
from vesselnet.errors import NetworkSpecError
from vesselnet.scenarios import load_scenarios, read_scenarios_text

MMHG = 133.322387415
NETWORK = """vesselnet: 1
units: {length: cm}
nodes:
  root: {pressure: 100}
vessels:
  - {id: trunk, from: root, to: split, length: 10, radius: 3, tags: [main]}
  - {id: left, from: split, to: l_end, length: 20, radius: 2, tags: [skin]}
  - {id: right, from: split, to: r_end, length: 20, radius: 2}
beds:
  - {id: kidney, node: l_end, resistance: 40}
  - {id: gut, node: r_end, resistance: 30}
"""
HEAD = "vesselnet: 1\nnetwork: net/two.yaml\nscenarios:\n"


@pytest.fixture()
def folder(tmp_path):
    (tmp_path / "net").mkdir()
    (tmp_path / "net" / "two.yaml").write_text(NETWORK)
    return tmp_path


def write(folder, body, head=HEAD):
    path = folder / "scenarios.yaml"
    path.write_text(head + body)
    return path


def test_every_verb_reads_in_si_with_the_file_units(folder):
    """Numbers take the scenario file's own units (SPEC section 1 defaults otherwise)."""
    path = write(folder, """  - name: all verbs
    changes:
      - narrow: {vessel: left, reduction: 70%, length: 15 mm, at: 0.3}
      - scale_radius: {tag: skin, factor: 0.8}
      - scale_bed: {bed: gut, factor: 2}
      - set_boundary: {node: root, pressure: 12 kPa}
      - autoregulate: {beds: [kidney], min_resistance: 10, target_flow: 1 L/min}
      - add_vessel: {id: g, from: {vessel: trunk, at: 0.5}, to: r_end, length: 25, diameter: 3}
      - occlude: {vessels: [right]}
      - remove_vessel: {vessel: g}
""", head="vesselnet: 1\nnetwork: net/two.yaml\nunits: {length: mm}\nscenarios:\n")
    scenarios = load_scenarios(path)
    args = [c.arguments for c in scenarios.scenarios[0].changes]
    assert args[0] == {"vessel": "left", "reduction": pytest.approx(0.7), "length_m": pytest.approx(0.015),
                       "at": 0.3}
    assert args[3]["pressure_pa"] == 12000.0
    assert args[4]["min_resistance_pa_s_m3"] == pytest.approx(10 * MMHG / 1e-6)
    assert args[4]["target_flow_m3_s"] == pytest.approx(1e-3 / 60)
    graft = args[5]["vessel"]
    assert graft["length_m"] == pytest.approx(0.025) and graft["radius_in_m"] == pytest.approx(1.5e-3)
    [network] = scenarios.networks()
    assert network.vessels.ids == ("trunk.1", "trunk.2", "left", "right")
    assert network.vessels.occluded.tolist() == [False, False, False, True]
    assert network.nodes.pressure_pa[0] == 12000.0 and math.isnan(scenarios.network.vessels.stenosis_reduction[1])


BAD = {
    "unknown vessel": ("  - {name: a, changes: [{occlude: {vessel: lfet}}]}\n",
                       r"scenarios.yaml:4:\d+ scenarios\[0\] 'a' changes\[0\] occlude: unknown vessel 'lfet'; "
                       r"did you mean 'left'"),
    "unknown verb": ("  - {name: a, changes: [{ocldue: {vessel: left}}]}\n", r"unknown change 'ocldue'; did you mean 'occlude'"),
    "two verbs": ("  - {name: a, changes: [{occlude: {vessel: left}, narrow: {vessel: left}}]}\n",
                  r"exactly one verb"),
    "unknown key": ("  - {name: a, changes: [{scale_radius: {vessel: left, factr: 2}}]}\n",
                    r"unknown key 'factr'; did you mean 'factor'"),
    "missing factor": ("  - {name: a, changes: [{scale_radius: {vessel: left}}]}\n", r"missing key 'factor'"),
    "wrong unit": ("  - {name: a, changes: [{narrow: {vessel: left, reduction: 0.5, length: 2 mmHg}}]}\n",
                   r"length: 'mmHg' is a unit of pressure"),
    "percent as number": ("  - {name: a, changes: [{narrow: {vessel: left, reduction: 70, length: 2}}]}\n",
                          r"reduction must be at least 0 and below 1, got 70; write 70% or 0.7"),
    "join out of range": ("  - {name: a, changes: [{add_vessel: {id: g, from: {vessel: left, at: 1.5}, to: root, "
                          "length: 5, radius: 1}}]}\n", r"add_vessel from: at must be between 0 and 1"),
    "graft without radius": ("  - {name: a, changes: [{add_vessel: {id: g, from: root, to: l_end, length: 5}}]}\n",
                             r"add_vessel 'g': missing key 'radius'"),
    "unknown bed": ("  - {name: a, changes: [{scale_bed: {bed: kidnee, factor: 2}}]}\n",
                    r"unknown bed 'kidnee'; did you mean 'kidney'"),
    "duplicate name": ("  - {name: a, changes: []}\n  - {name: a, changes: []}\n", r"duplicate scenario name"),
    "unknown scenario key": ("  - {name: a, chnages: []}\n", r"unknown key 'chnages'; did you mean 'changes'"),
    "no scenarios": ("  []\n", r"lists no scenarios"),
}


@pytest.mark.parametrize("case", BAD)
def test_bad_scenario_files_are_located_errors(folder, case, capsys):
    """Each bad scenario file raises NetworkSpecError at its line; the CLI exits 2 with it."""
    body, message = BAD[case]
    path = write(folder, body)
    with pytest.raises(NetworkSpecError, match=message):
        load_scenarios(path).networks()
    assert main(["compare", str(path)]) == 2
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert "invalid input" in err and "Traceback" not in err


def test_all_problems_are_reported_together(folder):
    """Syntax problems and unknown ids of other scenarios come in one report, in line order."""
    path = write(folder, "  - {name: a, changes: [{occlude: {vessel: lfet}}]}\n"
                         "  - {name: b, changes: [{narow: {vessel: left}}]}\n"
                         "  - {name: c, changes: [{scale_bed: {bed: gt, factor: 2}}]}\n")
    with pytest.raises(NetworkSpecError) as caught:
        load_scenarios(path)
    lines = [p.line for p in caught.value.problems]
    assert lines == [4, 5, 6]


def test_network_path_is_relative_to_the_scenario_file(folder, monkeypatch, tmp_path_factory):
    """SPEC section 3: the network path is relative to the scenario file, not to the working folder."""
    path = write(folder, "  - {name: a, changes: []}\n")
    monkeypatch.chdir(tmp_path_factory.mktemp("elsewhere"))
    assert load_scenarios(path).network.vessels.ids == ("trunk", "left", "right")


def test_missing_network_file(folder):
    path = write(folder, "  - {name: a, changes: []}\n", head="vesselnet: 1\nnetwork: nowhere.yaml\nscenarios:\n")
    with pytest.raises(NetworkSpecError, match=r"scenarios.yaml:2:\d+ network: network file 'nowhere.yaml' not found"):
        load_scenarios(path)


def test_text_reader_and_check_command(folder, capsys):
    """read_scenarios_text takes the folder of relative paths; `check` recognises scenario files."""
    scenarios = read_scenarios_text(HEAD + "  - {name: a, changes: [{occlude: {vessel: left}}]}\n",
                                    "inline.yaml", base_dir=folder)
    assert scenarios.scenarios[0].changes[0].verb == "occlude"
    path = write(folder, "  - {name: cold, changes: [{scale_radius: {tag: skin, factor: 0.8}}]}\n")
    assert main(["check", str(path)]) == 0
    assert "valid scenario file" in capsys.readouterr().out
