"""``vesselnet demo``: solve the bundled demo networks and write an HTML report.

The report shows each demo network, then each scenario of one bundled
scenario file against its baseline (what the scenario changed).
"""

from __future__ import annotations

DEFAULT_REPORT = "vesselnet-demo/report.html"
DEMO_SCENARIOS = "collateral_steal"
"""The bundled scenario file whose scenarios the report shows against their baseline."""


def add_parser(sub) -> None:
    p = sub.add_parser("demo", help="solve the bundled demo networks, print their bed tables and "
                                    "write an HTML report",
                       description="Solve the bundled demo networks (invented, physiologically "
                                   "plausible), print each bed table with a summary, and write "
                                   "one interactive HTML report of them that works offline.")
    p.add_argument("-o", "--output", default=DEFAULT_REPORT, metavar="PATH",
                   help=f"the report to write (default {DEFAULT_REPORT} in the current folder)")
    p.add_argument("--plotlyjs", choices=("embed", "beside"), default="embed",
                   help="embed plotly.js in the report (default) or write plotly.min.js beside it")
    p.set_defaults(run=run)


def run(args) -> int:
    from ..demos import DEMOS, demo_path
    from ..reader import load_network
    from ..solve import solve
    from ..textreport import bed_table_text
    from .steady import emit, print_warnings

    results = []
    for name in DEMOS:
        path = demo_path(name)
        result = solve(load_network(path))
        results.append((path, result))
        emit(f"== {path.name}: {result.network.name}")
        emit(bed_table_text(result))
        emit(result.summary())
        emit("")
        print_warnings(result.warnings)

    from viz.page import write_page
    from viz.report import CAUTION, comparison_section, result_section

    from ..compare import compare_file

    sections = [result_section(result, text=(f"Bundled file: {path.name}",)) for path, result in results]
    scenario_path = demo_path(DEMO_SCENARIOS)
    comparison = compare_file(scenario_path)
    for outcome in comparison.scenarios:
        print_warnings(f"scenario '{outcome.name}': {w}" for w in outcome.result.warnings)
        note = f"Scenario from the bundled file {scenario_path.name}."
        sections.append(comparison_section(
            outcome.baseline, outcome.result, name=outcome.name, vessel_origin=outcome.vessel_origin,
            text=tuple(t for t in (outcome.description, note) if t)))
    paths = write_page(args.output, "vesselnet demo report", sections,
                       intro=["Steady pressures and flows of the bundled demo networks (invented, "
                              "physiologically plausible; no real patient), then the scenarios of "
                              f"{scenario_path.name} against their baseline."],
                       footer=[CAUTION], plotlyjs=args.plotlyjs)
    emit(f"wrote the report {paths[0]}" + "".join(f" (and {p})" for p in paths[1:])
         + "; open it in a web browser")
    return 0
