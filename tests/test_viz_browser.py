"""The HTML pages in a real browser: headless Chromium (Debian package) driven by playwright.

The browser is the system's ``/usr/bin/chromium`` (never a browser download of
playwright's own); every request that is not a local file is aborted, so the
pages must draw offline.  Checks: every plot drew, the console stayed free of
errors, hovering a vessel shows its label with units, and ids made of markup
are shown as text and never run.  A screenshot of the demo report is saved
under ``test-artifacts/``.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pytest

from vesselnet.cli import main
from vesselnet.cli.demo import DEMO_SCENARIOS
from vesselnet.demos import DEMOS, demo_path
from vesselnet.scenarios import load_scenarios
from vesselnet.model import Network
from vesselnet.solve import solve

CHROMIUM = "/usr/bin/chromium"
ARGS = ["--headless=new", "--no-sandbox", "--disable-gpu", "--enable-unsafe-swiftshader",
        "--use-angle=swiftshader", "--disable-dev-shm-usage"]
ARTIFACTS = Path(__file__).resolve().parents[1] / "test-artifacts"
CRAFTED_VESSEL = '<img src=x onerror="window.__pwned=1">'
CRAFTED_BED = "<script>window.__pwned=2</script>"
DRAW_TIMEOUT_MS = 90_000


@pytest.fixture(scope="module")
def browser():
    assert os.path.exists(CHROMIUM), f"{CHROMIUM} missing: apt-get install -y chromium (.ci/run does)"
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=ARGS, headless=True)
        yield b
        b.close()


class Visit:
    """One page opened from disk with the network off; collects console errors and blocked requests."""

    def __init__(self, browser, path: Path):
        self.page = browser.new_page(viewport={"width": 1440, "height": 1000})
        self.errors: list[str] = []
        self.blocked: list[str] = []
        self.page.on("console", lambda m: self.errors.append(m.text) if m.type == "error" else None)
        self.page.on("pageerror", lambda e: self.errors.append(str(e)))
        self.page.route("**/*", self._route)
        self.page.goto(path.resolve().as_uri())
        self.page.wait_for_function("window.vesselnetDrawn === window.vesselnetFigures",
                                    timeout=DRAW_TIMEOUT_MS)

    def _route(self, route):
        url = route.request.url
        if url.startswith(("file:", "data:", "blob:")):
            route.continue_()
        else:
            self.blocked.append(url)
            route.abort()

    def hover_vessel(self, div_id: str, vessel: str) -> str:
        """Move the mouse onto a vessel's midpoint marker and return the hover label's text."""
        point = self.page.evaluate(
            """([id, vessel]) => {
                const gd = document.getElementById(id);
                const trace = gd._fullData.find(t => t.meta && t.meta.role === 'vessel-points'
                                                     && t.visible === true);
                const k = trace.text.findIndex(s => s.includes(vessel));
                const xa = gd._fullLayout.xaxis, ya = gd._fullLayout.yaxis;
                const at = () => {
                    const box = gd.getBoundingClientRect();
                    return [box.left + xa._offset + xa.l2p(trace.x[k]),
                            box.top + ya._offset + ya.l2p(trace.y[k])];
                };
                window.scrollBy(0, at()[1] - window.innerHeight / 2);
                return [...at(), k];
            }""", [div_id, vessel])
        assert point[2] >= 0, f"vessel {vessel} not in the figure"
        self.page.mouse.move(point[0] - 30, point[1] - 30)
        self.page.mouse.move(point[0], point[1], steps=5)
        label = self.page.wait_for_selector(f"#{div_id} .hoverlayer .hovertext", timeout=10_000)
        return label.text_content()


@pytest.fixture(scope="module")
def demo_report(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo") / "report.html"
    assert main(["demo", "-o", str(out)]) == 0
    return out


def test_demo_report_draws_offline_and_hovers(browser, demo_report):
    visit = Visit(browser, demo_report)
    page = visit.page
    plots = page.query_selector_all(".js-plotly-plot")
    scenarios = load_scenarios(demo_path(DEMO_SCENARIOS)).scenarios
    # two figures per demo network (view, bed shares) and per scenario (change view, shares)
    assert len(plots) == page.evaluate("window.vesselnetFigures") == 2 * (len(DEMOS) + len(scenarios))
    for plot in plots:
        assert plot.get_attribute("data-drawn") == "1"
        assert plot.query_selector(".main-svg") is not None
    # the network figures drew their vessel lines and midpoint arrows, the bar charts their bars
    assert page.locator("#vn-fig-1 .scatterlayer path.js-line").count() > 5
    assert page.locator("#vn-fig-1 .scatterlayer path.point").count() > 50
    assert page.locator("#vn-fig-2 .barlayer path").count() > 20
    label = visit.hover_vessel("vn-fig-3", "sfa_mid")
    assert "vessel sfa_mid" in label and "mmHg" in label and "mL/min" in label and "cm" in label
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / "demo-report.png"), full_page=True)
    page.locator("section").first.screenshot(path=str(ARTIFACTS / "demo-report-whole-body.png"))
    assert visit.errors == [] and visit.blocked == []
    page.close()


def test_buttons_switch_the_colouring(browser, demo_report):
    """The second button (mean pressure) shows the pressure traces and their colour bar title with its unit."""
    visit = Visit(browser, demo_report)
    page = visit.page
    titles = page.locator("#vn-fig-1 .cbtitle").all_text_contents()
    assert titles == ["flow [mL/min]"], titles
    page.locator("#vn-fig-1 .updatemenu-button").nth(1).click()  # second button: pressure
    page.wait_for_function("""() => document.querySelector('#vn-fig-1 .cbtitle') &&
        [...document.querySelectorAll('#vn-fig-1 .cbtitle')].some(e => e.textContent.includes("mean pressure [mmHg]"))""",
                           timeout=10_000)
    assert visit.errors == []
    page.close()


def test_crafted_ids_show_as_text(browser, tmp_path):
    """Markup in ids is shown literally in hover labels and bed labels, and never runs."""
    import viz

    net = Network.build(
        nodes={"root": {"pressure_pa": 12000.0, "position_m": (0.0, 0.0, 0.0)},
               "mid": {"position_m": (0.0, -0.1, 0.0)}, "tip": {"position_m": (0.05, -0.2, 0.0)}},
        vessels=[{"id": CRAFTED_VESSEL, "from": "root", "to": "mid", "length_m": 0.1, "radius_m": 2e-3},
                 {"id": "plain", "from": "mid", "to": "tip", "length_m": 0.11, "radius_m": 1.5e-3}],
        beds=[{"id": CRAFTED_BED, "node": "tip", "resistance_pa_s_m3": 1e9}], name="<b>name</b>")
    path = tmp_path / "crafted.html"
    viz.write_page(path, "<i>title</i>", [viz.result_section(solve(net))])
    visit = Visit(browser, path)
    page = visit.page
    label = visit.hover_vessel("vn-fig-1", "onerror")
    assert CRAFTED_VESSEL in label
    texts = page.locator("#vn-fig-1 .textpoint").all_text_contents()
    assert any(CRAFTED_BED in t for t in texts)
    assert page.evaluate("window.__pwned === undefined")
    assert page.locator("img[src='x']").count() == 0
    assert page.title() == "<i>title</i>"
    assert visit.errors == [] and visit.blocked == []
    assert np.isfinite(page.evaluate("window.vesselnetDone"))
    page.close()
