"""Wall mechanics in and out: the ``distensible:`` selection, JSON/CSV/terminal outputs, the CLI.

Unit conversions of the written values are checked against pint (general-purpose
reference tool); totals against sums of the per-vessel values.
"""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import numpy as np
import pint
import pytest

from vesselnet import writers
from vesselnet.cli import main
from vesselnet.errors import NetworkSpecError
from vesselnet.reader import load_network, read_network_text
from vesselnet.solve import solve
from vesselnet.textreport import solve_report

NETWORKS = Path(__file__).resolve().parent.parent / "networks"
UREG = pint.UnitRegistry()

BASE = """
vesselnet: 1
nodes: {root: {pressure: 100}, atrium: {pressure: 4}}
{selection}
vessels:
  - {id: artery, from: root, to: tip, length: 10, radius: 2, wall: {thickness: 0.4, modulus: 0.8}, tags: [arterial]}
  - {id: vein_a, from: venule, to: mid, length: 10, radius: 4, wall: {thickness: 0.4, modulus: 0.1}, tags: [venous]}
  - {id: vein_b, from: mid, to: atrium, length: 10, radius: 5, wall: {thickness: 0.5, modulus: 0.1, external_pressure: 1}, tags: [venous]}
  - {id: vein_c, from: mid, to: atrium, length: 10, radius: 5, wall: {thickness: 0.5, modulus: 0.1, distensible: false}, tags: [venous]}
beds:
  - {id: organ, node: tip, resistance: 10, outflow_node: venule}
"""


def network(selection: str):
    return read_network_text(BASE.replace("{selection}", selection), "walls.yaml")


def test_selection_by_tag():
    """Tagged vessels become distensible; a vessel's own wall keys win (external
    pressure, ``distensible: false``); the selection's external pressure fills the rest."""
    net = network("distensible: {tags: [venous], external_pressure: 2 mmHg}")
    v = net.vessels
    assert v.distensible.tolist() == [False, True, True, False]
    assert (v.external_pressure_pa / 133.322387415).round(9).tolist() == [0.0, 2.0, 1.0, 0.0]


def test_selection_all():
    net = network("distensible: {all: true}")
    assert net.vessels.distensible.tolist() == [True, True, True, False]


def test_without_selection_only_per_vessel_walls():
    assert network("").vessels.distensible.tolist() == [False, False, False, False]


def test_selection_reaches_table_rows(tmp_path):
    """Vessels from a CSV table (which has no wall flag column) are selected by their tags."""
    (tmp_path / "veins.csv").write_text(
        "id,from,to,length[cm],radius[mm],wall_thickness[mm],wall_modulus[MPa],tags\n"
        "t1,mid,atrium,12,6,0.6,0.1,venous;table\n")
    text = BASE.replace("{selection}", "distensible: {tags: [table]}\nvessels_table: veins.csv")
    (tmp_path / "net.yaml").write_text(text)
    net = load_network(tmp_path / "net.yaml")
    assert net.vessels.ids[-1] == "t1"
    assert net.vessels.distensible.tolist() == [False, False, False, False, True]


@pytest.mark.parametrize("selection, message", [
    ("distensible: {tags: [venus]}", r"no vessel carries the tag 'venus'; did you mean 'venous'\?"),
    ("distensible: {tags: [venous], all: true}", r"give exactly one of 'tags' and 'all'"),
    ("distensible: {}", r"give exactly one of 'tags' and 'all'"),
    ("distensible: {all: yes}", r"'all' must be true or false"),
    ("distensible: {tags: [venous], colour: red}", r"unknown key 'colour'"),
    ("distensible: all", r"'distensible' must be a mapping"),
    ("distensible: {tags: [venous], external_pressure: 2 mL}", r"unit of volume, not of pressure"),
])
def test_bad_selection(selection, message):
    with pytest.raises(NetworkSpecError, match=message):
        network(selection)


def test_selected_vessel_without_wall_is_an_error():
    text = BASE.replace("{selection}", "distensible: {all: true}").replace(
        "radius: 2, wall: {thickness: 0.4, modulus: 0.8}", "radius: 2")
    with pytest.raises(NetworkSpecError, match=r"walls.yaml:4:\d+ distensible: 1 selected vessel\(s\) "
                                               r"lack a wall thickness or modulus: 'artery'"):
        read_network_text(text, "walls.yaml")


# ------------------------------------------------------------------ outputs
@pytest.fixture
def demo_result():
    return solve(load_network(NETWORKS / "venous_return.yaml"))


def test_json_vessel_fields_and_units(demo_result):
    """lumen_radius in mm, wall_stress in kPa, volume in mL (converted with pint)."""
    doc = json.loads(writers.dumps(writers.result_json(demo_result)))
    assert (doc["units"]["radius"], doc["units"]["stress"], doc["units"]["volume"]) == ("mm", "kPa", "mL")
    extra = demo_result.vessel_extra
    for i, record in enumerate(doc["vessels"]):
        assert record["lumen_radius"] == pytest.approx(
            (extra["lumen_radius_m"][i] * UREG.m).to(UREG.mm).magnitude, rel=1e-9)
        assert record["wall_stress"] == pytest.approx(
            (extra["wall_stress_pa"][i] * UREG.Pa).to(UREG.kPa).magnitude, rel=1e-9)
        assert record["volume"] == pytest.approx((extra["volume_m3"][i] * UREG.m**3).to(UREG.mL).magnitude,
                                                 rel=1e-9)
    strains = [r["wall_strain"] for r in doc["vessels"]]
    assert strains[1] is None and strains[0] > 0        # rigid artery null, distensible common iliac


def test_json_volumes(demo_result):
    """``volumes``: total = sum of the vessel volumes; tag entries with shares."""
    doc = writers.result_json(demo_result)
    volumes = doc["volumes"]
    assert volumes["total"] == pytest.approx(sum(r["volume"] for r in doc["vessels"]), rel=1e-9)
    assert volumes["stressed"] == pytest.approx(volumes["total"] - volumes["unstressed"], rel=1e-8)
    assert set(volumes["by_tag"]) >= {"arterial", "venous"}
    assert volumes["by_tag"]["venous"]["share"] == pytest.approx(
        volumes["by_tag"]["venous"]["volume"] / volumes["total"], rel=1e-9)


def test_csv_headers_carry_units(demo_result, tmp_path):
    paths = writers.write_tables(demo_result, tmp_path)
    text = (tmp_path / "vessels.csv").read_text()
    header = next(csv.reader(io.StringIO(text)))
    assert {"lumen_radius[mm]", "wall_strain", "wall_stress[kPa]", "volume[mL]"} <= set(header)
    assert len(paths) == 3


def test_terminal_report(demo_result):
    report = solve_report(demo_result)
    assert "blood volume in vessels" in report and "by tag: venous" in report
    assert "wall stress [kPa]" in report and "distensible" in report


def test_cli_solve_demo(capsys):
    """The command line solves the demo and prints volumes and wall stress (exit 0)."""
    assert main(["solve", str(NETWORKS / "venous_return.yaml")]) == 0
    out = capsys.readouterr().out
    assert "blood volume in vessels" in out and "Walls" in out
    assert main(["solve", str(NETWORKS / "venous_return.yaml"), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["volumes"]["by_tag"]["venous"]["share"] > 0.7
    assert doc["checks"]["solver"].endswith("from the rigid-wall solution")


def test_rigid_network_report_has_volumes_but_no_strain():
    """Every solve reports volumes; strain only where a vessel is distensible."""
    result = solve(load_network(NETWORKS / "collateral.yaml"))
    assert np.isnan(result.vessel_extra["wall_strain"]).all()
    assert np.isfinite(result.vessel_extra["wall_stress_pa"]).all()   # every vessel has a wall there
    assert "from the rigid-wall solution" not in result.solver
