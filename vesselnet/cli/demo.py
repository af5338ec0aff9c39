"""``vesselnet demo``: solve the bundled demo networks and write an HTML report."""

from __future__ import annotations

DEFAULT_REPORT = "vesselnet-demo/report.html"


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
    from viz.report import CAUTION, result_section

    sections = [result_section(result, text=(f"Bundled file: {path.name}",)) for path, result in results]
    paths = write_page(args.output, "vesselnet demo report", sections,
                       intro=["Steady pressures and flows of the bundled demo networks (invented, "
                              "physiologically plausible; no real patient)."],
                       footer=[CAUTION], plotlyjs=args.plotlyjs)
    emit(f"wrote the report {paths[0]}" + "".join(f" (and {p})" for p in paths[1:])
         + "; open it in a web browser")
    return 0
