"""Report sections: a result (network view, bed shares, bed table) and a scenario comparison.

The command line solves; these functions only arrange results into
:class:`viz.page.Section` objects for :func:`viz.page.write_page`.

Examples
--------
>>> from vesselnet.model import Network
>>> from vesselnet.solve import solve
>>> net = Network.build(nodes={"r": {"pressure_pa": 12000.0}},
...     vessels=[{"id": "a", "from": "r", "to": "t", "length_m": 0.1, "radius_m": 0.002}],
...     beds=[{"id": "organ", "node": "t", "resistance_pa_s_m3": 1e9}])
>>> section = result_section(solve(net))
>>> section.heading, len(section.figures), section.table[0][0]
('network', 2, 'bed')
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from vesselnet.result import SteadyResult
from vesselnet.units import DISPLAY_UNITS, from_si

from .charts import bed_share_figure, share_comparison_figure
from .layout import place_nodes
from .network import SVG_LIMIT, network_figure
from .page import Section
from .quantities import available

DEFAULT_COLORS = ("flow", "pressure", "wss")
TABLE_ROWS = 200
"""Beds listed in a page's table, largest share first."""
CAUTION = ("vesselnet is a research and planning aid, not a medical device: results are to be "
           "reviewed by licensed clinicians, deferring to local regulations and practice.")
HOW_TO_READ = ("Hover a vessel or bed for its values; the buttons switch the colouring; drag to "
               "zoom, double-click to reset.")


def figure_height(placement) -> int:
    """A height that suits the drawing's aspect (tall networks get tall figures)."""
    xyz = placement.xyz
    if placement.dims == 3 or not len(xyz):
        return 720
    extent = np.ptp(xyz, axis=0)
    aspect = float(extent[1] / extent[0]) if extent[0] > 0 else 3.0
    return int(np.clip(300 + 160 * aspect, 520, 960))


def bed_rows(result: SteadyResult) -> tuple[list[str], list[list]]:
    """Headers and rows of the bed table, largest share first (at most :data:`TABLE_ROWS`)."""
    beds = result.network.beds
    order = np.argsort(-np.nan_to_num(result.bed_share, nan=-1.0), kind="stable")
    flow = from_si(result.bed_flow_m3_s, "flow", DISPLAY_UNITS["flow"])
    pressure = from_si(result.bed_pressure_pa, "pressure", DISPLAY_UNITS["pressure"])
    perfusion = from_si(result.bed_perfusion_pressure_pa, "pressure", DISPLAY_UNITS["pressure"])
    headers = ["bed", f"flow [{DISPLAY_UNITS['flow']}]", "share [%]",
               f"pressure [{DISPLAY_UNITS['pressure']}]", f"perfusion pressure [{DISPLAY_UNITS['pressure']}]",
               "node"]
    rows = [[beds.ids[i], float(flow[i]), float(100 * result.bed_share[i]), float(pressure[i]),
             float(perfusion[i]), result.network.nodes.ids[beds.node[i]]] for i in order[:TABLE_ROWS]]
    if len(order) > TABLE_ROWS:
        rows.append([f"... {len(order) - TABLE_ROWS} more beds (all of them: vesselnet solve --json)",
                     "", "", "", "", ""])
    return headers, rows


def result_section(result: SteadyResult, *, colors: Sequence[str] | None = None, dims: int = 2,
                   heading: str | None = None, text: Sequence[str] = ()) -> Section:
    """A network view (buttons for ``colors``), the bed-share chart and the bed table.

    ``colors`` defaults to :data:`DEFAULT_COLORS`, or only its first for
    networks above :data:`viz.network.SVG_LIMIT` vessels (each quantity adds
    a full set of line traces to the page).
    """
    if colors is None:
        colors = DEFAULT_COLORS if len(result.network.vessels) <= SVG_LIMIT else DEFAULT_COLORS[:1]
    names = [c for c in colors if c in available(result)] or ["pressure"]
    placement = place_nodes(result.network, dims=dims)
    network = network_figure(result, color=names, dims=dims, placement=placement,
                             height=figure_height(placement))
    figures = (network, bed_share_figure(result)) if len(result.network.beds) else (network,)
    summary = result.summary().removeprefix(f"{result.network.name}: ")
    return Section(heading or result.network.name, text=(summary, *text), figures=figures,
                   table=bed_rows(result) if len(result.network.beds) else None, columns=2,
                   note=HOW_TO_READ)


def comparison_section(baseline: SteadyResult, scenario: SteadyResult, *, name: str,
                       color: str = "flow", dims: int = 2, vessel_origin=None,
                       text: Sequence[str] = ()) -> Section:
    """A scenario against its baseline: change view and bed shares side by side.

    ``vessel_origin`` as in :func:`viz.network.network_figure` (default: match vessels by id).
    """
    base_place = place_nodes(baseline.network, dims=dims)
    placement = place_nodes(scenario.network, dims=dims, like=base_place)
    network = network_figure(scenario, color=color, baseline=baseline, dims=dims, placement=placement,
                             title=name, height=figure_height(placement),
                             vessel_origin=vessel_origin)
    shares = share_comparison_figure(baseline, scenario, name=name)
    summary = scenario.summary().removeprefix(f"{scenario.network.name}: ")
    return Section(f"{name}: what changed", text=(*text, summary), figures=(network, shares),
                   table=bed_rows(scenario), columns=2,
                   note="Colour: change against the baseline (orange more, blue less, grey unchanged); "
                        "magenta halo: vessels the scenario changed; dashed: added; dotted: removed; "
                        "rings: flow reversed.")
