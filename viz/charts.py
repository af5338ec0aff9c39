"""Charts beside the network: bed shares, shares against a baseline, waveforms.

Examples
--------
>>> import numpy as np
>>> fig = waveform_figure(np.linspace(0, 1, 5), {"aorta": np.full(5, 13332.2387415)},
...                       kind="pressure")
>>> fig.layout.xaxis.title.text, fig.layout.yaxis.title.text, round(float(fig.data[0].y[0]), 9)
('time [s]', 'pressure [mmHg]', 100.0)
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import plotly.graph_objects as go

from vesselnet.result import SteadyResult
from vesselnet.units import DISPLAY_UNITS, from_si

from . import palette
from .markup import plain

BAR_COUNT = 30
"""Beds shown as bars, largest shares first; the rest are summed into one bar."""


def _bar_layout(fig: go.Figure, title: str, n_bars: int, *, xtitle: str) -> None:
    fig.update_layout(palette.base_layout())
    fig.update_layout(title={"text": title, "x": 0.01, "xanchor": "left"},
                      height=max(260, 110 + 24 * n_bars), bargap=0.25,
                      margin={"l": 10, "r": 30, "t": 56, "b": 50})
    fig.update_xaxes(**palette.axis_style(), title=xtitle, rangemode="tozero")
    fig.update_yaxes(autorange="reversed", automargin=True, ticks="")


def _top(share: np.ndarray, count: int) -> tuple[np.ndarray, np.ndarray]:
    order = np.argsort(-np.nan_to_num(share, nan=-1.0), kind="stable")
    return order[:count], order[count:]


def bed_share_figure(result: SteadyResult, *, title: str | None = None) -> go.Figure:
    """Horizontal bars of each bed's share of the total inflow, largest first.

    Beds beyond :data:`BAR_COUNT` are summed into one bar.  Beds that drain
    into another bed (in series) are drawn lighter: their flow passes on.

    Parameters
    ----------
    result : SteadyResult
    title : str, optional
        Title text (escaped); default "Where the blood goes".

    Returns
    -------
    plotly.graph_objects.Figure
        One bar trace (``meta['role'] == 'bed-shares'``), x in percent.
    """
    beds = result.network.beds
    share = 100 * np.asarray(result.bed_share, dtype=float)
    flow = from_si(result.bed_flow_m3_s, "flow", DISPLAY_UNITS["flow"])
    pressure = from_si(result.bed_pressure_pa, "pressure", DISPLAY_UNITS["pressure"])
    shown, rest = _top(share, BAR_COUNT)
    labels = [plain(beds.ids[i]) for i in shown]
    x, f, p = list(share[shown]), list(flow[shown]), list(pressure[shown])
    colours = [palette.SERIES_BAR if beds.outflow_node[i] >= 0 else palette.SHARE_BAR for i in shown]
    if len(rest):
        labels.append(f"{len(rest)} other beds")
        x.append(float(np.nansum(share[rest])))
        f.append(float(np.nansum(flow[rest])))
        p.append(float("nan"))
        colours.append(palette.BASELINE_BAR)
    fig = go.Figure(go.Bar(
        x=x, y=labels, orientation="h", marker={"color": colours}, text=[f"{s:.1f} %" for s in x],
        textposition="outside", cliponaxis=False, customdata=np.column_stack([f, p]) if x else None,
        hovertemplate=("<b>%{y}</b><br>share of total inflow %{x:.2f} %<br>"
                       f"flow %{{customdata[0]:.4g}} {DISPLAY_UNITS['flow']}<br>"
                       f"pressure %{{customdata[1]:.4g}} {DISPLAY_UNITS['pressure']}<extra></extra>"),
        meta={"role": "bed-shares"}, name="share"))
    heading = plain(title if title is not None else "Where the blood goes")
    note = ""
    if (beds.outflow_node >= 0).any():
        note = "<br><span style='font-size:11px'>light bars: beds draining into another bed</span>"
    _bar_layout(fig, f"<b>{heading}</b>{note}", len(labels),
                xtitle="share of total inflow [%]")
    return fig


def share_comparison_figure(baseline: SteadyResult, scenario: SteadyResult, *,
                            name: str = "scenario", title: str | None = None) -> go.Figure:
    """Bed shares of a baseline and a scenario side by side, beds matched by id.

    Beds only in one of the two show a bar for that one only.  Sorted by the
    baseline's share (then the scenario's); beyond :data:`BAR_COUNT` beds
    only the largest changes are kept.

    Parameters
    ----------
    baseline, scenario : SteadyResult
    name : str
        The scenario's name for the legend (escaped).
    title : str, optional

    Returns
    -------
    plotly.graph_objects.Figure
        Two bar traces, ``meta['role']`` ``baseline-shares`` and ``scenario-shares``.
    """
    ids = list(dict.fromkeys(baseline.network.beds.ids + scenario.network.beds.ids))

    def shares(result):
        index = result.network.beds.index
        out = np.full(len(ids), np.nan)
        for k, b in enumerate(ids):
            if b in index:
                out[k] = 100 * result.bed_share[index[b]]
        return out

    before, after = shares(baseline), shares(scenario)
    change = np.nan_to_num(after) - np.nan_to_num(before)
    if len(ids) > BAR_COUNT:
        keep = np.sort(np.argsort(-np.abs(change), kind="stable")[:BAR_COUNT])
    else:
        keep = np.arange(len(ids))
    keep = keep[np.lexsort((-np.nan_to_num(after[keep], nan=-1), -np.nan_to_num(before[keep], nan=-1)))]
    labels = [plain(ids[k]) for k in keep]
    hover = "<b>%{y}</b><br>%{fullData.name}: %{x:.2f} %<br>change %{customdata:+.2f} points<extra></extra>"
    fig = go.Figure([
        go.Bar(x=before[keep], y=labels, orientation="h", name="baseline", customdata=change[keep],
               marker={"color": palette.BASELINE_BAR}, hovertemplate=hover,
               meta={"role": "baseline-shares"}),
        go.Bar(x=after[keep], y=labels, orientation="h", name=plain(name), customdata=change[keep],
               marker={"color": palette.SCENARIO_BAR}, hovertemplate=hover,
               text=[f"{c:+.1f}" if abs(c) >= 0.05 else "" for c in change[keep]],
               textposition="outside", cliponaxis=False, meta={"role": "scenario-shares"})])
    heading = plain(title if title is not None else "Bed shares against the baseline")
    _bar_layout(fig, f"<b>{heading}</b>", 2 * len(labels), xtitle="share of total inflow [%]")
    fig.update_layout(barmode="group", legend={"orientation": "h", "y": 1.0, "yanchor": "bottom",
                                               "x": 0.0, "xanchor": "left", "font": {"size": 12}},
                      margin={"t": 96}, title={"y": 0.995, "yref": "container", "yanchor": "top",
                                               "pad": {"t": 10}})
    return fig


WAVE_UNITS = {"pressure": DISPLAY_UNITS["pressure"], "flow": "mL/s"}


def waveform_figure(times_s, series: Mapping[str, object], *, kind: str = "pressure",
                    title: str | None = None) -> go.Figure:
    """Waveforms over time, one line a series (for pulsatile results).

    Parameters
    ----------
    times_s : array_like, shape (n,)
        Sample times (s).
    series : mapping of str to array_like, shape (n,)
        Label (escaped) to values in SI (Pa for ``pressure``, m^3/s for ``flow``).
    kind : {'pressure', 'flow'}
        Shown in mmHg or mL/s.
    title : str, optional

    Returns
    -------
    plotly.graph_objects.Figure
        One line trace per series, ``meta['role'] == 'waveform'``.
    """
    if kind not in WAVE_UNITS:
        raise ValueError(f"waveform_figure: kind must be one of {', '.join(WAVE_UNITS)}, got {kind!r}")
    unit = WAVE_UNITS[kind]
    t = np.asarray(times_s, dtype=float)
    traces = []
    for k, (label, values) in enumerate(series.items()):
        y = from_si(np.asarray(values, dtype=float), kind, unit)
        if y.shape != t.shape:
            raise ValueError(f"waveform_figure: series {label!r} has {y.shape[0]} samples, "
                             f"times has {t.shape[0]}")
        colour = palette.CATEGORICAL[k % len(palette.CATEGORICAL)]
        traces.append(go.Scatter(x=t, y=y, mode="lines", name=plain(label),
                                 line={"color": colour, "width": 2},
                                 hovertemplate=f"%{{fullData.name}}<br>%{{x:.3f}} s: %{{y:.4g}} {unit}"
                                               "<extra></extra>",
                                 meta={"role": "waveform"}))
    fig = go.Figure(traces)
    fig.update_layout(palette.base_layout())
    fig.update_layout(title={"text": f"<b>{plain(title or kind + ' waveforms')}</b>", "x": 0.01},
                      height=380, hovermode="x unified")
    fig.update_xaxes(**palette.axis_style(), title="time [s]")
    fig.update_yaxes(**palette.axis_style(), title=f"{kind} [{unit}]")
    return fig
