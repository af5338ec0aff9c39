"""``vesselnet view FILE``: an interactive HTML view of a network's steady solution."""

from __future__ import annotations

import dataclasses

DEFAULT_COLORS = "flow,pressure,wss"


def add_parser(sub) -> None:
    p = sub.add_parser(
        "view", help="interactive HTML view of the network, its pressures, flows and bed shares",
        description="Solve a network and write an interactive HTML page: the network coloured by a "
                    "result (buttons switch between quantities), flow direction, beds with their "
                    "shares, and the bed-share chart. The page works offline. With --scenario, "
                    "the scenario is shown against the baseline.")
    p.add_argument("file", help="the network YAML file")
    p.add_argument("--scenario", nargs=2, metavar=("FILE", "NAME"),
                   help="also show scenario NAME of scenario file FILE against the baseline")
    p.add_argument("--color", default=None, metavar="QUANTITY[,QUANTITY...]",
                   help="what to colour vessels by: pressure, flow, wss, velocity, pressure_drop, "
                        "radius, reynolds, hematocrit, tube_hematocrit, wall_stress, wall_strain, "
                        "volume (default "
                        f"{DEFAULT_COLORS}, only flow above 3000 vessels; with --scenario the "
                        "change in flow)")
    p.add_argument("--3d", dest="dims", action="store_const", const=3, default=2,
                   help="draw in 3-D (default: the file's x-y plane)")
    p.add_argument("-o", "--output", default="view.html", metavar="PATH",
                   help="the HTML file to write (default view.html)")
    p.add_argument("--plotlyjs", choices=("embed", "beside"), default="embed",
                   help="embed plotly.js in the page (default) or write plotly.min.js once beside it")
    p.add_argument("--image", metavar="PATH",
                   help="also write the network figure as a static PNG, SVG or PDF (needs the "
                        "'images' extra: kaleido)")
    p.set_defaults(run=run)


def run(args) -> int:
    import os

    from ..reader import load_network
    from ..solve import solve
    from .steady import emit, print_warnings

    from viz.page import write_image, write_page
    from viz.quantities import quantity
    from viz.report import CAUTION, comparison_section, result_section

    colors = [c.strip() for c in (args.color or "").split(",") if c.strip()]
    for name in colors:
        quantity(name)
    network = load_network(args.file)
    result = solve(network)
    print_warnings(result.warnings)
    sections = [result_section(result, colors=colors or None, dims=args.dims)]
    figure = sections[0].figures[0]
    if args.scenario:
        outcome = scenario_outcome(network, *args.scenario)
        print_warnings(outcome.result.warnings)
        sections.insert(0, comparison_section(result, outcome.result, name=outcome.name,
                                              color=(colors or ["flow"])[0], dims=args.dims,
                                              vessel_origin=outcome.vessel_origin,
                                              text=[outcome.description] if outcome.description else []))
        figure = sections[0].figures[0]
    paths = write_page(args.output, f"vesselnet view: {network.name}", sections,
                       intro=[f"Network file: {os.path.basename(args.file)}"], footer=[CAUTION],
                       plotlyjs=args.plotlyjs)
    if args.image:
        try:
            paths.append(write_image(figure, args.image))
        except ImportError as exc:
            emit("wrote " + ", ".join(str(p) for p in paths))
            import sys

            print(f"vesselnet: {exc}", file=sys.stderr)
            return 2
    size_mb = os.path.getsize(paths[0]) / 1e6
    emit(f"wrote {paths[0]} ({size_mb:.1f} MB)" + "".join(f", {p}" for p in paths[1:]))
    return 0


def scenario_outcome(network, scenario_file: str, name: str):
    """Scenario ``name`` of ``scenario_file`` applied to ``network`` and solved against it.

    The scenario's changes are made to the viewed network (the file's own
    ``network:`` entry is not used), then solved with
    :func:`vesselnet.compare.compare_networks`, which also settles the targets
    of autoregulating beds from the baseline.

    Raises
    ------
    NetworkSpecError
        No scenario of that name, or changes that cannot be made.
    """
    from ..changefile import apply_changes
    from ..compare import compare_networks
    from ..errors import NetworkSpecError, Problem
    from ..scenarios import load_scenarios

    scenarios = load_scenarios(scenario_file).scenarios
    for scenario in scenarios:
        if scenario.name == name:
            changed = apply_changes(network, scenario.changes)
            (outcome,) = compare_networks(network, [(name, changed)]).scenarios
            return dataclasses.replace(outcome, description=scenario.description)
    names = ", ".join(repr(s.name) for s in scenarios)
    raise NetworkSpecError([Problem(scenario_file, 0, 0, "--scenario", f"no scenario named {name!r}",
                                    f"choose one of {names}")])
