"""``vesselnet pulse FILE``: pulsatile pressures and flows (SPEC section 7).

Out of the box on a file written for the steady solver: when no bed has
Windkessel data, the beds are set up (:func:`vesselnet.pulsesetup.setup_windkessels`,
default total compliance 1.5 mL/mmHg per 5 L/min of inflow); a constant
prescribed inflow becomes an ejection waveform with the same mean; a
fixed-pressure inlet gets an aortic pressure pulse with the same mean
(pulse pressure 40 mmHg).  Each of these is reported as a note and can be
switched off or changed by an option.
"""

from __future__ import annotations


def add_parser(sub) -> None:
    p = sub.add_parser("pulse", help="pulsatile pressure and flow waveforms (frequency domain)",
                       description="Pulsatile analysis in the frequency domain: systolic, diastolic "
                                   "and pulse pressure per node; flow waveform, pulsatility index, "
                                   "reversed-flow fraction and wave speed per vessel; the input "
                                   "impedance at the inlet. A research and planning aid, not a "
                                   "medical device.")
    p.add_argument("file", help="the network YAML file")
    p.add_argument("--json", action="store_true", help="print the JSON result (and nothing else) on stdout")
    p.add_argument("-o", "--output", metavar="DIR", help="write CSV tables and waveforms into DIR")
    p.add_argument("--html", metavar="PATH", help="write an interactive waveform figure (HTML)")
    p.add_argument("--waveform", metavar="ID", action="append", default=[],
                   help="node, vessel or bed whose waveform to write (repeatable; default: the "
                        "inlet, the bed nodes, the vessels at the inlet and the beds)")
    p.add_argument("--harmonics", type=int, default=None, metavar="K", help="harmonics (default 20)")
    p.add_argument("--samples", type=int, default=None, metavar="N",
                   help="time samples per cycle (default 200)")
    p.add_argument("--inlet", metavar="ID", help="node of the input impedance and the pressure "
                   "waveform (default: where the most flow enters)")
    shape = p.add_argument_group("inflow and inlet pressure shape")
    shape.add_argument("--heart-rate", type=float, metavar="BPM",
                       help="heart rate for shaped inflows and pressures (default 70)")
    shape.add_argument("--stroke-volume", type=float, metavar="ML",
                       help="stroke volume instead of the heart rate (rate = mean inflow / volume)")
    shape.add_argument("--ejection-time", type=float, default=0.3, metavar="S",
                       help="ejection time of shaped inflows and pressures (default 0.3 s)")
    shape.add_argument("--constant-inflow", action="store_true",
                       help="keep constant prescribed inflows constant (no ejection shape)")
    shape.add_argument("--pulse-pressure", type=float, default=40.0, metavar="MMHG",
                       help="pulse pressure of the aortic pressure shape given to fixed-pressure "
                            "inlets (default 40; 0 keeps them constant)")
    shape.add_argument("--pressure-csv", metavar="FILE",
                       help="tabulated pressure waveform (time,pressure) for the fixed-pressure "
                            "inlet; its mean replaces the node's pressure")
    wk = p.add_argument_group("Windkessel beds")
    wk.add_argument("--total-compliance", type=float, metavar="ML_PER_MMHG",
                    help="total arterial compliance for the bed set-up (default 1.5 per 5 L/min)")
    wk.add_argument("--no-setup", action="store_true",
                    help="never set beds up: beds without Windkessel data stay resistances")
    p.set_defaults(run=run)


def run(args) -> int:
    import dataclasses

    import numpy as np

    from .. import writers
    from ..errors import NetworkSpecError, Problem
    from ..pulse import DEFAULT_SAMPLES, solve_pulse
    from ..pulsereport import pulse_json, pulse_report, select_waveforms, write_pulse_tables
    from ..pulsesetup import (DEFAULT_HEART_RATE_HZ, aortic_pressure_waveform, setup_windkessels,
                              shape_constant_inflows)
    from ..reader import load_network
    from ..solve import solve
    from ..units import MMHG_PA
    from ..waveforms import DEFAULT_HARMONICS
    from ..waveformtable import read_waveform_table
    from .steady import emit, print_warnings

    net = load_network(args.file)
    notes: list[str] = []
    nodes = net.nodes
    steady = solve(net)
    inlets = [i for i in np.flatnonzero(~np.isnan(nodes.pressure_pa)) if steady.boundary_inflow_m3_s[i] > 0]
    if args.inlet is not None and args.inlet not in nodes.index:
        raise NetworkSpecError([Problem(args.file, 0, 0, f"--inlet '{args.inlet}'", "no such node",
                                        "name a node of the network")])
    pressure_waves = None
    if args.pressure_csv:
        target = _pressure_inlet(args, nodes, inlets)
        table = read_waveform_table(args.pressure_csv, "pressure", {"time": "s", "pressure": "mmHg"})
        if table.problems:
            raise NetworkSpecError(table.problems)
        mean = float(table.samples.mean())
        pressure = np.array(nodes.pressure_pa)
        pressure[target] = mean
        net = dataclasses.replace(net, nodes=dataclasses.replace(nodes, pressure_pa=pressure))
        steady = solve(net)
        pressure_waves = {nodes.ids[target]: {"period_s": table.period_s, "samples_pa": table.samples}}
        notes.append(f"pressure waveform at '{nodes.ids[target]}' from {args.pressure_csv} (mean "
                     f"{mean / MMHG_PA:.2f} mmHg, now the node's steady pressure)")
    setup = None
    no_data = np.isnan(net.beds.windkessel_proximal_pa_s_m3).all()
    if len(net.beds) and no_data and not args.no_setup:
        compliance = None if args.total_compliance is None else args.total_compliance * 1e-6 / MMHG_PA
        setup = setup_windkessels(net, total_compliance_m3_pa=compliance, steady=steady)
        net = setup.network
        notes.append("no bed had Windkessel data: set up from the bed resistances, the steady flow "
                     "shares and the total compliance: " + setup.summary())
    heart_rate = None if args.heart_rate is None else args.heart_rate / 60.0
    stroke = None if args.stroke_volume is None else args.stroke_volume * 1e-6
    if not args.constant_inflow:
        before = dict(net.nodes.inflow_waveforms)
        net = shape_constant_inflows(net, heart_rate_hz=heart_rate, stroke_volume_m3=stroke,
                                     ejection_time_s=args.ejection_time)
        for row in sorted(set(net.nodes.inflow_waveforms) - set(before)):
            w = net.nodes.inflow_waveforms[row]
            notes.append(f"constant inflow at '{net.nodes.ids[row]}' shaped into an ejection waveform "
                         f"with the same mean: stroke volume {w['stroke_volume_m3'] * 1e6:.1f} mL, "
                         f"{60 * w['heart_rate_hz']:.0f} bpm, ejection {w['ejection_time_s']:.3g} s")
    if pressure_waves is None and args.pulse_pressure > 0 and inlets:
        period = _period(net) or 1.0 / (heart_rate or DEFAULT_HEART_RATE_HZ)
        pressure_waves = {}
        for i in inlets:
            pressure_waves[nodes.ids[i]] = {"period_s": period, "samples_pa": aortic_pressure_waveform(
                net.nodes.pressure_pa[i], args.pulse_pressure * MMHG_PA, 1.0 / period,
                ejection_time_s=args.ejection_time)}
        notes.append(f"fixed-pressure inlet(s) {', '.join(repr(nodes.ids[i]) for i in inlets)} given an "
                     f"aortic pressure shape with the same mean and a pulse pressure of "
                     f"{args.pulse_pressure:g} mmHg at {60 / period:.0f} bpm")
    result = solve_pulse(net, steady=steady, pressure_waveforms=pressure_waves,
                         n_harmonics=DEFAULT_HARMONICS if args.harmonics is None else args.harmonics,
                         n_samples=DEFAULT_SAMPLES if args.samples is None else args.samples,
                         inlet=args.inlet)
    result = dataclasses.replace(result, notes=tuple(notes) + result.notes)
    selection = select_waveforms(result, args.waveform)
    paths = write_pulse_tables(result, args.output, selection) if args.output else []
    if args.html:
        from viz.waveforms import write_pulse_html

        write_pulse_html(result, args.html, selection=selection)
        paths.append(args.html)
    if args.json:
        emit(writers.dumps(pulse_json(result, selection=selection, setup=setup)))
    else:
        emit(pulse_report(result, selection, setup))
        if paths:
            emit("wrote " + ", ".join(str(p) for p in paths))
    print_warnings(result.warnings)
    return 0


def _pressure_inlet(args, nodes, inlets) -> int:
    import numpy as np

    from ..errors import NetworkSpecError, Problem

    if args.inlet is not None:
        row = nodes.index[args.inlet]
        if not np.isnan(nodes.pressure_pa[row]):
            return row
    elif len(inlets) == 1:
        return int(inlets[0])
    raise NetworkSpecError([Problem(args.file, 0, 0, "--pressure-csv",
                                    f"needs one fixed-pressure inlet, found {len(inlets)}",
                                    "name it with --inlet ID (a node with a fixed pressure)")])


def _period(net) -> float | None:
    for wave in net.nodes.inflow_waveforms.values():
        return float(wave["period_s"]) if "period_s" in wave else 1.0 / float(wave["heart_rate_hz"])
    return None
