"""Page size and render time of network views, 10^3 and 10^5 vessels.

Run: ``python benchmarks/views.py [N ...]`` (default 1000 100000).  For each
size a binary Murray tree without positions (radial layout) is solved, its
view page written (plotly.js beside, so the size is the page's own data;
plus the embedded size), and the page opened in headless Chromium
(``/usr/bin/chromium``, network blocked) to time (median of three loads): navigation to
all plots drawn, a hover label after a mouse move, and a colouring switch.
The baseline, measured in the same run, is the obvious design this layer
avoids: one plotly trace per vessel (only at 10^3; at 10^5 it does not
finish in reasonable time).
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import plotly.graph_objects as go

from vesselnet.model import Network
from vesselnet.solve import solve

import viz
from viz.page import Section, write_page

MMHG_PA = 133.322387415
ARGS = ["--headless=new", "--no-sandbox", "--disable-gpu", "--enable-unsafe-swiftshader",
        "--use-angle=swiftshader", "--disable-dev-shm-usage"]


def murray_tree(n_vessels: int) -> Network:
    """Heap-numbered binary tree of ``n_vessels`` vessels, radii by Murray's law, a bed per leaf."""
    child = np.arange(1, n_vessels + 1)
    parent = (child - 1) // 2
    depth = np.floor(np.log2(child + 1))
    leaves = np.setdiff1d(np.arange(n_vessels + 1), parent)
    return Network.from_columns(
        vessels={"id": [f"v{c}" for c in child], "from": [f"n{p}" for p in parent],
                 "to": [f"n{c}" for c in child], "length_m": 0.03 * 0.8**depth,
                 "radius_m": 4e-3 * 2.0 ** (-depth / 3.0)},
        nodes={"id": ["n0"], "pressure_pa": [100 * MMHG_PA]},
        beds={"id": [f"bed{k}" for k in leaves], "node": [f"n{k}" for k in leaves],
              "resistance_pa_s_m3": np.full(len(leaves), 1e9 * len(leaves))},
        name=f"Murray tree, {n_vessels} vessels")


def trace_per_vessel(result) -> go.Figure:
    """The baseline: one line trace per vessel, colour by pressure."""
    place = viz.place_nodes(result.network, dims=2)
    v = result.network.vessels
    p = result.pressure_pa / MMHG_PA
    values = 0.5 * (p[v.from_node] + p[v.to_node])
    t = (values - values.min()) / max(np.ptp(values), 1e-12)
    from plotly.colors import sample_colorscale

    colours = sample_colorscale("Viridis", list(t))
    fig = go.Figure([go.Scatter(x=place.xyz[[a, b], 0], y=place.xyz[[a, b], 1], mode="lines",
                                line={"color": c, "width": 2}, name=i, showlegend=False)
                     for i, a, b, c in zip(v.ids, v.from_node, v.to_node, colours)])
    fig.update_layout(height=700)
    return fig


def browse(path: Path, browser, *, hover: bool = True) -> dict:
    page = browser.new_page(viewport={"width": 1440, "height": 1000})
    errors = []
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
    page.route("**/*", lambda r: r.continue_() if r.request.url.startswith(("file:", "data:", "blob:"))
               else r.abort())
    start = time.perf_counter()
    page.goto(path.resolve().as_uri())
    page.wait_for_function("window.vesselnetDrawn === window.vesselnetFigures", timeout=600_000)
    out = {"drawn_s": time.perf_counter() - start, "in_page_s": page.evaluate("window.vesselnetDone") / 1e3}
    if hover:
        box = page.locator("#vn-fig-1 .nsewdrag").first.bounding_box()
        page.mouse.move(box["x"] + 5, box["y"] + 5)
        t0 = time.perf_counter()
        # move through the drawing until a vessel's label shows
        for k in range(1, 60):
            page.mouse.move(box["x"] + box["width"] * (0.3 + 0.4 * k / 60), box["y"] + box["height"] * 0.5)
            if page.locator("#vn-fig-1 .hoverlayer .hovertext").count():
                break
        out["hover_s"] = time.perf_counter() - t0
        out["switch_s"] = float("nan")
        if page.locator("#vn-fig-1 .updatemenu-button").count() > 1:
            t0 = time.perf_counter()
            page.locator("#vn-fig-1 .updatemenu-button").nth(1).click()
            page.wait_for_function("[...document.querySelectorAll('#vn-fig-1 .cbtitle')]"
                                   ".some(e => e.textContent.includes('mean pressure'))", timeout=600_000)
            out["switch_s"] = time.perf_counter() - t0
    out["errors"] = len(errors)
    page.close()
    return out


def median_of(run, repeats: int = 3) -> dict:
    """Median of each timing over ``repeats`` fresh page loads (the machine is shared)."""
    runs = [run() for _ in range(repeats)]
    return {k: float(np.median([r[k] for r in runs])) for k in runs[0]}


def main(sizes: list[int]) -> None:
    from playwright.sync_api import sync_playwright

    folder = Path(tempfile.mkdtemp(prefix="vesselnet-views-"))
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path="/usr/bin/chromium", args=ARGS)
        for n in sizes:
            result = solve(murray_tree(n))
            t0 = time.perf_counter()
            section = viz.result_section(result)
            t_fig = time.perf_counter() - t0
            t0 = time.perf_counter()
            page = folder / f"tree{n}.html"
            write_page(page, result.network.name, [section], plotlyjs="beside")
            t_write = time.perf_counter() - t0
            embedded = folder / f"tree{n}-embedded.html"
            write_page(embedded, result.network.name, [section])
            traces = len(section.figures[0].data)
            stats = median_of(lambda: browse(page, browser))
            print(f"{n:>7} vessels  ours: {traces} traces, figures {t_fig:.2f} s, write {t_write:.2f} s, "
                  f"page {page.stat().st_size / 1e6:.2f} MB (+4.8 MB plotly.js beside; embedded "
                  f"{embedded.stat().st_size / 1e6:.2f} MB), drawn {stats['drawn_s']:.2f} s "
                  f"(in page {stats['in_page_s']:.2f} s), hover {stats['hover_s']:.2f} s, "
                  f"colour switch {stats['switch_s']:.2f} s, console errors {stats['errors']}")
            if n <= 5000:
                base = folder / f"tree{n}-per-vessel.html"
                t0 = time.perf_counter()
                write_page(base, "baseline", [Section("baseline", figures=(trace_per_vessel(result),))],
                           plotlyjs="beside")
                t_base = time.perf_counter() - t0
                stats = median_of(lambda: browse(base, browser, hover=False))
                print(f"{n:>7} vessels  baseline (one trace per vessel, colour only): build+write "
                      f"{t_base:.2f} s, page {base.stat().st_size / 1e6:.2f} MB, drawn "
                      f"{stats['drawn_s']:.2f} s")
        browser.close()
    print(f"pages in {folder}")


if __name__ == "__main__":
    main([int(a) for a in sys.argv[1:]] or [1000, 100000])
