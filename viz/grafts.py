"""HTML report of a graft ranking: the caution, the tables, and network pictures.

The pictures show the diseased state next to the best candidates, each
network coloured by mean pressure on one shared scale, the graft drawn
thick, occluded vessels dotted, lesions marked and target beds sized by
their flow.  The picture is this module's own simple one
(:func:`network_panel`): when the view layer's general network figure is
available, :func:`grafts_figure` is the one place to swap it in.  Nothing
here solves; every number comes from the ranking (through
:func:`vesselnet.grafts.ranking_json`, so the report shows what ``--json``
shows).
"""

from __future__ import annotations

import html
from pathlib import Path

import numpy as np
import plotly.graph_objects as go
import plotly.io as pio
from plotly.colors import sample_colorscale
from plotly.subplots import make_subplots

from vesselnet.grafts import GraftRanking, ranking_json
from vesselnet.units import MMHG_PA
from vesselnet.writers import atomic_write

BEST = 2
"""How many of the best candidates are pictured beside the diseased state."""

COLOURSCALE = "Viridis"
BINS = 9
GRAFT_COLOUR = "#c2185b"
OCCLUDED_COLOUR = "#9e9e9e"


def node_xy(network) -> np.ndarray:
    """Node coordinates for the picture: the frontal view (x, y) of the positions, in cm.

    Networks without positions for every node are laid out with a seeded
    spring layout instead.
    """
    xy = np.asarray(network.nodes.position_m, dtype=float)[:, :2] * 100.0
    if np.isfinite(xy).all():
        return xy
    import networkx as nx

    v = network.vessels
    graph = nx.Graph()
    graph.add_nodes_from(range(len(network.nodes)))
    graph.add_edges_from(zip(v.from_node.tolist(), v.to_node.tolist()))
    layout = nx.spring_layout(graph, seed=4242)
    return np.array([layout[i] for i in range(len(network.nodes))]) * 50.0


def _segments(xy, a, b, rows):
    xs, ys = [], []
    for r in rows:
        xs += [xy[a[r], 0], xy[b[r], 0], None]
        ys += [xy[a[r], 1], xy[b[r], 1], None]
    return xs, ys


def network_panel(result, *, graft: str | None, targets, pressure_range, baseline_bed_flow=None) -> list:
    """Traces of one network picture (see the module docstring)."""
    net = result.network
    v = net.vessels
    xy = node_xy(net)
    a, b = v.from_node, v.to_node
    mean_mmhg = 0.5 * (result.pressure_pa[a] + result.pressure_pa[b]) / MMHG_PA
    low, high = pressure_range
    graft_row = v.index.get(graft, -1) if graft else -1
    open_rows = np.flatnonzero(~v.occluded & (np.arange(len(v)) != graft_row))
    radius_mm = 1e3 * 0.5 * (v.radius_in_m + v.radius_out_m)
    widths = np.clip(1.0 + 1.2 * radius_mm, 1.5, 8.0).round()
    level = np.clip((np.nan_to_num(mean_mmhg - low) / max(high - low, 1e-9) * BINS).astype(int), 0, BINS - 1)
    colours = sample_colorscale(COLOURSCALE, [(k + 0.5) / BINS for k in range(BINS)])
    traces = []
    for k in range(BINS):
        for w in np.unique(widths[open_rows]):
            rows = open_rows[(level[open_rows] == k) & (widths[open_rows] == w)]
            if len(rows):
                xs, ys = _segments(xy, a, b, rows)
                traces.append(go.Scatter(x=xs, y=ys, mode="lines", hoverinfo="skip", showlegend=False,
                                         line={"color": colours[k], "width": float(w)}))
    closed = np.flatnonzero(v.occluded)
    if len(closed):
        xs, ys = _segments(xy, a, b, closed)
        traces.append(go.Scatter(x=xs, y=ys, mode="lines", name="occluded", hoverinfo="skip",
                                 line={"color": OCCLUDED_COLOUR, "width": 2, "dash": "dot"}))
    if graft_row >= 0:
        xs, ys = _segments(xy, a, b, [graft_row])
        traces.append(go.Scatter(x=xs, y=ys, mode="lines", name="graft", hoverinfo="skip",
                                 line={"color": GRAFT_COLOUR, "width": 6}))
    lesion = np.flatnonzero(~v.occluded & ~np.isnan(v.stenosis_reduction))
    if len(lesion):
        at = v.stenosis_at[lesion][:, None]
        point = xy[a[lesion]] + at * (xy[b[lesion]] - xy[a[lesion]])
        traces.append(go.Scatter(x=point[:, 0], y=point[:, 1], mode="markers", name="lesion",
                                 marker={"symbol": "x", "size": 11, "color": "#d84315"},
                                 text=[f"lesion in {v.ids[r]}: {100 * v.stenosis_reduction[r]:.0f} % diameter"
                                       for r in lesion], hoverinfo="text"))
    flow = result.vessel_flow_m3_s * 6e7
    mid = 0.5 * (xy[a] + xy[b])
    traces.append(go.Scatter(x=mid[:, 0], y=mid[:, 1], mode="markers", showlegend=False,
                             marker={"size": 8, "opacity": 0},
                             text=[f"{vid}<br>flow {q:.1f} mL/min<br>mean pressure {p:.1f} mmHg"
                                   for vid, q, p in zip(v.ids, flow, mean_mmhg)], hoverinfo="text"))
    beds = net.beds
    rows = np.array([beds.index[t] for t in targets], dtype=np.int64)
    bed_flow = result.bed_flow_m3_s[rows] * 6e7
    labels = [f"{beds.ids[r]}: {q:.1f} mL/min" for r, q in zip(rows, bed_flow)]
    if baseline_bed_flow is not None:
        labels = [f"{t} ({q - q0 * 6e7:+.1f} vs healthy)" for t, q, q0 in
                  zip(labels, bed_flow, baseline_bed_flow[rows])]
    at = xy[beds.node[rows]]
    traces.append(go.Scatter(x=at[:, 0], y=at[:, 1], mode="markers", name="target beds",
                             marker={"size": 6 + 2.0 * np.sqrt(np.maximum(bed_flow, 0)), "color": "#1565c0",
                                     "line": {"width": 1, "color": "white"}},
                             text=labels, hoverinfo="text"))
    return traces


def grafts_figure(ranking: GraftRanking, *, best: int = BEST) -> go.Figure:
    """The diseased network beside the ``best`` best candidates, one pressure colour scale."""
    shown = list(ranking.candidates[:best])
    results = [ranking.diseased] + [o.result for o in shown]
    titles = ["diseased state"] + [f"{o.rank}{'=' if o.tied else ''}. {o.id} "
                                   f"({100 * o.score:.1f} % restored)" for o in shown]
    pressures = np.concatenate([r.pressure_pa for r in results]) / MMHG_PA
    span = (float(np.nanmin(pressures)), float(np.nanmax(pressures)))
    fig = make_subplots(rows=1, cols=len(results), subplot_titles=[html.escape(t) for t in titles],
                        horizontal_spacing=0.03)
    for k, (result, title) in enumerate(zip(results, titles), start=1):
        graft = shown[k - 2].id if k >= 2 else None
        for trace in network_panel(result, graft=graft, targets=ranking.plan.targets, pressure_range=span,
                                   baseline_bed_flow=ranking.healthy.bed_flow_m3_s):
            trace.showlegend = bool(trace.showlegend is not False and k == len(results) and trace.name)
            fig.add_trace(trace, row=1, col=k)
        axis = "" if k == 1 else str(k)
        fig.update_xaxes(visible=False, row=1, col=k)
        fig.update_yaxes(visible=False, scaleanchor=f"x{axis}", scaleratio=1, row=1, col=k)
    fig.add_trace(go.Scatter(x=[None], y=[None], mode="markers", showlegend=False, hoverinfo="skip",
                             marker={"colorscale": COLOURSCALE, "cmin": span[0], "cmax": span[1],
                                     "color": [span[0]], "showscale": True,
                                     "colorbar": {"title": {"text": "mean pressure [mmHg]"}}}),
                  row=1, col=1)
    fig.update_layout(height=720, margin={"l": 10, "r": 10, "t": 60, "b": 10}, plot_bgcolor="white",
                      legend={"orientation": "h", "y": -0.02})
    return fig


STYLE = """
body { font-family: system-ui, sans-serif; margin: 0 auto; max-width: 1500px; padding: 16px 24px;
       color: #1f2328; }
.caution { border: 2px solid #b71c1c; background: #fff3f0; padding: 10px 14px; margin: 0 0 16px; }
table { border-collapse: collapse; font-size: 13px; margin: 6px 0 14px; font-variant-numeric: tabular-nums; }
th, td { padding: 3px 9px; border-bottom: 1px solid #e4e2dc; text-align: right; }
th:first-child, td:first-child { text-align: left; }
.note { font-size: 13px; color: #55595f; }
"""


def _cell(value, digits=1) -> str:
    if value is None:
        return "-"
    if isinstance(value, bool):
        return "yes" if value else ""
    if isinstance(value, (int, float)):
        return f"{value:.{digits}f}" if isinstance(value, float) else str(value)
    return html.escape(str(value))


def _table(headers, rows, text=(0,)) -> str:
    """An HTML table of escaped cells; columns ``text`` are left-aligned, the rest are numbers."""
    left = ' style="text-align: left"'
    head = "".join(f"<th{left if k in text else ''}>{html.escape(h)}</th>" for k, h in enumerate(headers))
    body = "".join("<tr>" + "".join(f"<td{left if k in text else ''}>{c}</td>" for k, c in enumerate(row))
                   + "</tr>" for row in rows)
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def grafts_page_html(ranking: GraftRanking, *, best: int = BEST) -> str:
    """The whole report as one offline HTML page (plotly.js embedded), the caution first."""
    doc = ranking_json(ranking)
    e = html.escape
    flow = doc["units"]["flow"]
    states = _table(["state", f"target flow [{flow}]", "lowest bed", "pressure [mmHg]", "perfusion [mmHg]",
                     "Pd/Pprox"],
                    [[name, _cell(s["target_flow"]), e(s["distal_bed"]), _cell(s["distal_pressure"]),
                      _cell(s["distal_perfusion_pressure"]), _cell(s["distal_pressure_ratio"], 3)]
                     for name, s in (("healthy", doc["healthy"]), ("diseased", doc["diseased"]))], (0, 2))
    ranked = _table(["rank", "candidate", "score [%]", f"target flow [{flow}]", "Pd/Pprox",
                     f"graft flow [{flow}]", "wss [Pa]", f"competing [{flow}]", "steal from", "steal [%]",
                     "flags"],
                    [[f"{c['rank']}{'=' if c['tied'] else ''}", e(c["id"]),
                      _cell(None if c["score"] is None else 100 * c["score"]),
                      _cell(c["target_flow"]), _cell(c["distal_pressure_ratio"], 3), _cell(c["graft_flow"]),
                      _cell(c["graft_wss"], 2), _cell(c["competing_flow"]),
                      e(c["steal"]["bed"]) if c["steal"] else "none",
                      _cell(c["steal"]["flow_change_percent"], 2) if c["steal"] else "-",
                      e(", ".join(f["code"] for f in c["flags"])) or "-"] for c in doc["candidates"]],
                    (0, 1, 8, 10))
    flags = "".join(f"<li><b>{e(c['id'])}</b>: {e(f['text'])}<br><span class='note'>source: "
                    f"{e(f['source'])}</span></li>" for c in doc["candidates"] for f in c["flags"])
    missing = sorted({m for c in doc["candidates"] for m in c["not_evaluated"]})
    parts = ["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
             f"<title>{e(doc['plan'])}</title><style>{STYLE}</style></head><body>",
             f'<div class="caution" id="caution"><b>Caution.</b> {e(doc["caution"])}</div>',
             f"<h1>{e(doc['plan'])}</h1>",
             f"<p>Network: {e(doc['network'])}. Targets: {e(', '.join(doc['targets']))}. Flag thresholds: "
             f"{e(doc['territory'] or 'no territory named')}.</p>",
             f"<p class='note'>Conditions: {e(doc['conditions'])}</p>",
             "<h2>Healthy and diseased</h2>", states,
             f"<p>Lost target flow: {_cell(doc['lost_flow'])} {e(flow)}</p>",
             "<h2>Ranking</h2>", f"<p class='note'>{e(doc['score_definition'])}</p>", ranked,
             "<h2>Flags</h2>", f"<ul>{flags}</ul>" if flags else "<p>none</p>"]
    if missing:
        parts.append("<p class='note'>Not evaluated in a steady analysis: " + e("; ".join(missing)) + "</p>")
    if "robustness" in doc:
        r = doc["robustness"]
        n = len(doc["candidates"])
        rows = [[e(c["id"])] + [str(x) for x in r["rank_counts"][c["id"]]] for c in doc["candidates"]]
        parts += ["<h2>Robustness</h2>",
                  f"<p>'{e(r['top'])}' stays first in {r['top_first']} of {r['samples'] - r['failed']} "
                  f"samples ({100 * (r['top_first_fraction'] or 0):.1f} %, seed {r['seed']}).</p>",
                  f"<p class='note'>{e(r['perturbations'])}</p>",
                  _table(["candidate"] + [f"rank {k + 1}" for k in range(n)], rows)]
    figure = pio.to_html(grafts_figure(ranking, best=best), full_html=False, include_plotlyjs=True,
                         div_id="vn-grafts", default_width="100%", default_height="720px")
    parts += ["<h2>Diseased state and the best candidates</h2>", figure, "</body></html>"]
    return "\n".join(parts)


def write_grafts_report(ranking: GraftRanking, path, *, best: int = BEST) -> Path:
    """Write the report to ``path`` (its folder created when missing); returns the path."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    atomic_write(path, grafts_page_html(ranking, best=best))
    return path
