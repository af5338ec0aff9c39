"""`vesselnet pulse` and `vesselnet windkessel` on the demos; CSV waveform input.

References: SPEC sections 4, 6 and 7 (commands, `pulse --json` fields, pulsatile inputs), the
steady solver (means), and the trapezoid rule for the mean of a tabulated waveform (elementary).
"""

import csv
import json
import subprocess
import sys

import numpy as np
import pytest

from vesselnet.cli import main
from vesselnet.demos import demo_path
from vesselnet.errors import NetworkSpecError
from vesselnet.reader import load_network
from vesselnet.solve import solve


def run_json(args, capsys):
    assert main(["pulse", *args, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


@pytest.mark.parametrize("name", ["whole_body", "leg"])
def test_pulse_runs_out_of_the_box(name, capsys):
    """The README demos run without options; the report names the set-up it did."""
    assert main(["pulse", str(demo_path(name))]) == 0
    out = capsys.readouterr().out
    assert "Input impedance" in out and "systolic [mmHg]" in out
    assert "Windkessel" in out and "note:" in out


@pytest.mark.parametrize("name", ["whole_body", "leg"])
def test_pulse_json_follows_spec(name, capsys):
    """SPEC 6: nodes gain systolic, diastolic, mean, pulse_pressure; vessels gain flow_peak,
    flow_min, flow_mean, pulsatility_index; `waveforms` holds `times` and the samples.  The
    means are the steady solve's (SPEC 7)."""
    doc = run_json([str(demo_path(name))], capsys)
    assert {"systolic", "diastolic", "mean", "pulse_pressure"} <= set(doc["nodes"][0])
    assert {"flow_peak", "flow_min", "flow_mean", "pulsatility_index"} <= set(doc["vessels"][0])
    assert len(doc["waveforms"]["times"]) == doc["pulse"]["samples"] == 200
    assert doc["pulse"]["harmonics"] == 20
    for series in doc["waveforms"]["nodes"].values():
        assert len(series) == 200
    steady = solve(load_network(demo_path(name)))
    means = np.array([n["mean"] for n in doc["nodes"]])
    np.testing.assert_allclose(means, steady.pressure_pa / 133.322387415, rtol=1e-9)
    flows = np.array([v["flow_mean"] for v in doc["vessels"]])
    np.testing.assert_allclose(flows, steady.vessel_flow_m3_s * 6e7, rtol=1e-9, atol=1e-9)
    for node in doc["nodes"]:
        assert node["diastolic"] <= node["mean"] <= node["systolic"]
    assert len(doc["input_impedance"]["modulus"]) == 21
    assert doc["units"]["impedance"] == "mmHg*s/mL" and doc["units"]["time"] == "s"
    assert doc["windkessel"]["total_compliance"] > doc["windkessel"]["conduit_compliance"] > 0
    # a demo network is a small system: LU with partial pivoting, named like the steady solver
    assert doc["checks"]["harmonic_solver"].startswith("superlu (")


def test_waveform_selection_and_unknown_id(capsys):
    doc = run_json([str(demo_path("leg")), "--waveform", "sfa_mid", "--waveform", "foot"], capsys)
    assert list(doc["waveforms"]["vessels"]) == ["sfa_mid"]
    assert list(doc["waveforms"]["beds"]) == ["foot"] and doc["waveforms"]["nodes"] == {}
    assert main(["pulse", str(demo_path("leg")), "--waveform", "sfa_mdi"]) == 2
    assert "sfa_mid" in capsys.readouterr().err           # near-miss suggestion


def test_csv_output_reads_back(tmp_path, capsys):
    out = tmp_path / "tables"
    doc = run_json([str(demo_path("leg")), "-o", str(out)], capsys)
    assert {p.name for p in out.iterdir()} == {
        "pulse_nodes.csv", "pulse_vessels.csv", "pulse_beds.csv", "input_impedance.csv",
        "pressure_waveforms.csv", "vessel_flow_waveforms.csv", "bed_flow_waveforms.csv"}
    with open(out / "pressure_waveforms.csv") as handle:
        rows = list(csv.reader(handle))
    assert rows[0][0] == "time[s]" and rows[0][1] == "aortic_bifurcation[mmHg]"
    series = [float(r[1]) for r in rows[1:]]
    assert series == pytest.approx(doc["waveforms"]["nodes"]["aortic_bifurcation"], rel=1e-9)
    with open(out / "pulse_vessels.csv") as handle:
        table = list(csv.DictReader(handle))
    assert float(table[0]["pulsatility_index"]) == pytest.approx(doc["vessels"][0]["pulsatility_index"])


def test_html_figure_is_written(tmp_path, capsys):
    path = tmp_path / "waves.html"
    assert main(["pulse", str(demo_path("leg")), "--html", str(path)]) == 0
    text = path.read_text()
    assert "plotly" in text and "pressure [mmHg]" in text


def test_library_and_pulse_command_do_not_need_plotly(tmp_path):
    """The library never imports plotly or viz (DEVELOPERS.md layering); `pulse` without --html
    runs with plotly blocked."""
    code = ("import sys; sys.modules['plotly'] = None; sys.modules['viz'] = None\n"
            "import vesselnet.pulse, vesselnet.pulsesetup, vesselnet.pulsereport, vesselnet.networkwriter\n"
            "from vesselnet.cli import main\n"
            f"raise SystemExit(main(['pulse', {str(demo_path('leg'))!r}, '--json']))\n")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=tmp_path)
    assert done.returncode == 0, done.stderr


def test_heart_rate_from_stroke_volume(capsys):
    """--stroke-volume keeps the file's mean inflow: heart rate = 5000 mL/min / 80 mL = 62.5 bpm."""
    doc = run_json([str(demo_path("whole_body")), "--stroke-volume", "80"], capsys)
    assert doc["pulse"]["heart_rate"] == pytest.approx(62.5, rel=1e-9)
    assert doc["inflow"] == pytest.approx(5000.0, rel=1e-9)


def test_constant_everything_is_refused(capsys):
    assert main(["pulse", str(demo_path("whole_body")), "--constant-inflow"]) == 2
    assert "no pulsatile source" in capsys.readouterr().err


def test_pressure_csv_at_the_inlet(tmp_path, capsys):
    """A tabulated inlet pressure: its mean (trapezoid rule over the closed cycle) becomes the
    node's steady pressure, and the inlet's pulse pressure is the table's."""
    table = tmp_path / "aortic.csv"
    table.write_text("time[s],pressure[mmHg]\n0,80\n0.1,110\n0.25,120\n0.45,95\n0.8,80\n")
    doc = run_json([str(demo_path("leg")), "--pressure-csv", str(table)], capsys)
    inlet = doc["nodes"][0]
    t = np.array([0, 0.1, 0.25, 0.45, 0.8])
    p = np.array([80, 110, 120, 95, 80.0])
    assert inlet["mean"] == pytest.approx(np.sum((p[1:] + p[:-1]) / 2 * np.diff(t)) / 0.8, rel=1e-5)
    assert inlet["pulse_pressure"] == pytest.approx(40.0, rel=0.03)     # 20 harmonics of a polygon
    assert doc["pulse"]["period"] == pytest.approx(0.8)


def test_windkessel_command_writes_a_network(tmp_path, capsys):
    """`vesselnet windkessel` writes a file whose beds carry windkessel blocks; the steady solve
    is unchanged, and `pulse` on it gives what `pulse` gives with the automatic set-up."""
    out = tmp_path / "whole_body_wk.yaml"
    assert main(["windkessel", str(demo_path("whole_body")), "-o", str(out), "--total-compliance", "1.5"]) == 0
    capsys.readouterr()
    net = load_network(out)
    assert np.isfinite(net.beds.windkessel_compliance_m3_pa).sum() == len(net.beds) - 1     # liver
    np.testing.assert_allclose(solve(net).pressure_pa, solve(load_network(demo_path("whole_body"))).pressure_pa,
                               rtol=1e-12)
    written = run_json([str(out)], capsys)
    auto = run_json([str(demo_path("whole_body"))], capsys)
    assert "windkessel" not in written
    a = [n["pulse_pressure"] for n in written["nodes"]]
    b = [n["pulse_pressure"] for n in auto["nodes"]]
    np.testing.assert_allclose(a, b, rtol=1e-9)


# --------------------------------------------------------------------------- CSV inflow in files
NETWORK = """
vesselnet: 1
nodes: {heart: {inflow: {csv: %s}}}
vessels:
  - {id: aorta, from: heart, to: tip, length: 30, radius: 12, wall: {thickness: 1.2, modulus: 0.5}}
beds:
  - {id: body, node: tip, resistance: 1.0, windkessel: {proximal: 0.05, compliance: 1.2}}
"""


def test_csv_inflow_in_a_network_file(tmp_path, capsys):
    """`inflow: {csv: FILE}` (SPEC 7 extension): one cycle, the last row closing it; the steady
    mean is the waveform's mean (trapezoid rule: 0.5 * 0.3 s * 420 mL/s over 0.857 s)."""
    (tmp_path / "heart.csv").write_text("time[ms],flow[mL/s]\n0,0\n90,420\n300,0\n857,0\n")
    (tmp_path / "net.yaml").write_text(NETWORK % "heart.csv")
    net = load_network(tmp_path / "net.yaml")
    assert net.nodes.inflow_m3_s[0] == pytest.approx(0.5 * 0.3 * 420e-6 / 0.857, rel=1e-5)
    doc = run_json([str(tmp_path / "net.yaml")], capsys)
    assert doc["pulse"]["period"] == pytest.approx(0.857)
    assert doc["vessels"][0]["flow_peak"] > 20000                            # mL/min


@pytest.mark.parametrize("table, match", [
    ("time,flow\n0,0\n", "at least 2 rows"),
    ("t,flow\n0,0\n0.5,1\n", "columns must be 'time,flow'"),
    ("time[s],flow[mmHg]\n0,0\n0.5,1\n", "unit of pressure"),
    ("time,flow\n0.1,0\n0.5,1\n", "first time must be 0"),
    ("time,flow\n0,0\n0.5,1\n0.5,2\n", "times must increase"),
    ("time,flow\n0,0\n0.5,x\n", "expected two numbers"),
])
def test_bad_csv_inflow(table, match, tmp_path):
    (tmp_path / "heart.csv").write_text(table)
    (tmp_path / "net.yaml").write_text(NETWORK % "heart.csv")
    with pytest.raises(NetworkSpecError, match=match):
        load_network(tmp_path / "net.yaml")


def test_missing_csv_inflow_is_located(tmp_path, capsys):
    (tmp_path / "net.yaml").write_text(NETWORK % "nowhere.csv")
    assert main(["check", str(tmp_path / "net.yaml")]) == 2
    assert "nowhere.csv" in capsys.readouterr().err
