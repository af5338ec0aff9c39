"""Charts, offline pages and the view commands.

References: a bed's share is its flow over the total inflow into the network
(SPEC section 5); 1 mmHg = 133.322387415 Pa and 1 m^3/s = 1e6 mL/s
(common practice; pint agrees); HTML escaping of & < > " ' (HTML 5
specification, common practice).
"""

from __future__ import annotations

import re

import numpy as np
import pytest

from vesselnet.cli import main
from vesselnet.demos import demo_path
from vesselnet.reader import load_network
from vesselnet.solve import solve

from viz.charts import BAR_COUNT, bed_share_figure, share_comparison_figure, waveform_figure
from viz.page import PLOTLY_FILE, Section, page_html, write_page

MMHG_PA = 133.322387415


@pytest.fixture(scope="module")
def body():
    return solve(load_network(demo_path("whole_body")))


def test_bed_shares_equal_flow_over_inflow(body):
    """Bars: 100 * bed flow / total inflow, largest first; beds past BAR_COUNT summed in one bar."""
    (bar,) = bed_share_figure(body).data
    inflow = body.boundary_inflow_m3_s[body.boundary_inflow_m3_s > 0].sum()
    share = 100 * body.bed_flow_m3_s / inflow
    order = np.argsort(-share, kind="stable")
    n = len(share)
    shown = min(n, BAR_COUNT)
    np.testing.assert_allclose(bar.x[:shown], share[order[:shown]], rtol=1e-12)
    assert list(bar.y[:shown]) == [body.network.beds.ids[i] for i in order[:shown]]
    if n > BAR_COUNT:
        assert bar.x[-1] == pytest.approx(share[order[BAR_COUNT:]].sum())
        assert bar.y[-1] == f"{n - BAR_COUNT} other beds"
    fig = bed_share_figure(body)
    assert fig.layout.xaxis.title.text == "share of total inflow [%]"


def test_share_comparison_matches_beds_by_id(body):
    """Beds are matched by id; a bed missing from one side has no bar on that side."""
    net = body.network
    import dataclasses

    keep = np.array([b != "liver" for b in net.beds.ids])
    beds = net.beds
    columns = {f.name: getattr(beds, f.name)[keep] for f in dataclasses.fields(beds)
               if isinstance(getattr(beds, f.name), np.ndarray)}
    fewer = dataclasses.replace(net, beds=dataclasses.replace(
        beds, ids=tuple(b for b, k in zip(beds.ids, keep) if k), **columns))
    scenario = solve(fewer)
    fig = share_comparison_figure(body, scenario, name="no <liver>")
    before, after = fig.data
    labels = list(before.y)
    assert len(labels) == min(len(net.beds), BAR_COUNT)
    k = labels.index("liver")
    assert np.isfinite(before.x[k]) and np.isnan(after.x[k])
    j = labels.index("kidney_left")
    assert after.x[j] == pytest.approx(100 * scenario.bed_share[scenario.network.beds.index["kidney_left"]])
    assert after.name == "no &lt;liver&gt;"


def test_waveforms_in_display_units():
    """Pressure in mmHg, flow in mL/s, from SI samples; axes carry units."""
    t = np.linspace(0, 0.8, 9)
    p = 100 * MMHG_PA + 20 * MMHG_PA * np.sin(2 * np.pi * t / 0.8)
    fig = waveform_figure(t, {"aorta": p}, kind="pressure")
    np.testing.assert_allclose(fig.data[0].y, p / MMHG_PA)
    q = waveform_figure(t, {"<x>": np.full(9, 1e-6)}, kind="flow")
    np.testing.assert_allclose(q.data[0].y, 1.0)
    assert (q.layout.yaxis.title.text, q.data[0].name) == ("flow [mL/s]", "&lt;x&gt;")
    with pytest.raises(ValueError, match="samples"):
        waveform_figure(t, {"a": np.ones(3)})


def test_page_embeds_plotly_and_escapes(body):
    """Default pages carry plotly.js inline and load nothing from elsewhere; text is escaped."""
    html = page_html("t <script>x</script>", [Section("h & <i>", figures=(bed_share_figure(body),),
                                                      table=(["a"], [["<b>"]]))])
    assert "<script>x</script>" not in html and "t &lt;script&gt;x&lt;/script&gt;" in html
    assert "&lt;b&gt;" in html and "h &amp; &lt;i&gt;" in html
    assert re.search(r"<script[^>]+src=", html) is None
    assert "plotly.js v" in html
    from plotly.offline import get_plotlyjs

    ours = html.replace(get_plotlyjs(), "")  # the page around the library: no remote resources
    assert len(ours) < len(html) and not re.search(r"(src|href)=\"https?:", ours)


def test_page_beside_writes_plotly_once(tmp_path, body):
    """plotlyjs='beside' refers to one plotly.min.js next to the pages and writes it only once."""
    sections = [Section("x", figures=(bed_share_figure(body),))]
    first = write_page(tmp_path / "a.html", "a", sections, plotlyjs="beside")
    second = write_page(tmp_path / "b.html", "b", sections, plotlyjs="beside")
    assert first == [tmp_path / "a.html", tmp_path / PLOTLY_FILE]
    assert second == [tmp_path / "b.html"]
    text = (tmp_path / "b.html").read_text()
    assert f'src="{PLOTLY_FILE}"' in text and len(text) < 1_000_000


def test_view_command_writes_page(tmp_path, capsys):
    out = tmp_path / "leg.html"
    assert main(["view", str(demo_path("leg")), "--color", "flow,pressure", "-o", str(out)]) == 0
    assert out.stat().st_size > 1_000_000
    assert str(out) in capsys.readouterr().out


def test_demo_writes_report_where_it_says(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    assert main(["demo"]) == 0
    printed = capsys.readouterr().out
    report = tmp_path / "vesselnet-demo" / "report.html"
    assert report.is_file() and "vesselnet-demo/report.html" in printed
    assert "share [%]" in printed  # the bed tables are still printed


@pytest.mark.parametrize("argv, message", [
    (["--color", "bogus"], "unknown quantity 'bogus'"),
    (["--scenario", "no-such-file.yaml", "x"], "no-such-file.yaml"),
])
def test_view_command_bad_options(tmp_path, capsys, argv, message):
    code = main(["view", str(demo_path("leg")), "-o", str(tmp_path / "v.html"), *argv])
    assert code == 2
    assert message in capsys.readouterr().err


def test_view_command_with_scenario(tmp_path, capsys):
    """--scenario FILE NAME puts the change view and the share comparison first."""
    out = tmp_path / "steal.html"
    name = "left feeder occluded"
    assert main(["view", str(demo_path("collateral")), "--scenario", str(demo_path("collateral_steal")),
                 name, "-o", str(out)]) == 0
    html = out.read_text()
    assert html.index(f"{name}: what changed") < html.index("Where the blood goes")
    assert "change in flow [mL\\u002fmin]" in html  # plotly escapes "/" inside the figure JSON
