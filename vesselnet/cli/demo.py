"""``vesselnet demo``: solve the bundled demo networks."""

from __future__ import annotations


def add_parser(sub) -> None:
    p = sub.add_parser("demo", help="solve the bundled demo networks and print their bed tables",
                       description="Solve the bundled demo networks (invented, physiologically "
                                   "plausible) and print each bed table with a summary.")
    p.set_defaults(run=run)


def run(args) -> int:
    from ..demos import DEMOS, demo_path
    from ..reader import load_network
    from ..solve import solve
    from ..textreport import bed_table_text
    from .steady import emit, print_warnings

    for name in DEMOS:
        path = demo_path(name)
        result = solve(load_network(path))
        emit(f"== {path.name}: {result.network.name}")
        emit(bed_table_text(result))
        emit(result.summary())
        emit("")
        print_warnings(result.warnings)
    return 0
