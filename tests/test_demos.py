"""Every bundled network loads, solves, passes the invariants and follows SPEC section 5."""

import json

import pytest

from vesselnet.cli import main
from vesselnet.demos import DEMOS, demo_names, demo_path
from vesselnet.reader import load_network
from vesselnet.solve import solve
from vesselnet.testing import assert_invariants

DYN_S_CM5 = 1e5  # Pa*s/m^3 (REFERENCES conversions)
NETWORKS = [n for n in demo_names() if load_network is not None]


def test_the_demo_list_is_bundled():
    assert set(DEMOS) <= set(demo_names())


@pytest.mark.parametrize("name", NETWORKS)
def test_network_solves_with_invariants(name):
    result = solve(load_network(demo_path(name)))
    assert_invariants(result, rtol=1e-9)
    assert result.inflow_m3_s > 0


@pytest.mark.parametrize("name", NETWORKS)
def test_solve_json_follows_spec(name, capsys):
    assert main(["solve", str(demo_path(name)), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["vesselnet"] == 1 and isinstance(doc["network"], str)
    assert {"pressure", "flow", "wss", "length", "radius", "velocity"} <= set(doc["units"])
    assert doc["units"]["pressure"] == "mmHg" and doc["units"]["flow"] == "mL/min"
    assert isinstance(doc["inflow"], float)
    assert {"id", "pressure"} <= set(doc["nodes"][0])
    assert {"id", "from", "to", "flow", "pressure_drop", "mean_velocity", "wss", "reynolds"} <= set(doc["vessels"][0])
    assert {"id", "node", "flow", "share", "pressure"} <= set(doc["beds"][0])
    assert {"mass_balance", "iterations"} <= set(doc["checks"])
    assert doc["checks"]["mass_balance"] < 1e-9
    net = load_network(demo_path(name))
    assert [n["id"] for n in doc["nodes"]] == list(net.nodes.ids)
    assert [v["id"] for v in doc["vessels"]] == list(net.vessels.ids)


def test_whole_body_resistance_in_textbook_range():
    """Systemic vascular resistance 700-1600 dyn*s/cm^5 (Hurst's The Heart via REFERENCES 8.2, V2),
    computed as (mean arterial - venous pressure) / cardiac output."""
    result = solve(load_network(demo_path("whole_body")))
    net = result.network
    heart = net.nodes.index["heart"]
    resistance = (result.pressure_pa[heart] - net.venous_pressure_pa) / result.inflow_m3_s
    assert 700 <= resistance / DYN_S_CM5 <= 1600


def test_whole_body_resting_distribution_is_plausible():
    """Resting shares near the basal distribution of cardiac output (Guyton & Hall table,
    REFERENCES 8.3, from memory): brain about 14 %, kidneys about 22 %, heart about 4 %."""
    result = solve(load_network(demo_path("whole_body")))
    share = dict(zip(result.network.beds.ids, result.bed_share))
    brain = sum(v for k, v in share.items() if k.startswith("brain"))
    kidneys = sum(v for k, v in share.items() if k.startswith("kidney"))
    heart = sum(v for k, v in share.items() if k.startswith("myocardium"))
    assert 0.11 <= brain <= 0.17 and 0.18 <= kidneys <= 0.25 and 0.03 <= heart <= 0.05


def test_demo_command_prints_every_network(capsys, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)  # the demo writes its report into the current folder
    assert main(["demo"]) == 0
    assert (tmp_path / "vesselnet-demo" / "report.html").is_file()
    out = capsys.readouterr().out
    for name in DEMOS:
        assert f"{name}.yaml" in out
    assert "share [%]" in out
