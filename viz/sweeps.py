"""Plots of a sweep: bed shares against one or two swept parameters, or per case.

* one parameter: a line per reported bed, share against the parameter;
* two parameters: one panel per reported bed, share against the first
  parameter, a line per value of the second;
* a list of cases: grouped bars, one group per case.

Axis titles carry units; ids and names from files are escaped.

Examples
--------
>>> from vesselnet.demos import demo_path
>>> from vesselnet.sweep import read_sweep_text, run_sweep
>>> text = f'''
... vesselnet: 1
... network: {demo_path("leg")}
... report: [foot]
... parameters:
...   - change: {{narrow: {{vessel: sfa_mid, length: 3}}}}
...     vary: reduction
...     values: [0%, 50%, 80%]
... '''
>>> fig = sweep_figure(run_sweep(read_sweep_text(text, "s.yaml")))
>>> fig.layout.xaxis.title.text, fig.layout.yaxis.title.text
('narrow reduction [%]', 'bed share [%]')
"""

from __future__ import annotations

import html
from pathlib import Path

import numpy as np
import plotly.graph_objects as go
from plotly.subplots import make_subplots

from vesselnet.writers import atomic_write

COLOURS = ("#1f5fa8", "#d1495b", "#2e8b57", "#e39b2d", "#7a4ea3", "#3aa7b8", "#8c6d31", "#555555")
"""Line colours, the same series in the same colour in every panel."""

MAX_BEDS = 8
"""Beds drawn (the largest shares of the first case, when more are reported)."""


def _plain(text) -> str:
    """Text shown literally by plotly (no markup from file ids)."""
    return html.escape(str(text), quote=False).replace('"', "&#34;").replace("'", "&#39;")


def _axis_title(parameter) -> str:
    unit, _ = parameter.display()
    return _plain(parameter.name) + (f" [{unit}]" if unit else "")


def _beds(result) -> list[int]:
    rows = result.report_rows
    if len(rows) > MAX_BEDS:
        first = np.nan_to_num(result.bed_share[0, rows], nan=-1.0)
        rows = rows[np.argsort(-first, kind="stable")[:MAX_BEDS]]
    return [int(r) for r in rows]


def sweep_figure(result) -> go.Figure:
    """The plot of a :class:`~vesselnet.sweep.SweepResult` (see the module notes)."""
    spec, beds = result.spec, result.network.beds
    rows = _beds(result)
    share = 100 * result.bed_share
    title = _plain(f"{spec.name}: bed shares")
    if not spec.parameters:
        fig = go.Figure([go.Bar(name=_plain(beds.ids[r]), x=[_plain(c) for c in spec.case_names],
                                marker_color=COLOURS[k % len(COLOURS)],
                                y=share[:, r], hovertemplate="%{x}: %{y:.3g} %<extra>"
                                + _plain(beds.ids[r]) + "</extra>") for k, r in enumerate(rows)])
        fig.update_layout(barmode="group", xaxis_title="case", yaxis_title="bed share [%]")
    elif len(spec.parameters) == 1:
        p = spec.parameters[0]
        _, scale = p.display()
        x = np.asarray(p.values) * scale
        fig = go.Figure([go.Scatter(x=x, y=share[:, r], mode="lines+markers", name=_plain(beds.ids[r]),
                                    line={"color": COLOURS[k % len(COLOURS)]},
                                    hovertemplate="%{x:.4g}: %{y:.3g} %<extra>" + _plain(beds.ids[r])
                                    + "</extra>") for k, r in enumerate(rows)])
        fig.update_layout(xaxis_title=_axis_title(p), yaxis_title="bed share [%]")
    else:
        p, q = spec.parameters
        (_, sp), (q_unit, sq) = p.display(), q.display()
        n_p, n_q = len(p.values), len(q.values)
        cols = min(len(rows), 3)
        fig = make_subplots(rows=int(np.ceil(len(rows) / cols)), cols=cols,
                            subplot_titles=[_plain(beds.ids[r]) for r in rows])
        x = np.asarray(p.values) * sp
        for k, r in enumerate(rows):
            grid = share[:, r].reshape(n_p, n_q)
            for j in range(n_q):
                label = f"{_plain(q.name)} {q.values[j] * sq:.4g}{(' ' + q_unit) if q_unit else ''}"
                fig.add_trace(go.Scatter(x=x, y=grid[:, j], mode="lines+markers", name=label,
                                         legendgroup=label, showlegend=k == 0,
                                         line={"color": COLOURS[j % len(COLOURS)]},
                                         hovertemplate="%{x:.4g}: %{y:.3g} %<extra>" + label
                                         + "</extra>"), row=k // cols + 1, col=k % cols + 1)
        fig.update_xaxes(title_text=_axis_title(p))
        fig.update_yaxes(title_text="bed share [%]")
    fig.update_layout(title=title, template="plotly_white", height=480 if len(spec.parameters) < 2
                      else 320 * int(np.ceil(len(rows) / 3)) + 120)
    return fig


def write_sweep_page(result, path) -> Path:
    """Write the sweep plot as a self-contained HTML page (plotly.js embedded); returns the path."""
    path = Path(path)
    atomic_write(path, sweep_figure(result).to_html(include_plotlyjs=True, full_html=True))
    return path
