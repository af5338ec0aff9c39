"""The calibrate, uncertainty, sweep and check commands; the progress bar; the band and sweep plots.

References: the JSON module (documents parse), CSV readers (tables read back), the
documented terminal behaviour of a progress bar (carriage-return redraw on a terminal,
plain lines otherwise; common practice, no source), HTML escaping (html.escape).
"""

import csv
import doctest
import io
import json

import numpy as np
import pytest

import viz.bands
import viz.sweeps
from vesselnet.cli import main
from vesselnet.cli.progress import ProgressBar
from vesselnet.demos import demo_path
from vesselnet.model import Network
from vesselnet.uncertainty import read_uncertainty, run_uncertainty
from vesselnet.yamlread import load_text

LEG, LEG_U = str(demo_path("leg")), str(demo_path("leg_uncertainty"))


def test_calibrate_json(capsys):
    assert main(["calibrate", str(demo_path("whole_body")), "--targets",
                 str(demo_path("whole_body_resting_targets")), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["inflow"] == pytest.approx(5000) and doc["inflow_source"] == "prescribed inflow"
    assert doc["pressure_targets"][0]["node"] == "heart"
    assert doc["pressure_targets"][0]["pressure"] == pytest.approx(93.3, rel=1e-9)
    beds = {b["id"]: b for b in doc["beds"]}
    assert beds["kidney_left"]["share"] == pytest.approx(0.11, abs=1e-9) and not beds["liver"]["calibrated"]
    assert doc["written"] == []


def test_calibrate_bed_flow_option(tmp_path, capsys):
    text = """vesselnet: 1
nodes: {root: {pressure: 95}}
vessels:
  - {id: a, from: root, to: t, length: 10, radius: 2}
  - {id: b, from: root, to: u, length: 10, radius: 2}
beds:
  - {id: x, node: t, resistance: 40}
  - {id: y, node: u, resistance: 40}
"""
    (tmp_path / "n.yaml").write_text(text)
    assert main(["calibrate", str(tmp_path / "n.yaml"), "--bed-flow", "x=120", "--bed-flow",
                 "y=0.5 L/min", "--json"]) == 0
    beds = json.loads(capsys.readouterr().out)["beds"]
    assert [b["flow"] for b in beds] == pytest.approx([120, 500], rel=1e-9)
    assert main(["calibrate", str(tmp_path / "n.yaml"), "--bed-flow", "x120"]) == 2
    assert "expected ID=FLOW" in capsys.readouterr().err


def test_uncertainty_json_and_tables(tmp_path, capsys):
    html = tmp_path / "bands.html"
    assert main(["uncertainty", LEG, LEG_U, "--samples", "30", "--json", "-o", str(tmp_path),
                 "--html", str(html)]) == 0
    captured = capsys.readouterr()
    doc = json.loads(captured.out)
    assert doc["samples"] == 30 and doc["seed"] == 20240611 and doc["percentiles"] == [5, 50, 95]
    foot = next(b for b in doc["beds"] if b["id"] == "foot")
    assert foot["share_band"]["p5"] <= foot["share_band"]["p50"] <= foot["share_band"]["p95"]
    from vesselnet.reader import load_network

    assert [n["id"] for n in doc["nodes"]] == list(load_network(LEG).nodes.ids)
    assert "uncertainty: 30/30 samples (100 %)" in captured.err
    with open(tmp_path / "bands.csv") as handle:
        rows = list(csv.DictReader(handle))
    assert len(rows) == 11 and "pressure_p95[mmHg]" in rows[0]
    with open(tmp_path / "samples.csv") as handle:
        samples = list(csv.DictReader(handle))
    assert len(samples) == 30 and "share:foot" in samples[0]
    shares = np.array([[float(r[f"share:{b['id']}"]) for b in doc["beds"]] for r in samples])
    np.testing.assert_allclose(np.percentile(shares, 95, axis=0),
                               [b["share_band"]["p95"] for b in doc["beds"]], rtol=1e-8)
    assert "Plotly" in html.read_text()


def test_uncertainty_fresh_seed_is_printed_and_processes_agree(capsys):
    assert main(["uncertainty", LEG, LEG_U, "--samples", "6", "--seed", "5", "--json"]) == 0
    here = json.loads(capsys.readouterr().out)
    assert main(["uncertainty", LEG, LEG_U, "--samples", "6", "--seed", "5", "--json", "--workers", "2"]) == 0
    there = json.loads(capsys.readouterr().out)
    assert here["beds"] == there["beds"] and there["execution"] == "2 local processes"
    text = "vesselnet: 1\nuncertainty:\n  - {vessels: all, quantity: radius, distribution: lognormal, relative: 5%}\n"
    assert main(["uncertainty", LEG, "-", "--samples", "3"]) == 2            # no such file
    capsys.readouterr()
    import tempfile
    from pathlib import Path

    with tempfile.TemporaryDirectory() as folder:
        spec = Path(folder) / "u.yaml"
        spec.write_text(text)
        assert main(["uncertainty", LEG, str(spec), "--samples", "3"]) == 0
        err = capsys.readouterr().err
    assert "pass --seed" in err


@pytest.mark.parametrize("options,pattern", [(["--workers", "0"], "--workers: must be at least 1"),
                                             (["--samples", "0"], "--samples: must be at least 1"),
                                             (["--chunk", "0"], "--chunk: must be at least 1")])
def test_uncertainty_bad_options(options, pattern, capsys):
    assert main(["uncertainty", LEG, LEG_U] + options) == 2
    assert pattern in capsys.readouterr().err


@pytest.mark.parametrize("name,network,pattern", [
    ("leg_lesion_grid", None, "valid sweep file"),
    ("leg_uncertainty", "leg", "valid uncertainty file: 4 uncertain input(s)"),
    ("whole_body_resting_targets", "whole_body", "valid targets file: 33 bed target(s), 1 pressure target(s)"),
])
def test_check_knows_the_new_file_kinds(name, network, pattern, capsys):
    args = ["check", str(demo_path(name))] + (["--network", str(demo_path(network))] if network else [])
    assert main(args) == 0
    assert pattern in capsys.readouterr().out


def test_check_asks_for_the_network(capsys):
    assert main(["check", LEG_U]) == 2
    assert "give the network" in capsys.readouterr().err


class FakeTerminal(io.StringIO):
    def isatty(self):
        return True


def test_progress_bar_redraws_on_a_terminal():
    stream = FakeTerminal()
    clock = iter(np.arange(0, 10, 0.5)).__next__
    bar = ProgressBar(4, "mc", stream=stream, clock=clock)
    for done in range(1, 5):
        bar(done, 4)
    bar.close()
    text = stream.getvalue()
    assert text.count("\r") == 4 and text.endswith("\n") and text.count("\n") == 1
    assert "[############################] 100% 4/4 samples" in text


def test_progress_bar_writes_plain_lines_elsewhere():
    stream = io.StringIO()
    bar = ProgressBar(1000, "sweep", stream=stream, unit="cases", clock=iter(range(2000)).__next__)
    for done in range(1, 1001):
        bar(done, 1000)
    bar.close()
    lines = stream.getvalue().splitlines()
    assert len(lines) == 10 and "\r" not in stream.getvalue()
    assert lines[0].startswith("sweep: 100/1000 cases (10 %)") and "in all" in lines[-1]


def test_plots_escape_ids_and_label_units():
    net = Network.build(nodes={"r": {"pressure_pa": 13332.2}},
                        vessels=[{"id": "a", "from": "r", "to": "t", "length_m": 0.1, "radius_m": 0.002},
                                 {"id": "b", "from": "r", "to": "u", "length_m": 0.1, "radius_m": 0.002}],
                        beds=[{"id": "<b>x</b>", "node": "t", "resistance_pa_s_m3": 1e9},
                              {"id": "y&z", "node": "u", "resistance_pa_s_m3": 2e9}], name="<i>net</i>")
    spec = read_uncertainty(load_text("vesselnet: 1\nuncertainty:\n  - {beds: all, quantity: resistance, "
                                      "distribution: lognormal, relative: 10%}\n", "u.yaml"), net, "u.yaml")
    fig = viz.bands.band_figure(run_uncertainty(net, spec, samples=10, seed=31))
    labels = set(fig.data[0].y)
    assert labels == {"&lt;b&gt;x&lt;/b&gt;", "y&amp;z"}
    assert "<i>" not in fig.layout.title.text
    assert fig.layout.xaxis.title.text == "bed share [%]" and "[mmHg]" in fig.layout.xaxis2.title.text


@pytest.mark.parametrize("module", [viz.bands, viz.sweeps])
def test_viz_examples(module):
    assert doctest.testmod(module, optionflags=doctest.ELLIPSIS).failed == 0


def test_bed_flow_option_replaces_a_share(capsys):
    """--bed-flow overrides the share the targets give that bed (here the kidneys' 11 %+11 %
    become 500 + 600 mL/min, still 22 % of 5000 mL/min, so the targets stay consistent)."""
    assert main(["calibrate", str(demo_path("whole_body")), "--targets",
                 str(demo_path("whole_body_resting_targets")), "--bed-flow", "kidney_left=500",
                 "--bed-flow", "kidney_right=600", "--json"]) == 0
    beds = {b["id"]: b for b in json.loads(capsys.readouterr().out)["beds"]}
    assert beds["kidney_left"]["flow"] == pytest.approx(500, rel=1e-9)
    assert beds["kidney_right"]["flow"] == pytest.approx(600, rel=1e-9)
    assert beds["kidney_left"]["target_share"] is None
