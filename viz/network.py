"""The network figure: vessels coloured by a result, width by radius, flow direction, beds.

One figure shows a steady result in 2-D (the file's x-y plane) or 3-D.
Vessels are drawn as a few line traces, one per colour class and width
class (never one per vessel), so 10^5 vessels stay
responsive; one marker trace at the vessel midpoints carries the hover
text, the colour bar and, in 2-D, an arrowhead pointing along the flow.
Given a baseline result, vessels are coloured by the change against it on a
diverging scale centred on zero, and vessels the scenario changed, added or
removed are marked.  Several quantities may be offered at once: buttons
switch between them.

Examples
--------
>>> from vesselnet.model import Network
>>> from vesselnet.solve import solve
>>> net = Network.build(nodes={"r": {"pressure_pa": 12000.0, "position_m": (0, 0, 0)},
...                            "t": {"position_m": (0, -0.1, 0)}},
...     vessels=[{"id": "a", "from": "r", "to": "t", "length_m": 0.1, "radius_m": 0.002}],
...     beds=[{"id": "organ", "node": "t", "resistance_pa_s_m3": 1e9}])
>>> fig = network_figure(solve(net), color="pressure")
>>> [t.meta["role"] for t in fig.data]
['vessels', 'vessel-points', 'bed-leaders', 'bed-labels', 'beds']
>>> fig.data[1].marker.colorbar.title.text
'mean pressure [mmHg]'
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import plotly.graph_objects as go

from vesselnet.result import SteadyResult
from vesselnet.units import DISPLAY_UNITS, from_si

from . import palette
from .bins import ColourScale, colour_scale, width_classes
from .layout import Placement, place_nodes
from .markup import plain
from .quantities import quantity, vessel_values

WIDTH_CLASSES = 5
SVG_LIMIT = 3000
"""Up to this many vessels 2-D views draw as SVG; above it with WebGL."""
ARROW_LIMIT = 600
"""Up to this many vessels every vessel gets an arrowhead; above it only the widest."""
ARROW_COUNT = 300
LABEL_COUNT = 24
"""Beds labelled on the figure (largest shares first); all have hover text."""
LABEL_MIN_SHARE = 0.5
"""Beds below this share of total inflow (percent) are not labelled on the figure."""
FRONT_CAMERA = {"eye": {"x": 0.45, "y": 0.15, "z": 1.55}, "up": {"x": 0, "y": 1, "z": 0}}
"""3-D views start from the front (looking down the z axis, y up), as the plane view does."""
TITLE_BREAK = 48
"""Headings longer than this many characters leave the quantity to the colour bar."""
CHANGE_TOLERANCE = 1e-9
"""Relative difference below which a vessel property counts as unchanged."""


def network_figure(result: SteadyResult, *, color: str | Sequence[str] = "pressure",
                   baseline: SteadyResult | None = None, dims: int = 2,
                   placement: Placement | None = None, title: str | None = None,
                   height: int = 760, vessel_origin=None) -> go.Figure:
    """An interactive figure of the network coloured by result quantities.

    Parameters
    ----------
    result : SteadyResult
        The solution to show (never re-solved).
    color : str or sequence of str
        Quantity names (see :data:`viz.quantities.QUANTITIES`); several give
        buttons to switch, the first shown.
    baseline : SteadyResult, optional
        Colour by the change ``result - baseline`` instead, vessels matched
        by id; vessels changed, added or removed by the scenario are marked.
    dims : {2, 3}
    placement : Placement, optional
        Node coordinates (default: :func:`viz.layout.place_nodes`, lined up
        with the baseline's when one is given).
    title : str, optional
        Title text (escaped); default the network's name.
    height : int
        Figure height in pixels.
    vessel_origin : array_like of int, optional
        With a baseline: the baseline row each vessel stems from (-1 for new
        ones), for example the pieces of a split vessel
        (:attr:`vesselnet.compare.ScenarioOutcome.vessel_origin`); default
        matching by id.

    Returns
    -------
    plotly.graph_objects.Figure
        Traces carry ``meta['role']``: ``vessels`` (lines of one colour and
        width class, ``meta['range']`` its value range), ``vessel-points``
        (hover, colour bar and arrows), ``arrows``, ``beds``, ``bed-labels``,
        ``bed-leaders``, ``changed``, ``added``, ``removed``, ``reversed``.
    """
    names = [color] if isinstance(color, str) else list(color)
    for name in names:
        quantity(name)
    net = result.network
    base_place = None
    if placement is None:
        if baseline is not None:
            base_place = place_nodes(baseline.network, dims=dims)
            placement = place_nodes(net, dims=dims, like=base_place)
        else:
            placement = place_nodes(net, dims=dims)
    dims = placement.dims
    v = net.vessels
    xyz = np.asarray(placement.xyz, dtype=float)
    start, end = xyz[v.from_node], xyz[v.to_node]
    radius_m = result.vessel_mean_radius_m
    width_class = width_classes(radius_m, WIDTH_CLASSES)
    big = len(v) > SVG_LIMIT
    widths = np.linspace(0.6, 4.0, WIDTH_CLASSES) if big else np.linspace(1.6, 9.0, WIDTH_CLASSES)

    matched = None
    if baseline is not None:
        if vessel_origin is not None:
            matched = np.asarray(vessel_origin, dtype=np.int64).reshape(len(v))
        else:
            index = baseline.network.vessels.index
            matched = np.array([index.get(i, -1) for i in v.ids], dtype=np.int64)

    shared: list = []
    if baseline is not None:
        shared += _scenario_marks(result, baseline, matched, start, end, widths[width_class], dims,
                                  base_place or place_nodes(baseline.network, dims=dims))
    per_quantity: list[list] = []
    shown_list = []
    for k, name in enumerate(names):
        group, shown = _quantity_traces(result, name, baseline, matched, start, end, width_class,
                                        widths, dims, big, visible=k == 0)
        per_quantity.append(group)
        shown_list.append(shown)
    if big:
        shared.append(_points(result, shown_list, start, end, dims, big, True))
    arrows = _arrow_traces(result, start, end, radius_m, dims, big)
    beds, xrange = _bed_trace(result, baseline, xyz, dims, height)
    traces = shared[:1] + [t for group in per_quantity for t in group] + shared[1:] + arrows + beds
    fig = go.Figure(data=traces)
    heading = plain(title if title is not None else net.name)
    fig.update_layout(palette.base_layout())
    fig.update_layout(height=height, hovermode="closest",
                      title={"text": _title(heading, names[0], baseline is not None),
                             "subtitle": {"text": _caption(result, placement, big)},
                             "x": 0.01, "xanchor": "left", "y": 0.995, "yref": "container",
                             "yanchor": "top", "pad": {"t": 8}},
                      legend={"orientation": "h", "y": 1.0, "yanchor": "bottom", "x": 1.0,
                              "xanchor": "right", "font": {"size": 11}},
                      margin={"t": 112})
    _axes(fig, placement)
    if xrange and dims == 2:
        fig.update_xaxes(**xrange)
    if len(names) > 1:
        fig.update_layout(updatemenus=[_buttons(heading, names, traces, per_quantity,
                                                baseline is not None)])
    return fig


def _title(heading: str, name: str, change: bool) -> str:
    q = quantity(name)
    if len(heading) > TITLE_BREAK:  # the colour bar names the quantity
        return f"<b>{heading}</b>"
    return f"<b>{heading}</b>: {'change in ' if change else ''}{q.label}"


def _caption(result: SteadyResult, placement: Placement, big: bool) -> str:
    r_mm = from_si(result.vessel_mean_radius_m, "length", "mm")
    finite = r_mm[np.isfinite(r_mm)]
    lo, hi = (f"{finite.min():.2g}", f"{finite.max():.2g}") if len(finite) else ("", "")
    span = "" if not lo else f" ({lo} mm)" if lo == hi else f" ({lo}-{hi} mm)"
    flat = placement.dims == 2
    parts = [f"line width: vessel radius{span}",
             ("arrowheads" if flat else "cones") + ": flow direction"
             + (" (widest vessels)" if big or not flat else ""),
             ("squares" if flat else "diamonds") + ": beds with their share of total inflow"]
    text = " · ".join(parts)
    if placement.computed:
        text += "<br>layout drawn from the connections (the file gives no node positions)"
    return text


def _axes(fig: go.Figure, placement: Placement) -> None:
    if placement.dims == 2:
        if placement.computed:
            hidden = {"visible": False}
            fig.update_xaxes(**hidden)
            fig.update_yaxes(**hidden, scaleanchor="x", scaleratio=1)
        else:
            fig.update_xaxes(**palette.axis_style(), title=f"{placement.axes[0]} [{placement.unit}]")
            fig.update_yaxes(**palette.axis_style(), title=f"{placement.axes[1]} [{placement.unit}]",
                             scaleanchor="x", scaleratio=1)
        return
    if placement.computed:
        axis = {"visible": False}
        titles = [axis, axis, axis]
    else:
        titles = [{"title": {"text": f"{a} [{placement.unit}]"}, "backgroundcolor": palette.PLOT,
                   "gridcolor": palette.GRID, "showbackground": True} for a in placement.axes]
    extent = np.ptp(placement.xyz, axis=0) if len(placement.xyz) else np.ones(3)
    ratio = np.clip(extent / max(float(extent.max()), 1e-12), 0.15, 1.0)
    fig.update_layout(scene={"xaxis": titles[0], "yaxis": titles[1], "zaxis": titles[2],
                             "aspectmode": "manual", "camera": FRONT_CAMERA,
                             "aspectratio": dict(zip("xyz", ratio.tolist()))})


def _segments(start: np.ndarray, end: np.ndarray, rows: np.ndarray, dtype) -> list[np.ndarray]:
    """x, y(, z) arrays of the segments ``rows``, each followed by a gap."""
    out = []
    for k in range(start.shape[1]):
        pts = np.empty((len(rows), 3), dtype=dtype)
        pts[:, 0] = start[rows, k]
        pts[:, 1] = end[rows, k]
        pts[:, 2] = np.nan
        out.append(pts.ravel())
    return out


def _line(dims: int, big: bool, coords: list[np.ndarray], **kwargs):
    axes = dict(zip("xyz", coords))
    if dims == 3:
        return go.Scatter3d(mode="lines", **axes, **kwargs)
    cls = go.Scattergl if big else go.Scatter
    return cls(mode="lines", **axes, **kwargs)


def _markers(dims: int, big: bool, coords: list[np.ndarray], **kwargs):
    axes = dict(zip("xyz", coords))
    if dims == 3:
        return go.Scatter3d(**axes, **kwargs)
    cls = go.Scattergl if big else go.Scatter
    return cls(**axes, **kwargs)


def _values(result, name, baseline, matched):
    """Colour values, and (baseline values, scenario values) when comparing."""
    now = vessel_values(result, name)
    if baseline is None:
        return now, None
    before = np.full(len(now), np.nan)
    hit = matched >= 0
    before[hit] = vessel_values(baseline, name)[matched[hit]]
    return now - before, (before, now)


def _quantity_traces(result, name, baseline, matched, start, end, width_class, widths, dims, big,
                     *, visible):
    """Line traces of one quantity, then its midpoint trace (small views) or colour-bar stub (large)."""
    q = quantity(name)
    values, pair = _values(result, name, baseline, matched)
    scale = colour_scale(values, diverging=baseline is not None, log=q.log_scale)
    colour_class = scale.classes(values)
    dtype = np.float32 if big else np.float64
    traces = []
    for c in range(-1, scale.count):
        in_class = colour_class == c
        if not in_class.any():
            continue
        edges = scale.edges
        value_range = [float(edges[c]), float(edges[c + 1])] if c >= 0 else [None, None]
        for w in range(len(widths)):
            rows = np.flatnonzero(in_class & (width_class == w))
            if not len(rows):
                continue
            colour = scale.colours[c] if c >= 0 else palette.NO_VALUE
            traces.append(_line(dims, big, _segments(start, end, rows, dtype),
                                line={"color": colour, "width": float(widths[w])},
                                hoverinfo="skip", showlegend=False, visible=visible,
                                meta={"role": "vessels", "quantity": name, "range": value_range,
                                      "width_px": float(widths[w]), "count": int(len(rows))}))
    shown = (q, values, pair, scale)
    if big:
        traces.append(_colour_bar(shown, start, end, dims, visible))
    else:
        traces.append(_points(result, [shown], start, end, dims, big, visible))
    return traces, shown


def _colour_bar_spec(q, pair, scale: ColourScale) -> dict:
    cmin, cmax = scale.axis
    colorbar = {"title": {"text": ("change in " if pair is not None else "") + q.title, "side": "right"},
                "thickness": 14, "len": 0.75, "outlinewidth": 0, **scale.ticks()}
    marker = {"colorscale": scale.plotly_scale(), "cmin": cmin, "cmax": cmax, "showscale": True,
              "colorbar": colorbar}
    if scale.diverging:
        marker["cmid"] = 0.0
    return marker


def _colour_bar(shown, start, end, dims, visible):
    """A two-point invisible trace that only carries a colour bar (large views)."""
    q, _, pair, scale = shown
    at = 0.5 * (start[:1] + end[:1]) if len(start) else np.zeros((1, dims))
    marker = _colour_bar_spec(q, pair, scale)
    marker.update(color=list(scale.axis), size=1, opacity=0.0)
    return _markers(dims, True, [np.repeat(at[:, i], 2) for i in range(dims)], mode="markers",
                    marker=marker, hoverinfo="skip", showlegend=False, visible=visible,
                    meta={"role": "colour-bar", "quantity": q.name, "unit": q.unit,
                          "change": pair is not None, "log": scale.log})


def _points(result, shown_list, start, end, dims, big, visible):
    """Midpoint markers with the hover text of every vessel.

    Small views: one per quantity, coloured, carrying the colour bar and (2-D)
    an arrowhead along the flow.  Large views: one shared, invisible trace
    whose hover lists every quantity.
    """
    net = result.network
    v = net.vessels
    mid = 0.5 * (start + end)
    flow = from_si(result.vessel_flow_m3_s, "flow", DISPLAY_UNITS["flow"])
    columns, lines = [], ["vessel <b>%{text}</b>" + ("" if big else "<br>%{hovertext}")]
    for q, values, pair, _ in shown_list:
        k = len(columns)
        columns.append(values)
        if pair is None:
            lines.append(f"{q.label}: %{{customdata[{k}]:.4g}} {q.unit}")
        else:
            columns += [pair[0], pair[1]]
            lines.append(f"change in {q.label}: %{{customdata[{k}]:+.3g}} {q.unit}")
            lines.append(f"baseline %{{customdata[{k + 1}]:.4g}}, now %{{customdata[{k + 2}]:.4g}} {q.unit}")
    k = len(columns)
    columns += [flow, from_si(result.vessel_pressure_drop_pa, "pressure", DISPLAY_UNITS["pressure"]),
                from_si(v.length_m, "length", "cm"), from_si(result.vessel_mean_radius_m, "length", "mm"),
                result.vessel_wss_pa]
    lines += [f"flow %{{customdata[{k}]:.4g}} {DISPLAY_UNITS['flow']} (+ from → to)",
              f"pressure drop %{{customdata[{k + 1}]:.3g}} {DISPLAY_UNITS['pressure']}",
              f"length %{{customdata[{k + 2}]:.3g}} cm, mean radius %{{customdata[{k + 3}]:.3g}} mm",
              f"wall shear stress %{{customdata[{k + 4}]:.3g}} {DISPLAY_UNITS['wss']}"]
    nodes = net.nodes.ids
    text = [plain(i) for i in v.ids]
    ends = None if big else [f"{plain(nodes[a])} → {plain(nodes[b])}"
                             for a, b in zip(v.from_node.tolist(), v.to_node.tolist())]
    dtype = np.float32 if big else np.float64
    meta = {"role": "vessel-points", "quantities": [q.name for q, *_ in shown_list]}
    if big:
        marker = {"size": 4, "opacity": 0.0, "color": palette.ARROW_OUTLINE}
    else:
        q, values, pair, scale = shown_list[0]
        marker = _colour_bar_spec(q, pair, scale)
        marker["color"] = scale.position(values)
        meta.update(quantity=q.name, unit=q.unit, change=pair is not None, log=scale.log)
        if dims == 2 and len(v) > ARROW_LIMIT:
            marker.update(size=6, opacity=0.0)
        elif dims == 2:
            angle, moving = _screen_angle(result, start, end)
            marker.update(symbol=np.where(moving, "triangle-up", "circle"), angle=angle,
                          size=np.where(moving, 11, 6), line={"color": palette.ARROW_OUTLINE, "width": 1})
        else:
            marker.update(size=np.clip(from_si(result.vessel_mean_radius_m, "length", "mm"), 2, 5),
                          opacity=0.9)
    return _markers(dims, big, [mid[:, i].astype(dtype) for i in range(dims)], mode="markers",
                    marker=marker, text=text, hovertext=ends, customdata=np.column_stack(columns).astype(dtype),
                    hovertemplate="<br>".join(lines) + "<extra></extra>", showlegend=False,
                    visible=True if big else visible, name="vessels", meta=meta)


def _screen_angle(result: SteadyResult, start, end):
    """Marker angle (degrees clockwise from up) along the flow, and which vessels carry flow."""
    d = end - start
    q = result.vessel_flow_m3_s
    scale = max(float(np.abs(q).max(initial=0.0)), 1e-300)
    moving = np.abs(q) > 1e-9 * scale
    d = np.where((q < 0)[:, None], -d, d)
    return np.degrees(np.arctan2(d[:, 0], d[:, 1])), moving


def _arrow_traces(result, start, end, radius_m, dims, big) -> list:
    """Direction marks for large 2-D views and for 3-D views (the widest vessels)."""
    n = len(radius_m)
    if dims == 2 and n <= ARROW_LIMIT:
        return []
    q = result.vessel_flow_m3_s
    order = np.argsort(-np.nan_to_num(radius_m, nan=0.0), kind="stable")
    scale = max(float(np.abs(q).max(initial=0.0)), 1e-300)
    rows = np.array([i for i in order[: 4 * ARROW_COUNT] if abs(q[i]) > 1e-9 * scale][:ARROW_COUNT],
                    dtype=np.int64)
    if not len(rows):
        return []
    mid = 0.5 * (start[rows] + end[rows])
    meta = {"role": "arrows", "count": int(len(rows))}
    if dims == 2:
        angle = _angles(q[rows], start[rows], end[rows])
        return [(go.Scattergl if big else go.Scatter)(x=mid[:, 0], y=mid[:, 1], mode="markers", hoverinfo="skip",
                             showlegend=False, meta=meta,
                             marker={"symbol": "triangle-up", "angle": angle, "size": 8,
                                     "color": palette.ARROW_OUTLINE})]
    d = end[rows] - start[rows]
    d = np.where((q[rows] < 0)[:, None], -d, d)
    norm = np.linalg.norm(d, axis=1, keepdims=True)
    extent = float(np.ptp(np.vstack([start, end]), axis=0).max()) or 1.0
    u = d / np.where(norm > 0, norm, 1.0) * 0.012 * extent
    return [go.Cone(x=mid[:, 0], y=mid[:, 1], z=mid[:, 2], u=u[:, 0], v=u[:, 1], w=u[:, 2],
                    anchor="center", sizemode="raw", sizeref=1.0, showscale=False, hoverinfo="skip",
                    colorscale=[[0, palette.CONE], [1, palette.CONE]], meta=meta)]


def _angles(q, start, end):
    d = np.where((q < 0)[:, None], -(end - start), end - start)
    return np.degrees(np.arctan2(d[:, 0], d[:, 1]))


def _bed_trace(result: SteadyResult, baseline, xyz, dims, height) -> tuple[list, dict]:
    """Bed markers with hover, and labels (2-D: callouts at the sides, spread apart).

    Returns the traces and the x range that keeps the 2-D labels in view.
    """
    net = result.network
    beds = net.beds
    if not len(beds):
        return [], {}
    share = 100 * result.bed_share
    flow = from_si(result.bed_flow_m3_s, "flow", DISPLAY_UNITS["flow"])
    pressure = from_si(result.bed_pressure_pa, "pressure", DISPLAY_UNITS["pressure"])
    perfusion = from_si(result.bed_perfusion_pressure_pa, "pressure", DISPLAY_UNITS["pressure"])
    before = np.full(len(beds), np.nan)
    if baseline is not None:
        index = baseline.network.beds.index
        rows = np.array([index.get(b, -1) for b in beds.ids], dtype=np.int64)
        before[rows >= 0] = 100 * baseline.bed_share[rows[rows >= 0]]
    order = np.argsort(-np.nan_to_num(share, nan=-1.0), kind="stable")
    top = order[:LABEL_COUNT if dims == 2 else LABEL_COUNT // 3]
    labelled = np.sort(top[np.nan_to_num(share[top]) >= LABEL_MIN_SHARE])
    labels = []
    for i in labelled:
        text = f"{plain(beds.ids[i])} {share[i]:.1f} %"
        if baseline is not None and np.isfinite(before[i]):
            text += f" ({share[i] - before[i]:+.1f})"
        labels.append(text)
    pos = xyz[beds.node]
    node_ids = net.nodes.ids
    hover = ["<b>bed %{hovertext}</b>", "node %{text}", f"flow %{{customdata[0]:.4g}} {DISPLAY_UNITS['flow']}",
             "share of total inflow %{customdata[1]:.2f} %"]
    if baseline is not None:
        hover.append("baseline share %{customdata[4]:.2f} %")
    hover += [f"pressure %{{customdata[2]:.4g}} {DISPLAY_UNITS['pressure']}",
              f"perfusion pressure %{{customdata[3]:.4g}} {DISPLAY_UNITS['pressure']}"]
    dtype = np.float32 if len(beds) > SVG_LIMIT else np.float64
    customdata = np.column_stack([flow, share, pressure, perfusion, before]).astype(dtype)
    names = [plain(b) for b in beds.ids]
    at_nodes = [plain(node_ids[n]) for n in beds.node.tolist()]
    smallest = 7 if len(beds) <= SVG_LIMIT else 3
    size = (smallest + 16 * np.sqrt(np.clip(np.nan_to_num(share), 0, 100) / 100)).astype(dtype)
    common = dict(customdata=customdata, name="beds", hovertemplate="<br>".join(hover) + "<extra></extra>",
                  showlegend=False, meta={"role": "beds"}, hovertext=names, text=at_nodes)
    font = {"size": 11, "color": palette.TEXT}
    if dims == 3:
        text = np.full(len(beds), "", dtype=object)
        text[labelled] = labels
        common.update(text=text, hovertemplate=common["hovertemplate"].replace("node %{text}<br>", ""))
        return [go.Scatter3d(x=pos[:, 0], y=pos[:, 1], z=pos[:, 2], mode="markers+text",
                             textposition="middle right", textfont=font, **common,
                             marker={"symbol": "diamond", "size": size * 0.6, "color": palette.BED,
                                     "line": {"color": "#ffffff", "width": 1}})], {}
    marker = {"symbol": "square", "size": size, "color": palette.BED,
              "line": {"color": "#ffffff", "width": 1.5}}
    if len(beds) > SVG_LIMIT:
        markers = go.Scattergl(x=pos[:, 0].astype(dtype), y=pos[:, 1].astype(dtype), mode="markers",
                               **common, marker=marker)
    else:
        markers = go.Scatter(x=pos[:, 0], y=pos[:, 1], mode="markers", **common, cliponaxis=False,
                             marker=marker)
    callouts, xrange = _callouts(xyz, pos[labelled], labels, height)
    return callouts + [markers], xrange


def _callouts(xyz, at, labels, height) -> tuple[list, dict]:
    """Labels in two columns beside the drawing, spread apart, with leader lines to their beds."""
    if not len(labels):
        return [], {}
    lo, hi = xyz.min(axis=0), xyz.max(axis=0)
    span = np.maximum(hi - lo, 1e-9)
    plot_px = max(height - 190, 200)
    per_px = max(span[1] / plot_px, span[0] / 700)
    gap = 26 * per_px
    step = 15 * per_px
    centre = 0.5 * (lo[0] + hi[0])
    line_x, line_y, text_x, text_y, text, side = [], [], [], [], [], []
    widest = {"left": 0, "right": 0}
    for name, pick in (("right", at[:, 0] >= centre), ("left", at[:, 0] < centre)):
        rows = np.flatnonzero(pick)
        if not len(rows):
            continue
        rows = rows[np.argsort(-at[rows, 1], kind="stable")]
        y = at[rows, 1].astype(float)
        for k in range(1, len(y)):
            y[k] = min(y[k], y[k - 1] - step)
        low = lo[1] - 2 * step
        if y[-1] < low:
            y[-1] = low
            for k in range(len(y) - 2, -1, -1):
                y[k] = max(y[k], y[k + 1] + step)
        x = hi[0] + gap if name == "right" else lo[0] - gap
        for r, yk in zip(rows, y):
            line_x += [at[r, 0], x, np.nan]
            line_y += [at[r, 1], yk, np.nan]
            text_x.append(x)
            text_y.append(yk)
            text.append(labels[r])
            side.append("middle right" if name == "right" else "middle left")
            widest[name] = max(widest[name], len(labels[r]))
    leaders = go.Scatter(x=line_x, y=line_y, mode="lines", hoverinfo="skip", showlegend=False,
                         line={"color": "#a3a7ad", "width": 0.8}, meta={"role": "bed-leaders"})
    names = go.Scatter(x=text_x, y=text_y, mode="text", text=text, textposition=side, hoverinfo="skip",
                       showlegend=False, cliponaxis=False, textfont={"size": 11, "color": palette.TEXT},
                       meta={"role": "bed-labels"})
    char = 6.4 * per_px
    xrange = [min(lo[0], lo[0] - gap - char * widest["left"] - 4 * per_px) if widest["left"] else lo[0] - gap,
              max(hi[0], hi[0] + gap + char * widest["right"] + 4 * per_px) if widest["right"]
              else hi[0] + gap]
    return [leaders, names], {"range": xrange}


def _scenario_marks(result, baseline, matched, start, end, width_px, dims, base_place) -> list:
    """Halo under changed vessels (first), then added, removed and reversed marks."""
    v, b = result.network.vessels, baseline.network.vessels
    hit = matched >= 0
    changed = np.zeros(len(v), dtype=bool)
    if hit.any():
        rows = matched[hit]
        differs = np.zeros(int(hit.sum()), dtype=bool)
        for column in ("length_m", "radius_in_m", "radius_out_m", "stenosis_reduction",
                       "stenosis_length_m", "stenosis_at", "wall_thickness_m", "wall_modulus_pa"):
            now, before = getattr(v, column)[hit], getattr(b, column)[rows]
            both_nan = np.isnan(now) & np.isnan(before)
            rel = np.abs(now - before) > CHANGE_TOLERANCE * np.maximum(np.abs(before), 1e-300)
            differs |= ~both_nan & (rel | (np.isnan(now) != np.isnan(before)))
        differs |= v.occluded[hit] != b.occluded[rows]
        ends_now = np.array([(result.network.nodes.ids[x], result.network.nodes.ids[y])
                             for x, y in zip(v.from_node[hit], v.to_node[hit])], dtype=object)
        ends_before = np.array([(baseline.network.nodes.ids[x], baseline.network.nodes.ids[y])
                                for x, y in zip(b.from_node[rows], b.to_node[rows])], dtype=object)
        if len(ends_now):
            differs |= (ends_now != ends_before).any(axis=1)
        changed[hit] = differs
    marks = []
    rows = np.flatnonzero(changed)
    marks.append(_line(dims, False, _segments(start, end, rows, float), name="changed by the scenario",
                       line={"color": palette.CHANGED_HALO, "width": float(np.max(width_px, initial=4)) + 8},
                       hoverinfo="skip", showlegend=bool(len(rows)), meta={"role": "changed",
                                                                          "count": int(len(rows))}))
    added = np.flatnonzero(~hit)
    if len(added):
        line = {"color": palette.ADDED, "width": 2.5}
        if dims == 2:
            line["dash"] = "dash"
        marks.append(_line(dims, False, _segments(start, end, added, float), name="added by the scenario",
                           line=line, hoverinfo="skip", meta={"role": "added", "count": int(len(added))}))
    present = np.zeros(len(b), dtype=bool)
    present[matched[hit]] = True
    removed = np.flatnonzero(~present)
    if len(removed):
        bxyz = base_place.xyz
        line = {"color": palette.REMOVED, "width": 2.5}
        if dims == 2:
            line["dash"] = "dot"
        marks.append(_line(dims, False, _segments(bxyz[b.from_node], bxyz[b.to_node], removed, float),
                           name="removed by the scenario", line=line, hoverinfo="skip",
                           meta={"role": "removed", "count": int(len(removed))}))
    q_now = result.vessel_flow_m3_s
    q_before = np.zeros(len(v))
    q_before[hit] = baseline.vessel_flow_m3_s[matched[hit]]
    tiny = 1e-9 * max(float(np.abs(q_now).max(initial=0.0)), float(np.abs(q_before).max(initial=0.0)), 1e-300)
    flipped = np.flatnonzero(hit & (np.abs(q_now) > tiny) & (np.abs(q_before) > tiny)
                             & (np.sign(q_now) != np.sign(q_before)))
    if len(flipped):
        mid = 0.5 * (start[flipped] + end[flipped])
        marks.append(_markers(dims, False, [mid[:, i] for i in range(dims)], mode="markers",
                              name="flow reversed", hoverinfo="skip",
                              marker={"symbol": "circle-open", "size": 22,
                                      "color": palette.REVERSED, "line": {"width": 2}},
                              meta={"role": "reversed", "count": int(len(flipped))}))
    return marks


def _buttons(heading, names, traces, per_quantity, change) -> dict:
    owner = {}
    for k, group in enumerate(per_quantity):
        for t in group:
            owner[id(t)] = k
    buttons = []
    for k, name in enumerate(names):
        visible = [owner.get(id(t), k) == k for t in traces]
        buttons.append({"label": quantity(name).label, "method": "update",
                        "args": [{"visible": visible}, {"title.text": _title(heading, name, change)}]})
    return {"type": "buttons", "direction": "right", "buttons": buttons, "showactive": True,
            "x": 0.0, "xanchor": "left", "y": 1.0, "yanchor": "bottom", "pad": {"b": 6},
            "bgcolor": "#f1efe9", "bordercolor": "#c9c6bf", "font": {"size": 12}}
