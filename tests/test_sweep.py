"""Sweep files: grids of one or two change arguments and lists of cases, against closed forms.

Reference: the two-branch closed form (derived below); numpy's linspace and geomspace for
the value ranges.
"""

import json

import numpy as np
import pytest

from vesselnet.cli import main
from vesselnet.demos import demo_path
from vesselnet.errors import NetworkSpecError
from vesselnet.sweep import load_sweep, read_sweep_text, run_sweep

MU = 3.5e-3
MMHG = 133.322387415
TWO_BRANCH = """vesselnet: 1
name: two branches
nodes: {root: {pressure: 100 mmHg}}
vessels:
  - {id: trunk, from: root, to: fork, length: 10, radius: 3}
  - {id: left, from: fork, to: t, length: 10, radius: 1}
  - {id: right, from: fork, to: u, length: 10, radius: 1}
beds:
  - {id: x, node: t, resistance: 10}
  - {id: y, node: u, resistance: 30}
"""
R_V = 8 * MU * 0.1 / (np.pi * 0.001**4)          # each branch, Pa*s/m^3
R_X, R_Y = 10 * MMHG * 1e6, 30 * MMHG * 1e6


def share_x(f_x=1.0, f_y=1.0):
    """Derivation: from the fork the two branches (vessel plus bed) are in parallel, so bed x
    takes G_x / (G_x + G_y) of the flow, G_i = 1 / (R_v + f_i R_i), whatever the trunk."""
    g_x, g_y = 1 / (R_V + f_x * R_X), 1 / (R_V + f_y * R_Y)
    return g_x / (g_x + g_y)


@pytest.fixture
def folder(tmp_path):
    (tmp_path / "two.yaml").write_text(TWO_BRANCH)
    return tmp_path


def sweep(folder, body: str):
    return read_sweep_text("vesselnet: 1\nnetwork: two.yaml\n" + body, str(folder / "s.yaml"), folder)


def test_one_parameter_over_a_log_range(folder):
    spec = sweep(folder, """parameters:
  - change: {scale_bed: {bed: x}}
    vary: factor
    values: {from: 0.25, to: 4, steps: 5, scale: log}
""")
    np.testing.assert_allclose(spec.parameters[0].values, np.geomspace(0.25, 4, 5), rtol=1e-15)
    result = run_sweep(spec)
    expected = [share_x(f) for f in np.geomspace(0.25, 4, 5)]
    np.testing.assert_allclose(result.bed_share[:, 0], expected, rtol=1e-10)
    np.testing.assert_allclose(result.bed_share.sum(axis=1), 1.0, rtol=1e-12)


def test_two_parameters_make_a_grid_first_slowest(folder):
    spec = sweep(folder, """parameters:
  - {name: x tone, change: {scale_bed: {bed: x}}, vary: factor, values: [0.5, 1, 2]}
  - {name: y tone, change: {scale_bed: {bed: y}}, vary: factor, values: [1, 3]}
""")
    assert spec.grid.tolist() == [[0.5, 1], [0.5, 3], [1, 1], [1, 3], [2, 1], [2, 3]]
    assert spec.case_names[1] == "x tone 0.5, y tone 3"
    result = run_sweep(spec)
    np.testing.assert_allclose(result.bed_share[:, 0], [share_x(a, b) for a, b in spec.grid], rtol=1e-10)
    table = result.table()
    assert list(table) == ["case", "x tone", "y tone", "share:x", "share:y", "inflow_m3_s"]


def test_fraction_arguments_read_in_percent(folder):
    spec = sweep(folder, """parameters:
  - change: {narrow: {vessel: left, length: 2}}
    vary: reduction
    values: {from: 0%, to: 80%, steps: 5}
""")
    np.testing.assert_allclose(spec.parameters[0].values, np.linspace(0, 0.8, 5), rtol=1e-15)
    assert spec.parameters[0].display() == ("%", 100.0)
    shares = run_sweep(spec).bed_share[:, 0]
    # at 0 % the Young-Tsai lesion is nearly, not exactly, the healthy tube: its viscous
    # length is La = 0.83 Ls + 1.64 Ds, not Ls (Young & Tsai 1973; REFERENCES 4.1)
    assert shares[0] == pytest.approx(share_x(), rel=1e-3)
    assert (np.diff(shares) < 0).all()                               # narrowing takes flow away


def test_cases_with_common_changes(folder):
    """Occluding the left branch sends every flow to y; the common change (doubling y's
    resistance) applies to every case."""
    spec = sweep(folder, """changes:
  - scale_bed: {bed: y, factor: 2}
cases:
  - {name: baseline, changes: []}
  - {name: left shut, changes: [{occlude: {vessel: left}}]}
""")
    result = run_sweep(spec)
    assert result.bed_share[0, 0] == pytest.approx(share_x(1.0, 2.0), rel=1e-10)
    assert result.bed_share[1].tolist() == pytest.approx([0.0, 1.0], abs=1e-12)
    assert spec.case_names == ("baseline", "left shut") and not spec.parameters


BAD = [
    ("parameters: []\ncases: []\n", r"either 'parameters' \(one or two\) or 'cases'"),
    ("parameters:\n" + "  - {change: {scale_bed: {bed: x}}, vary: factor, values: [1]}\n" * 3,
     r"one or two parameters, got 3"),
    ("parameters:\n  - {change: {scale_bed: {bed: x}}, vary: factr, values: [1]}\n",
     r"'factr' is not a number argument of 'scale_bed'; did you mean 'factor'"),
    ("parameters:\n  - {change: {widen: {vessel: left}}, vary: factor, values: [1]}\n", r"unknown change 'widen'"),
    ("parameters:\n  - {change: {scale_bed: {bed: x}}, vary: factor, values: []}\n", r"'values' is empty"),
    ("parameters:\n  - {change: {scale_bed: {bed: x}}, vary: factor, values: {from: 0, to: 2, steps: 3, scale: log}}\n",
     r"must be > 0|log scale needs positive"),
    ("parameters:\n  - {change: {narrow: {vessel: left, length: 2}}, vary: reduction, values: [0.5, 120%]}\n",
     r"values\[1\].*must be at least 0 and below 1"),
    ("parameters:\n  - {change: {scale_bed: {bed: z}}, vary: factor, values: [1, 2]}\n", r"'z'"),
    ("report: [x, w]\ncases:\n  - {name: a, changes: []}\n", r"no bed 'w' in the network"),
    ("cases:\n  - {name: a, changes: []}\n  - {name: a, changes: []}\n", r"duplicate case name"),
    ("cases:\n  - {name: a, changes: [{occlude: {vessel: lft}}]}\n", r"s\.yaml:4:\d+ .*'lft'.*'left'"),
]


@pytest.mark.parametrize("body,pattern", BAD, ids=[b[1][:28] for b in BAD])
def test_bad_sweep_files_are_located(folder, body, pattern):
    with pytest.raises(NetworkSpecError, match=pattern):
        sweep(folder, body)


def test_missing_network_file(tmp_path):
    with pytest.raises(NetworkSpecError, match=r"network file 'nowhere.yaml' not found"):
        read_sweep_text("vesselnet: 1\nnetwork: nowhere.yaml\ncases: [{name: a, changes: []}]\n",
                        str(tmp_path / "s.yaml"), tmp_path)


def test_demo_sweep_file_reads():
    spec = load_sweep(demo_path("leg_lesion_grid"))
    assert len(spec.cases) == 30 and [p.vary for p in spec.parameters] == ["reduction", "factor"]
    assert spec.report == ("foot", "foot_skin", "calf_muscle_superficial", "thigh_muscle_distal")


def test_cli_sweep_outputs(tmp_path, capsys):
    html = tmp_path / "grid.html"
    assert main(["sweep", str(demo_path("leg_lesion_grid")), "-o", str(tmp_path), "--html", str(html)]) == 0
    out = capsys.readouterr().out
    assert "30 cases" in out and "SFA diameter reduction [%]" in out and "not a medical device" in out
    lines = (tmp_path / "sweep.csv").read_text().splitlines()
    assert lines[0].startswith("case,SFA diameter reduction[%],foot resistance factor,share:foot")
    assert len(lines) == 31
    assert html.read_text().count("plotly") > 10
    assert main(["sweep", str(demo_path("leg_lesion_grid")), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert len(doc["cases"]) == 30 and doc["parameters"][0]["unit"] == "%"
    assert doc["cases"][0]["beds"][0]["id"] == "foot"
