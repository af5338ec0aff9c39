"""Pulsatile results out: JSON (SPEC section 6, ``pulse --json``), CSV tables, terminal report.

Values are converted from SI to the display units once, here (flow in
mL/min, pressure in mmHg, as in every vesselnet result; the ``units`` map
names each).  The steady fields of nodes, vessels and beds come from
:mod:`vesselnet.writers`; the pulsatile ones are added beside them.

Examples
--------
>>> from vesselnet.model import Network
>>> from vesselnet.pulse import solve_pulse
>>> net = Network.build(nodes={"heart": {"inflow_m3_s": 7e-5}},
...     vessels=[{"id": "aorta", "from": "heart", "to": "tip", "length_m": 0.3, "radius_m": 0.012,
...               "wall_thickness_m": 1.2e-3, "wall_modulus_pa": 5e5}],
...     beds=[{"id": "body", "node": "tip", "resistance_pa_s_m3": 1.2e8}],
...     inflow_waveforms={"heart": {"stroke_volume_m3": 6e-5, "heart_rate_hz": 7 / 6,
...                                 "ejection_time_s": 0.3}})
>>> doc = pulse_json(solve_pulse(net))
>>> sorted(doc["waveforms"]), sorted(doc["waveforms"]["vessels"])
(['beds', 'nodes', 'times', 'vessels'], ['aorta'])
>>> {"systolic", "diastolic", "mean", "pulse_pressure"} <= set(doc["nodes"][0])
True
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from . import writers
from .errors import NetworkSpecError, Problem
from .fields import near_miss
from .pulseresult import PulseResult
from .textreport import MAX_ROWS, format_table, rows_shown
from .units import DISPLAY_UNITS, MMHG_PA, from_si

CAUTION = ("Research and planning aid, not a medical device: pulsatility indices and pressures "
           "from a linear model with assumed boundary conditions are to be reviewed by licensed "
           "clinicians, deferring to local regulations and practice.")
"""Shown with every pulse result (graft flow pulsatility is used to judge grafts)."""

PULSE_UNITS = {"time": "s", "frequency": "Hz", "impedance": "mmHg*s/mL", "phase": "deg",
               "heart_rate": "bpm"}
"""Units of the pulsatile fields beyond SPEC section 5's map."""

_FLOW = DISPLAY_UNITS["flow"]
_PRESSURE = DISPLAY_UNITS["pressure"]
_MMHG_S_ML = MMHG_PA / 1e-6


@dataclass(frozen=True)
class WaveformSelection:
    """Rows whose waveforms are written: node pressures, vessel flows, bed flows."""

    nodes: tuple[int, ...]
    vessels: tuple[int, ...]
    beds: tuple[int, ...]


def select_waveforms(result: PulseResult, ids=()) -> WaveformSelection:
    """The waveforms to write: the ``ids`` asked for, or the defaults.

    Parameters
    ----------
    result : PulseResult
    ids : sequence of str
        Node, vessel or bed ids; an id matches in every section that has it.
        Empty: the inlet and every node carrying a bed (pressures), the
        vessels joined to the inlet and every bed (flows).

    Raises
    ------
    NetworkSpecError
        An id that is no node, vessel or bed.
    """
    net = result.network
    sections = (net.nodes.index, net.vessels.index, net.beds.index)
    if not ids:
        v = net.vessels
        joined = np.flatnonzero((v.from_node == result.inlet) | (v.to_node == result.inlet))
        nodes = dict.fromkeys([result.inlet] + [int(k) for k in net.beds.node])
        return WaveformSelection(tuple(nodes), tuple(int(i) for i in joined), tuple(range(len(net.beds))))
    problems = []
    picked: list[list[int]] = [[], [], []]
    for item in ids:
        found = [index.get(str(item)) for index in sections]
        if all(f is None for f in found):
            known = list(net.nodes.ids) + list(net.vessels.ids) + list(net.beds.ids)
            problems.append(Problem("", 0, 0, f"--waveform '{item}'", "no node, vessel or bed has this id",
                                    near_miss(str(item), known) or "name a node, vessel or bed"))
        for rows, f in zip(picked, found):
            if f is not None and f not in rows:
                rows.append(f)
    if problems:
        raise NetworkSpecError(problems)
    return WaveformSelection(*(tuple(rows) for rows in picked))


def _numbers(values) -> list:
    return [writers.number(x) for x in np.asarray(values, dtype=float)]


def pulse_json(result: PulseResult, *, selection: WaveformSelection | None = None,
               setup=None) -> dict:
    """The ``pulse --json`` document (SPEC section 6).

    Parameters
    ----------
    result : PulseResult
    selection : WaveformSelection, optional
        Default :func:`select_waveforms` with no ids.
    setup : vesselnet.pulsesetup.WindkesselSetup, optional
        Written under ``windkessel`` when the command set the beds up.
    """
    selection = select_waveforms(result) if selection is None else selection
    steady = result.steady
    nodes = writers.nodes_json(steady)
    p = {k: from_si(v, "pressure", _PRESSURE) for k, v in
         (("systolic", result.node_systolic_pa), ("diastolic", result.node_diastolic_pa),
          ("mean", result.node_mean_pa), ("pulse_pressure", result.node_pulse_pressure_pa))}
    for i, record in enumerate(nodes):
        record.update({k: writers.number(v[i]) for k, v in p.items()})
    vessels = writers.vessels_json(steady)
    vt = result.vessel_table()
    vcols = {"flow_peak": from_si(vt["flow_peak_m3_s"], "flow", _FLOW),
             "flow_min": from_si(vt["flow_min_m3_s"], "flow", _FLOW),
             "flow_mean": from_si(vt["flow_mean_m3_s"], "flow", _FLOW),
             "pulsatility_index": vt["pulsatility_index"], "reversed_fraction": vt["reversed_fraction"],
             "pwv": vt["pwv_m_s"], "phase_velocity": vt["phase_velocity_m_s"]}
    for i, record in enumerate(vessels):
        record.update({k: writers.number(v[i]) for k, v in vcols.items()})
    beds = writers.beds_json(steady)
    bt = result.bed_table()
    bcols = {"flow_peak": from_si(bt["flow_peak_m3_s"], "flow", _FLOW),
             "flow_min": from_si(bt["flow_min_m3_s"], "flow", _FLOW),
             "flow_mean": from_si(bt["flow_mean_m3_s"], "flow", _FLOW),
             "pulsatility_index": bt["pulsatility_index"],
             "systolic": from_si(bt["systolic_pa"], "pressure", _PRESSURE),
             "diastolic": from_si(bt["diastolic_pa"], "pressure", _PRESSURE)}
    for i, record in enumerate(beds):
        record.update({k: writers.number(v[i]) for k, v in bcols.items()})
    net = result.network
    z = result.impedance_table()
    checks = writers.checks_json(steady)
    checks.update({"zero_harmonic_difference": writers.number(result.zero_harmonic_difference),
                   "harmonic_residual": writers.number(result.harmonic_residual),
                   "harmonic_solver": result.harmonic_solver})
    doc = {"vesselnet": writers.FORMAT_VERSION, "network": net.name, "caution": CAUTION,
           "units": {**writers.units_map(), **PULSE_UNITS},
           "inflow": writers.number(from_si(steady.inflow_m3_s, "flow", _FLOW)),
           "pulse": {"period": writers.number(result.period_s),
                     "heart_rate": writers.number(60.0 * result.heart_rate_hz),
                     "harmonics": result.n_harmonics, "samples": result.n_samples,
                     "inlet": net.nodes.ids[result.inlet]},
           "nodes": nodes, "vessels": vessels, "beds": beds,
           "input_impedance": {"node": net.nodes.ids[result.inlet],
                               "frequency": _numbers(z["frequency_hz"]),
                               "modulus": _numbers(z["modulus_pa_s_m3"] / _MMHG_S_ML),
                               "phase": _numbers(np.degrees(z["phase_rad"]))},
           "waveforms": waveforms_json(result, selection)}
    if setup is not None:
        doc["windkessel"] = setup_json(setup)
    doc.update({"checks": checks, "notes": list(result.notes), "warnings": list(result.warnings)})
    return doc


def waveforms_json(result: PulseResult, selection: WaveformSelection) -> dict:
    """``times`` and the sampled waveforms of the selected nodes, vessels and beds."""
    net = result.network
    p = from_si(result.node_pressure_waveform_pa, "pressure", _PRESSURE)
    qv = from_si(result.vessel_flow_waveform_m3_s, "flow", _FLOW)
    qb = from_si(result.bed_flow_waveform_m3_s, "flow", _FLOW)
    return {"times": _numbers(result.times_s),
            "nodes": {net.nodes.ids[i]: _numbers(p[:, i]) for i in selection.nodes},
            "vessels": {net.vessels.ids[i]: _numbers(qv[:, i]) for i in selection.vessels},
            "beds": {net.beds.ids[i]: _numbers(qb[:, i]) for i in selection.beds}}


def setup_json(setup) -> dict:
    """The Windkessel set-up: compliance bookkeeping and each bed's R1, R2, C."""
    p = setup.parameters
    ml_mmhg = 1e-6 / MMHG_PA
    return {"total_compliance": writers.number(p.total_compliance_m3_pa / ml_mmhg),
            "conduit_compliance": writers.number(p.conduit_compliance_m3_pa / ml_mmhg),
            "peripheral_compliance": writers.number(p.peripheral_compliance_m3_pa / ml_mmhg),
            "rigid_terminal": list(setup.rigid_terminal), "left_resistive": list(setup.left_resistive),
            "beds": [{"id": bed, "proximal": writers.number(r1 / _MMHG_S_ML),
                      "distal": writers.number(r2 / _MMHG_S_ML),
                      "compliance": writers.number(c / ml_mmhg)}
                     for bed, r1, r2, c in zip(p.ids, p.proximal_resistance_pa_s_m3,
                                               p.distal_resistance_pa_s_m3, p.compliance_m3_pa)]}


# --------------------------------------------------------------------------- CSV
def _csv(header: list[str], columns: list) -> str:
    buffer = io.StringIO()
    out = csv.writer(buffer, lineterminator="\n")
    out.writerow([writers.spreadsheet_safe(h) for h in header])
    for row in zip(*columns):
        cells = []
        for x in row:
            if isinstance(x, str):
                cells.append(writers.spreadsheet_safe(x))
            else:
                value = writers.number(x)
                cells.append("" if value is None else repr(value))
        out.writerow(cells)
    return buffer.getvalue()


def pulse_tables(result: PulseResult, selection: WaveformSelection) -> dict[str, str]:
    """CSV texts by file name: per-node, per-vessel and per-bed indices, the impedance, waveforms."""
    net = result.network
    nt, vt, bt, z = result.node_table(), result.vessel_table(), result.bed_table(), result.impedance_table()

    def mmhg(x):
        return from_si(x, "pressure", _PRESSURE)

    def flow(x):
        return from_si(x, "flow", _FLOW)

    pu, fu = f"[{_PRESSURE}]", f"[{_FLOW}]"
    times = list(result.times_s)
    p = mmhg(result.node_pressure_waveform_pa)
    qv = flow(result.vessel_flow_waveform_m3_s)
    qb = flow(result.bed_flow_waveform_m3_s)
    return {
        "pulse_nodes.csv": _csv(["id", "systolic" + pu, "diastolic" + pu, "mean" + pu, "pulse_pressure" + pu],
                                [list(nt["id"]), mmhg(nt["systolic_pa"]), mmhg(nt["diastolic_pa"]),
                                 mmhg(nt["mean_pa"]), mmhg(nt["pulse_pressure_pa"])]),
        "pulse_vessels.csv": _csv(["id", "from", "to", "flow_mean" + fu, "flow_peak" + fu, "flow_min" + fu,
                                   "pulsatility_index", "reversed_fraction", "pwv[m/s]",
                                   "phase_velocity[m/s]"],
                                  [list(vt["id"]), list(vt["from"]), list(vt["to"]),
                                   flow(vt["flow_mean_m3_s"]), flow(vt["flow_peak_m3_s"]),
                                   flow(vt["flow_min_m3_s"]), vt["pulsatility_index"],
                                   vt["reversed_fraction"], vt["pwv_m_s"], vt["phase_velocity_m_s"]]),
        "pulse_beds.csv": _csv(["id", "node", "flow_mean" + fu, "flow_peak" + fu, "flow_min" + fu,
                                "pulsatility_index", "systolic" + pu, "diastolic" + pu],
                               [list(bt["id"]), list(bt["node"]), flow(bt["flow_mean_m3_s"]),
                                flow(bt["flow_peak_m3_s"]), flow(bt["flow_min_m3_s"]),
                                bt["pulsatility_index"], mmhg(bt["systolic_pa"]), mmhg(bt["diastolic_pa"])]),
        "input_impedance.csv": _csv(["harmonic", "frequency[Hz]", "modulus[mmHg*s/mL]", "phase[deg]"],
                                    [list(z["harmonic"].astype(float)), z["frequency_hz"],
                                     z["modulus_pa_s_m3"] / _MMHG_S_ML, np.degrees(z["phase_rad"])]),
        "pressure_waveforms.csv": _csv(["time[s]"] + [f"{net.nodes.ids[i]}{pu}" for i in selection.nodes],
                                       [times] + [p[:, i] for i in selection.nodes]),
        "vessel_flow_waveforms.csv": _csv(["time[s]"] + [f"{net.vessels.ids[i]}{fu}" for i in selection.vessels],
                                          [times] + [qv[:, i] for i in selection.vessels]),
        "bed_flow_waveforms.csv": _csv(["time[s]"] + [f"{net.beds.ids[i]}{fu}" for i in selection.beds],
                                       [times] + [qb[:, i] for i in selection.beds]),
    }


def write_pulse_tables(result: PulseResult, directory, selection: WaveformSelection) -> list[Path]:
    """Write :func:`pulse_tables` into ``directory`` (created), atomically; returns the paths."""
    directory = Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    paths = []
    for name, text in pulse_tables(result, selection).items():
        writers.atomic_write(directory / name, text)
        paths.append(directory / name)
    return paths


# --------------------------------------------------------------------------- terminal
IMPEDANCE_ROWS = 11


def pulse_report(result: PulseResult, selection: WaveformSelection, setup=None) -> str:
    """The terminal report of ``vesselnet pulse``."""
    net = result.network
    parts = [result.summary(), ""]
    z = result.impedance_table()
    rows = [[str(int(z["harmonic"][n])), z["frequency_hz"][n], z["modulus_pa_s_m3"][n] / _MMHG_S_ML,
             np.degrees(z["phase_rad"][n])] for n in range(min(IMPEDANCE_ROWS, len(z["harmonic"])))]
    parts += [f"Input impedance at '{net.nodes.ids[result.inlet]}'",
              format_table(["harmonic", "f [Hz]", "|Z| [mmHg*s/mL]", "phase [deg]"], rows, digits=3), ""]
    mm = MMHG_PA
    node_rows = [[net.nodes.ids[i], result.node_systolic_pa[i] / mm, result.node_diastolic_pa[i] / mm,
                  result.node_mean_pa[i] / mm, result.node_pulse_pressure_pa[i] / mm]
                 for i in selection.nodes[:MAX_ROWS]]
    parts += ["Pressures", format_table(["node", "systolic [mmHg]", "diastolic [mmHg]", "mean [mmHg]",
                                         "pulse [mmHg]"], node_rows)
              + rows_shown(len(selection.nodes), MAX_ROWS)[1]]
    vt = result.vessel_table()
    flow = from_si(np.stack([vt["flow_mean_m3_s"], vt["flow_peak_m3_s"], vt["flow_min_m3_s"]]), "flow", _FLOW)
    vessel_rows = [[vt["id"][i], flow[0, i], flow[1, i], flow[2, i], vt["pulsatility_index"][i],
                    100 * vt["reversed_fraction"][i], vt["pwv_m_s"][i]]
                   for i in range(min(MAX_ROWS, len(vt["id"])))]
    parts += ["", "Vessels (flow at the 'from' end)",
              format_table(["vessel", f"mean [{_FLOW}]", f"peak [{_FLOW}]", f"min [{_FLOW}]", "PI",
                            "reversed [%]", "PWV [m/s]"], vessel_rows, digits=2)
              + rows_shown(len(vt["id"]), MAX_ROWS)[1]]
    if setup is not None:
        parts += ["", "Windkessel set-up: " + setup.summary()]
    parts += ["", f"checks: 0 Hz system vs steady solve {_fmt(result.zero_harmonic_difference)}, "
                  f"harmonic residual {_fmt(result.harmonic_residual)}, steady mass balance "
                  f"{result.steady.mass_balance:.1e}"
                  + (f", harmonic solver {result.harmonic_solver}" if result.harmonic_solver else "")]
    parts += [f"note: {n}" for n in result.notes]
    parts += ["", CAUTION]
    return "\n".join(parts)


def _fmt(x: float) -> str:
    return "n/a (lesions: harmonic 0 is the nonlinear steady solve)" if not np.isfinite(x) else f"{x:.1e}"
