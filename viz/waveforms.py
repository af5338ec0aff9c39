"""Figure of a pulsatile result: pressure and flow over one cycle, the input impedance.

Five panels: nodal pressure waveforms (mmHg against s), vessel flow and
bed inflow waveforms (mL/min against s), and the modulus (mmHg*s/mL) and phase
(degrees) of the input impedance at the inlet against frequency (Hz).
Lines use the Okabe-Ito colours (Okabe & Ito 2008, chosen to stay distinct
under the common colour-vision deficiencies), with a dash pattern once the
colours repeat.  Ids from files are escaped before they become labels.

Examples
--------
>>> from vesselnet.model import Network
>>> from vesselnet.pulse import solve_pulse
>>> net = Network.build(nodes={"heart": {"inflow_m3_s": 7e-5}},
...     vessels=[{"id": "<b>aorta</b>", "from": "heart", "to": "tip", "length_m": 0.3,
...               "radius_m": 0.012, "wall_thickness_m": 1.2e-3, "wall_modulus_pa": 5e5}],
...     beds=[{"id": "body", "node": "tip", "resistance_pa_s_m3": 1.2e8}],
...     inflow_waveforms={"heart": {"stroke_volume_m3": 6e-5, "heart_rate_hz": 7 / 6,
...                                 "ejection_time_s": 0.3}})
>>> fig = pulse_figure(solve_pulse(net))
>>> fig.layout.xaxis.title.text, fig.layout.yaxis.title.text
('time [s]', 'pressure [mmHg]')
>>> [t.name for t in fig.data if t.legendgroup in ("flow", "bed")]
['&lt;b&gt;aorta&lt;/b&gt;', 'body']
"""

from __future__ import annotations

import html
from pathlib import Path

import numpy as np
import plotly.graph_objects as go
import plotly.io as pio
from plotly.subplots import make_subplots

from vesselnet.pulseresult import PulseResult
from vesselnet.pulsereport import WaveformSelection, select_waveforms
from vesselnet.units import DISPLAY_UNITS, MMHG_PA, from_si
from vesselnet.writers import atomic_write

OKABE_ITO = ("#0072b2", "#e69f00", "#009e73", "#d55e00", "#cc79a7", "#56b4e9", "#f0e442", "#000000")
"""Okabe & Ito (2008) colours, blue first."""

DASHES = ("solid", "dash", "dot", "dashdot")

MAX_LINES = 8
"""Lines per waveform panel (one per Okabe-Ito colour); the subtitle counts the rest."""

_MMHG_S_ML = MMHG_PA / 1e-6


def _plain(text: object) -> str:
    """Escape ``& < > " '`` so that ids show literally (plotly decodes numeric entities)."""
    return html.escape(str(text), quote=False).replace('"', "&#34;").replace("'", "&#39;")


def _style(k: int) -> dict:
    return {"color": OKABE_ITO[k % len(OKABE_ITO)], "dash": DASHES[(k // len(OKABE_ITO)) % len(DASHES)],
            "width": 2}


def _lines(fig, t, series, group, title, unit, row, col):
    for k, (name, y) in enumerate(series[:MAX_LINES]):
        fig.add_trace(go.Scatter(x=t, y=y, mode="lines", name=name, legendgroup=group,
                                 legendgrouptitle_text=title, line=_style(k),
                                 hovertemplate="%{x:.3f} s, %{y:.1f} " + unit
                                 + "<extra>%{fullData.name}</extra>"),
                      row=row, col=col)
    return max(len(series) - MAX_LINES, 0)


def pulse_figure(result: PulseResult, *, selection: WaveformSelection | None = None,
                 title: str | None = None) -> go.Figure:
    """Pressure, flow and input-impedance panels of a :class:`PulseResult`.

    Parameters
    ----------
    result : PulseResult
    selection : WaveformSelection, optional
        Waveforms to draw (the first :data:`MAX_LINES` of each kind); default
        :func:`vesselnet.pulsereport.select_waveforms`.
    title : str, optional
        Figure title (escaped); default the network name.

    Returns
    -------
    plotly.graph_objects.Figure
        Traces in legend groups ``pressure``, ``flow`` (vessels), ``bed``
        and ``impedance``.
    """
    selection = select_waveforms(result) if selection is None else selection
    net = result.network
    fu = DISPLAY_UNITS["flow"]
    fig = make_subplots(rows=3, cols=2, horizontal_spacing=0.1, vertical_spacing=0.1,
                        specs=[[{}, {}], [{"rowspan": 2}, {}], [None, {}]],
                        subplot_titles=("Pressure", "Vessel flow (at the 'from' end)", "Bed inflow",
                                        "Input impedance, modulus", "Input impedance, phase"))
    t = result.times_s
    p = from_si(result.node_pressure_waveform_pa, "pressure", "mmHg")
    qv = from_si(result.vessel_flow_waveform_m3_s, "flow", fu)
    qb = from_si(result.bed_flow_waveform_m3_s, "flow", fu)
    left_out = _lines(fig, t, [(_plain(net.nodes.ids[i]), p[:, i]) for i in selection.nodes],
                      "pressure", "pressure at", "mmHg", 1, 1)
    left_out += _lines(fig, t, [(_plain(net.vessels.ids[i]), qv[:, i]) for i in selection.vessels],
                       "flow", "vessel flow", fu, 1, 2)
    left_out += _lines(fig, t, [(_plain(net.beds.ids[i]), qb[:, i]) for i in selection.beds],
                       "bed", "bed inflow", fu, 2, 1)
    z = result.impedance_table()
    inlet = _plain(net.nodes.ids[result.inlet])
    for row, y, unit in ((2, z["modulus_pa_s_m3"] / _MMHG_S_ML, "mmHg*s/mL"),
                         (3, np.degrees(z["phase_rad"]), "deg")):
        fig.add_trace(go.Scatter(x=z["frequency_hz"], y=y, mode="lines+markers", name=f"at {inlet}",
                                 legendgroup="impedance", legendgrouptitle_text="input impedance",
                                 showlegend=row == 2, line={"color": OKABE_ITO[0], "width": 2},
                                 hovertemplate="%{x:.2f} Hz, %{y:.3g} " + unit + "<extra></extra>"),
                      row=row, col=2)
    heading = _plain(net.name if title is None else title)
    sub = (f"{60 * result.heart_rate_hz:.0f} bpm, {result.n_harmonics} harmonics"
           + (f"; {left_out} more waveforms in the JSON and CSV output" if left_out else ""))
    fig.update_layout(title={"text": f"{heading}<br><sub>{sub}</sub>", "x": 0.01, "xanchor": "left"},
                      template="simple_white", height=900, legend={"groupclick": "toggleitem"},
                      font={"family": "Helvetica, Arial, sans-serif", "size": 13},
                      margin={"l": 60, "r": 20, "t": 110, "b": 60})
    for row, col in ((1, 1), (1, 2), (2, 1)):
        fig.update_xaxes(title_text="time [s]", row=row, col=col)
    fig.update_xaxes(title_text="frequency [Hz]", row=2, col=2)
    fig.update_xaxes(title_text="frequency [Hz]", row=3, col=2)
    fig.update_yaxes(title_text="pressure [mmHg]", row=1, col=1)
    fig.update_yaxes(title_text=f"flow [{fu}]", row=1, col=2)
    fig.update_yaxes(title_text=f"flow [{fu}]", row=2, col=1)
    fig.update_yaxes(title_text="|Z| [mmHg*s/mL]", type="log", row=2, col=2)
    fig.update_yaxes(title_text="phase [deg]", row=3, col=2)
    fig.update_xaxes(showgrid=True, gridcolor="#e6e6e6")
    fig.update_yaxes(showgrid=True, gridcolor="#e6e6e6")
    return fig


def write_pulse_html(result: PulseResult, path, *, selection: WaveformSelection | None = None) -> Path:
    """Write :func:`pulse_figure` as a self-contained HTML page (works offline); returns the path."""
    fig = pulse_figure(result, selection=selection)
    path = Path(path)
    atomic_write(path, pio.to_html(fig, full_html=True, include_plotlyjs=True))
    return path
