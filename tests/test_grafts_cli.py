"""``vesselnet grafts`` and ``vesselnet check`` on plan files: the caution in all three outputs,
SPEC section 6 JSON, the HTML report, exit codes and layering.

The JSON's derived numbers are checked against the definitions stated with the ranking
(SCORE_DEFINITION: restored = (Q_grafted - Q_diseased) / (Q_healthy - Q_diseased)), using the
flows written in the same document; the caution is the one sentence of vesselnet.caution.
"""

import html
import json
import subprocess
import tempfile
import sys

import pytest
from graft_cases import SERIES

from vesselnet.caution import CAUTION
from vesselnet.cli import main
from vesselnet.demos import demo_path

PLAN = str(demo_path("leg_graft_plan"))


@pytest.fixture(scope="module")
def demo_json():
    from vesselnet.grafts import rank_plan, ranking_json
    from vesselnet.planfile import load_plan

    return json.loads(json.dumps(ranking_json(rank_plan(load_plan(PLAN), samples=6))))


def test_the_terminal_report_starts_with_the_caution(capsys):
    assert main(["grafts", "leg_graft_plan", "--samples", "3"]) == 0       # a bundled plan, by name
    out = capsys.readouterr().out
    assert out.splitlines()[0] == f"caution: {CAUTION}"
    assert "Ranking" in out and "Robustness (3 seeded samples" in out and "score = restored fraction" in out
    for candidate in ("cfa_to_ak_popliteal_vein", "cfa_to_bk_popliteal_ptfe", "profunda_to_ak_popliteal_vein",
                      "sfa_to_tp_trunk_vein"):
        assert candidate in out


def test_json_prints_only_json_with_the_caution_first(capsys):
    assert main(["grafts", PLAN, "--json", "--samples", "2"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert list(doc)[:2] == ["vesselnet", "caution"] and doc["caution"] == CAUTION


def test_json_follows_spec_section_6(demo_json):
    doc = demo_json
    assert doc["vesselnet"] == 1 and doc["units"]["flow"] == "mL/min" and doc["units"]["wss"] == "Pa"
    assert doc["targets"] and len(doc["candidates"]) >= 4
    for c in doc["candidates"]:
        assert {"id", "rank", "score", "target_flow", "restored_fraction", "graft_flow", "graft_wss",
                "distal_pressure_ratio", "competing_flow", "steal", "flags"} <= set(c)
        if c["steal"] is not None:
            assert {"bed", "flow_change_percent"} <= set(c["steal"])
        for flag in c["flags"]:
            assert flag["text"] and flag["source"]
    assert [c["rank"] for c in doc["candidates"]] == sorted(c["rank"] for c in doc["candidates"])
    assert doc["robustness"]["samples"] == 6 and doc["robustness"]["top"] == doc["candidates"][0]["id"]


def test_json_numbers_follow_their_definitions(demo_json):
    """restored = (Q_grafted - Q_diseased) / (Q_healthy - Q_diseased); Pd/Pprox = distal / proximal
    pressure; target flow = the sum of the target beds' flows."""
    doc = demo_json
    healthy, diseased = doc["healthy"]["target_flow"], doc["diseased"]["target_flow"]
    assert doc["lost_flow"] == pytest.approx(healthy - diseased, rel=1e-8)
    for c in doc["candidates"]:
        assert c["restored_fraction"] == pytest.approx((c["target_flow"] - diseased) / (healthy - diseased), rel=1e-8)
        assert c["score"] == c["restored_fraction"]
        assert c["distal_pressure_ratio"] == pytest.approx(c["distal_pressure"] / c["proximal_pressure"], rel=1e-8)
        assert c["target_flow"] == pytest.approx(sum(b["flow"] for b in c["target_beds"]), rel=1e-8)


def test_the_html_report_is_headed_by_the_caution(tmp_path, capsys):
    path = tmp_path / "report" / "grafts.html"
    assert main(["grafts", PLAN, "--samples", "2", "--html", str(path)]) == 0
    assert f"wrote {path}" in capsys.readouterr().out
    page = path.read_text()
    caution = page.index(html.escape(CAUTION))
    assert caution < page.index("<h1>") < page.index("Ranking") < page.index('id="vn-grafts"')
    assert "plotly" in page.lower()


def test_the_html_report_names_every_flag_source(tmp_path, demo_json):
    from vesselnet.grafts import rank_plan
    from vesselnet.planfile import load_plan
    from viz.grafts import grafts_page_html

    page = grafts_page_html(rank_plan(load_plan(PLAN), samples=0))
    sources = {f["source"] for c in demo_json["candidates"] for f in c["flags"]}
    assert sources
    for source in sources:
        assert html.escape(source) in page


def test_check_validates_a_plan(capsys):
    assert main(["check", PLAN]) == 0
    assert "valid plan file" in capsys.readouterr().out


def test_a_bad_plan_exits_2_with_one_paragraph(tmp_path, capsys):
    (tmp_path / "net.yaml").write_text(SERIES)
    (tmp_path / "plan.yaml").write_text("vesselnet: 1\nnetwork: net.yaml\ncondition: [{occlude: {vessel: d}}]\n"
                                        "targets: [organ]\ncandidates:\n  - {id: g, from: root, to: kk, length: 9, radius: 2}\n")
    for command in ("grafts", "check"):
        assert main([command, str(tmp_path / "plan.yaml")]) == 2
        err = capsys.readouterr().err
        assert "plan.yaml:6" in err and "unknown node 'kk'" in err and "Traceback" not in err


def test_negative_samples_are_refused(capsys):
    assert main(["grafts", PLAN, "--samples", "-1"]) == 2
    assert "--samples" in capsys.readouterr().err


def test_the_library_side_never_imports_plotly_or_viz():
    """Layering (DEVELOPERS.md): the command line imports viz only for --html."""
    code = ("import sys; import vesselnet.grafts, vesselnet.grafttext, vesselnet.graftrobust, "
            "vesselnet.planfile, vesselnet.conduits, vesselnet.graftflags, vesselnet.cli.grafts; "
            "from vesselnet.cli import build_parser; build_parser(); "
            "print(sorted(m for m in sys.modules if m.split('.')[0] in ('plotly', 'viz')))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                         cwd=tempfile.gettempdir()).stdout
    assert out.strip() == "[]"
