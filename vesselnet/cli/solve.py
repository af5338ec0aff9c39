"""``vesselnet solve FILE``: the steady solution."""

from __future__ import annotations


def add_parser(sub) -> None:
    p = sub.add_parser("solve", help="steady pressures, flows, bed shares and wall shear stress",
                       description="Solve the steady pressure-flow problem of a network file.")
    p.add_argument("file", help="the network file (.yaml, .json or .npz)")
    p.add_argument("--json", action="store_true", help="print the JSON result (and nothing else) on stdout")
    p.add_argument("-o", "--output", metavar="PATH",
                   help="write nodes.csv, vessels.csv and beds.csv into the folder PATH, or, for a PATH "
                        "ending in .npz, every result column (SI) into one binary file (large networks)")
    p.add_argument("--solver", default="auto", choices=("auto", "superlu", "tree", "cholmod", "amg"),
                   help="linear solver (default auto: O(n) elimination for trees, else CHOLMOD when "
                        "installed, else SuperLU); the result says which ran and why")
    rheology = p.add_argument_group("microvascular rheology (networks with a viscosity or separation law)")
    rheology.add_argument("--relaxation", type=float, metavar="W", default=None,
                          help="under-relaxation of the hematocrit update, in (0, 1] (default 0.5)")
    rheology.add_argument("--rheology-tolerance", type=float, metavar="TOL", default=None,
                          help="largest hematocrit and relative flow change accepted (default 1e-6)")
    rheology.add_argument("--rheology-iterations", type=int, metavar="N", default=None,
                          help="coupled iterations before giving up (default 300)")
    rheology.add_argument("--anderson-memory", type=int, metavar="M", default=None,
                          help="iterates combined by Anderson acceleration; 0: plain relaxation "
                               "(default 5)")
    p.set_defaults(run=run)


def run(args) -> int:
    from .. import writers
    from ..reader import load_network
    from ..rheology import needs_rheology, solve_rheology
    from ..solve import solve
    from ..textreport import solve_report
    from .steady import emit, print_warnings

    network = load_network(args.file)
    options = {key: value for key, value in (("relaxation", args.relaxation),
                                             ("tolerance", args.rheology_tolerance),
                                             ("max_iterations", args.rheology_iterations),
                                             ("anderson_memory", args.anderson_memory))
               if value is not None}
    if options or needs_rheology(network):
        result = solve_rheology(network, method=args.solver, **options)
    else:
        result = solve(network, method=args.solver)
    if args.output and args.output.lower().endswith(".npz"):
        paths = [writers.write_arrays(result, args.output)]
    elif args.output:
        paths = writers.write_tables(result, args.output)
    if args.json:
        emit(writers.dumps(writers.result_json(result)))
        print_warnings(result.warnings)
    else:
        emit(solve_report(result))
    if args.output and not args.json:
        emit("wrote " + ", ".join(str(p) for p in paths))
    return 0
