"""``vesselnet check FILE``: validate a network, scenario or plan file."""

from __future__ import annotations


def add_parser(sub) -> None:
    p = sub.add_parser("check", help="validate a network, scenario or plan file",
                       description="Validate a file; every problem is reported with its line.")
    p.add_argument("file", help="the YAML file")
    p.add_argument("--network", metavar="NETWORK",
                   help="the network an uncertainty or targets file is checked against")
    p.set_defaults(run=run)


def run(args) -> int:
    import numpy as np

    from ..filekind import file_kind_of
    from ..reader import load_network
    from .steady import emit

    kind = file_kind_of(args.file)
    if kind == "scenario":
        from ..scenarios import check_scenario_file

        emit(check_scenario_file(args.file))
        return 0
    if kind == "plan":
        from ..planfile import check_plan_file

        emit(check_plan_file(args.file))
        return 0
    if kind in ("sweep", "uncertainty", "targets"):
        from .checkinputs import check_input_file

        emit(check_input_file(args.file, kind, getattr(args, "network", None)))
        return 0
    net = load_network(args.file)
    fixed = int((~np.isnan(net.nodes.pressure_pa)).sum())
    inflows = int((~np.isnan(net.nodes.inflow_m3_s)).sum())
    emit(f"{args.file}: valid network '{net.name}': {len(net.vessels)} vessels, "
         f"{len(net.nodes)} nodes, {len(net.beds)} beds, {fixed} fixed-pressure node(s), "
         f"{inflows} prescribed inflow(s)")
    return 0
