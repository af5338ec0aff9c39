"""Percentile bands of a Monte Carlo run: bed shares and bed pressures.

One row per bed (largest nominal share at the top); a bar from the lowest
to the highest percentile, a dot at the median and a diamond at the nominal
(unperturbed) value.  Ids from files are escaped before plotly sees them.

Examples
--------
>>> from vesselnet.demos import demo_path
>>> from vesselnet.reader import load_network
>>> from vesselnet.uncertainty import read_uncertainty, run_uncertainty
>>> from vesselnet.yamlread import load_text
>>> net = load_network(demo_path("collateral"))
>>> spec = read_uncertainty(load_text("vesselnet: 1\\nuncertainty:\\n  - {vessels: all, "
...     "quantity: radius, distribution: lognormal, relative: 5%}\\n", "u.yaml"), net, "u.yaml")
>>> fig = band_figure(run_uncertainty(net, spec, samples=20, seed=4417))
>>> fig.layout.xaxis.title.text, fig.layout.xaxis2.title.text
('bed share [%]', 'pressure at the bed [mmHg]')
"""

from __future__ import annotations

import html
from pathlib import Path

import numpy as np
import plotly.graph_objects as go
from plotly.subplots import make_subplots

from vesselnet.units import MMHG_PA
from vesselnet.writers import atomic_write

MAX_BEDS = 60


def _plain(text) -> str:
    """Text shown literally by plotly (no markup from file ids)."""
    return html.escape(str(text), quote=False).replace('"', "&#34;").replace("'", "&#39;")


def band_figure(mc, *, max_beds: int = MAX_BEDS) -> go.Figure:
    """The band plot of an :class:`~vesselnet.uncertainty.UncertaintyResult`.

    Parameters
    ----------
    mc : UncertaintyResult
    max_beds : int
        Beds shown (the largest nominal shares).

    Returns
    -------
    plotly.graph_objects.Figure
    """
    beds = mc.network.beds
    order = np.argsort(-mc.nominal.bed_share, kind="stable")[:max_beds][::-1]
    names = [_plain(beds.ids[i]) for i in order]
    low, high = mc.percentiles[0], mc.percentiles[-1]
    fig = make_subplots(rows=1, cols=2, shared_yaxes=True, horizontal_spacing=0.04)
    panels = ((1, 100 * mc.bed_share, 100 * mc.nominal.bed_share, "%"),
              (2, mc.bed_pressure_pa / MMHG_PA, mc.nominal.bed_pressure_pa / MMHG_PA, "mmHg"))
    for col, samples, nominal, unit in panels:
        band = np.percentile(samples, mc.percentiles, axis=0)
        median = np.percentile(samples, 50, axis=0)
        lo, hi = band[0][order], band[-1][order]
        fig.add_trace(go.Bar(
            x=hi - lo, base=lo, y=names, orientation="h", marker_color="rgba(70,110,170,0.35)",
            name=f"p{low:g}-p{high:g}", showlegend=col == 1, legendgroup="band",
            hovertemplate=f"%{{y}}: p{low:g} %{{base:.3g}} to p{high:g} %{{customdata:.3g}} {unit}"
                          "<extra></extra>", customdata=hi), row=1, col=col)
        fig.add_trace(go.Scatter(
            x=median[order], y=names, mode="markers", marker={"color": "rgb(40,70,130)", "size": 7},
            name="median", showlegend=col == 1, legendgroup="median",
            hovertemplate=f"%{{y}}: median %{{x:.3g}} {unit}<extra></extra>"), row=1, col=col)
        fig.add_trace(go.Scatter(
            x=nominal[order], y=names, mode="markers",
            marker={"color": "rgb(200,90,40)", "size": 8, "symbol": "diamond"},
            name="nominal", showlegend=col == 1, legendgroup="nominal",
            hovertemplate=f"%{{y}}: nominal %{{x:.3g}} {unit}<extra></extra>"), row=1, col=col)
    fig.update_xaxes(title_text="bed share [%]", row=1, col=1)
    fig.update_xaxes(title_text="pressure at the bed [mmHg]", row=1, col=2)
    fig.update_layout(
        title=_plain(f"{mc.network.name}: Monte Carlo, {mc.samples} samples, seed {mc.seed}"),
        barmode="overlay", height=max(360, 22 * len(order) + 160), template="plotly_white",
        legend={"orientation": "h", "x": 0, "y": 1.0, "yanchor": "bottom", "xanchor": "left"},
        margin={"t": 120})
    return fig


def write_band_page(mc, path) -> Path:
    """Write the band plot as a self-contained HTML page (plotly.js embedded); returns the path."""
    path = Path(path)
    atomic_write(path, band_figure(mc).to_html(include_plotlyjs=True, full_html=True))
    return path
