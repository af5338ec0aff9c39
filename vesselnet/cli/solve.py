"""``vesselnet solve FILE``: the steady solution."""

from __future__ import annotations


def add_parser(sub) -> None:
    p = sub.add_parser("solve", help="steady pressures, flows, bed shares and wall shear stress",
                       description="Solve the steady pressure-flow problem of a network file.")
    p.add_argument("file", help="the network file (.yaml, .json or .npz)")
    p.add_argument("--json", action="store_true", help="print the JSON result (and nothing else) on stdout")
    p.add_argument("-o", "--output", metavar="DIR", help="write nodes.csv, vessels.csv and beds.csv into DIR")
    p.add_argument("--solver", default="auto", choices=("auto", "superlu", "tree", "cholmod", "amg"),
                   help="linear solver (default auto: O(n) elimination for trees, else CHOLMOD when "
                        "installed, else SuperLU); the result says which ran and why")
    p.set_defaults(run=run)


def run(args) -> int:
    from .. import writers
    from ..reader import load_network
    from ..solve import solve
    from ..textreport import solve_report
    from .steady import emit, print_warnings

    result = solve(load_network(args.file), method=args.solver)
    if args.output:
        paths = writers.write_tables(result, args.output)
    if args.json:
        emit(writers.dumps(writers.result_json(result)))
        print_warnings(result.warnings)
    else:
        emit(solve_report(result))
    if args.output and not args.json:
        emit("wrote " + ", ".join(str(p) for p in paths))
    return 0
