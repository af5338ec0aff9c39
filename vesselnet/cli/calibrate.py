"""``vesselnet calibrate FILE -o OUT``: bed resistances that meet the file's targets."""

from __future__ import annotations


def add_parser(sub) -> None:
    p = sub.add_parser(
        "calibrate", help="set bed resistances to meet share, flow and pressure targets",
        description="Set the resistance of every bed that has a target (a 'share:' in the file, "
                    "or --bed-flow) so that the network reproduces the targets exactly, together "
                    "with the nodes' 'target_pressure:' and the total inflow; write the "
                    "calibrated network file. Inconsistent targets are an error that says why.")
    p.add_argument("file", help="the network YAML file")
    p.add_argument("-o", "--output", metavar="OUT", help="write the calibrated network file here")
    p.add_argument("--targets", metavar="TARGETS",
                   help="a targets file (pressures, shares, flows, inflow) that adds to or replaces "
                        "the targets in the network file")
    p.add_argument("--inflow", metavar="FLOW",
                   help="total inflow the shares refer to, for a network fed at a fixed pressure "
                        "(for example '450 mL/min'; default unit mL/min)")
    p.add_argument("--bed-flow", metavar="ID=FLOW", action="append", default=[],
                   help="a flow target for one bed, replacing its share (repeatable), "
                        "for example kidney_left=550")
    p.add_argument("--json", action="store_true", help="print the JSON result (and nothing else) on stdout")
    p.set_defaults(run=run)


def run(args) -> int:
    from .. import writers
    from ..calibrate import calibrate
    from ..errors import UnitError
    from ..netpatch import write_network_with_beds
    from ..reader import load_network
    from ..units import to_si_value
    from .steady import emit, print_warnings

    network = load_network(args.file)
    flows, inflow = {}, None
    if args.targets:
        from ..targets import load_targets

        targets = load_targets(args.targets, network)
        network, flows, inflow = targets.network, dict(targets.bed_flow_m3_s), targets.inflow_m3_s
    for item in args.bed_flow:
        bed, sep, value = item.partition("=")
        if not sep or not bed.strip():
            raise UnitError(f"--bed-flow: expected ID=FLOW, got {item!r}")
        flows[bed.strip()] = to_si_value(value.strip(), "flow")
    if args.bed_flow:
        network = _without_shares(network, flows)
    if args.inflow:
        inflow = to_si_value(args.inflow, "flow")
    cal = calibrate(network, bed_flow_m3_s=flows or None, inflow_m3_s=inflow)
    paths = []
    if args.output:
        source = f" with the targets of {args.targets}" if args.targets else ""
        header = (f"# Calibrated by vesselnet calibrate from {args.file}{source}: the resistances "
                  f"of {int(cal.calibrated.sum())} beds were set to meet their targets.\n")
        paths = write_network_with_beds(args.file, args.output, cal.network, cal.calibrated,
                                        header=header)
    if args.json:
        emit(writers.dumps(calibration_json(cal, paths)))
    else:
        emit(calibration_report(cal))
        emit("wrote " + ", ".join(str(p) for p in paths) if paths
             else "no file written (give -o OUT to write the calibrated network)")
    print_warnings(cal.result.warnings)
    return 0


def _without_shares(network, flows):
    """``network`` with the share of every bed given a flow target removed (the flow replaces it)."""
    import dataclasses

    import numpy as np

    share = network.beds.share.copy()
    for bed in flows:
        if bed in network.beds.index:
            share[network.beds.index[bed]] = np.nan
    return dataclasses.replace(network, beds=dataclasses.replace(network.beds, share=share))


def calibration_report(cal) -> str:
    """The terminal report: what was met, and each bed's resistance before and after."""
    import numpy as np

    from ..textreport import format_table
    from ..units import MMHG_PA

    net = cal.network
    beds = net.beds
    r_unit = 1e6 * MMHG_PA
    t = cal.bed_table()
    rows = []
    for i in range(len(beds)):
        before, after = t["resistance_before_pa_s_m3"][i], t["resistance_pa_s_m3"][i]
        target = (100 * t["target_share"][i] if not np.isnan(t["target_share"][i])
                  else 100 * t["target_flow_m3_s"][i] / cal.result.inflow_m3_s)
        rows.append([beds.ids[i], target if t["calibrated"][i] else float("nan"),
                     100 * t["share"][i], t["flow_m3_s"][i] * 6e7, before / r_unit, after / r_unit,
                     100 * (after / before - 1) if t["calibrated"][i] else float("nan")])
    lines = [f"{net.name}: {int(cal.calibrated.sum())} of {len(beds)} bed resistances calibrated; "
             f"total inflow {cal.result.inflow_m3_s * 6e7:.1f} mL/min ({cal.inflow_source})"]
    for k in np.flatnonzero(~np.isnan(cal.target_pressure_pa)):
        lines.append(f"pressure at '{net.nodes.ids[k]}': {cal.result.pressure_pa[k] / MMHG_PA:.3f} mmHg "
                     f"(target {cal.target_pressure_pa[k] / MMHG_PA:.3f})")
    lines.append(f"targets met to {max(cal.flow_error, cal.pressure_error):.1e} (relative)")
    lines.append("")
    lines.append(format_table(["bed", "target [%]", "share [%]", "flow [mL/min]",
                               "R before [mmHg*s/mL]", "R after [mmHg*s/mL]", "change [%]"],
                              rows, digits=3))
    return "\n".join(lines)


def calibration_json(cal, paths) -> dict:
    """The ``calibrate --json`` document."""
    from .. import writers
    from ..units import MMHG_PA

    t = cal.bed_table()
    r_unit = 1e6 * MMHG_PA
    beds = []
    for i, bed_id in enumerate(cal.network.beds.ids):
        beds.append({"id": bed_id, "calibrated": bool(t["calibrated"][i]),
                     "resistance_before": writers.number(t["resistance_before_pa_s_m3"][i] / r_unit),
                     "resistance": writers.number(t["resistance_pa_s_m3"][i] / r_unit),
                     "target_share": writers.number(t["target_share"][i]),
                     "target_flow": writers.number(t["target_flow_m3_s"][i] * 6e7),
                     "share": writers.number(t["share"][i]), "flow": writers.number(t["flow_m3_s"][i] * 6e7)})
    nodes = cal.network.nodes
    targets = [{"node": nodes.ids[k], "target": writers.number(cal.target_pressure_pa[k] / MMHG_PA),
                "pressure": writers.number(cal.result.pressure_pa[k] / MMHG_PA)}
               for k in range(len(nodes)) if cal.target_pressure_pa[k] == cal.target_pressure_pa[k]]
    return {"vesselnet": writers.FORMAT_VERSION, "network": cal.network.name,
            "units": {"flow": "mL/min", "pressure": "mmHg", "resistance": "mmHg*s/mL"},
            "inflow": writers.number(cal.result.inflow_m3_s * 6e7), "inflow_source": cal.inflow_source,
            "pressure_targets": targets, "beds": beds,
            "checks": {"flow_error": writers.number(cal.flow_error),
                       "pressure_error": writers.number(cal.pressure_error)},
            "written": [str(p) for p in paths], "warnings": list(cal.result.warnings)}
