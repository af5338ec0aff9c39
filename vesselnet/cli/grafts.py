"""``vesselnet grafts PLAN``: rank the candidate grafts of a plan file."""

from __future__ import annotations


def add_parser(sub) -> None:
    p = sub.add_parser("grafts", help="rank the candidate bypass grafts of a plan file",
                       description="Solve the healthy network, the diseased state and every candidate "
                                   "graft of a plan file; rank the candidates by the restored fraction "
                                   "of the lost target flow, with graft values, steal, flags and a "
                                   "seeded robustness check. A research and planning aid, not a "
                                   "medical device.")
    p.add_argument("file", help="the plan YAML file (or the name of a bundled one)")
    p.add_argument("--json", action="store_true", help="print the JSON result (and nothing else) on stdout")
    p.add_argument("--html", metavar="PATH", help="write an HTML report with network pictures to PATH")
    p.add_argument("--samples", type=int, default=None, metavar="N",
                   help="robustness samples (default the plan's, else 200; 0 switches it off)")
    p.add_argument("--seed", type=int, default=None, metavar="S", help="robustness seed (default the plan's)")
    p.add_argument("--max-iterations", type=int, default=None, metavar="N",
                   help="Newton step cap per solve (default 50)")
    p.set_defaults(run=run)


def run(args) -> int:
    import sys
    from pathlib import Path

    from .. import writers
    from ..errors import NetworkSpecError, Problem
    from ..grafts import rank_plan, ranking_json
    from ..grafttext import ranking_report
    from ..planfile import load_plan
    from ..solve import DEFAULT_MAX_ITERATIONS
    from .compare import _bundled
    from .steady import emit, print_warnings

    for name, value in (("--samples", args.samples), ("--seed", args.seed)):
        if value is not None and value < 0:
            raise NetworkSpecError([Problem("", 0, 0, name, f"must be >= 0, got {value}")])
    path = Path(args.file)
    if not path.exists():
        path = _bundled(args.file) or path
    ranking = rank_plan(load_plan(path), samples=args.samples, seed=args.seed,
                        max_iterations=args.max_iterations or DEFAULT_MAX_ITERATIONS)
    written = []
    if args.html:
        from viz.grafts import write_grafts_report

        written.append(write_grafts_report(ranking, args.html))
    if args.json:
        emit(writers.dumps(ranking_json(ranking)))
        for outcome in ranking.candidates:
            print_warnings(f"candidate '{outcome.id}': {w}" for w in outcome.result.warnings)
        if written:
            print("vesselnet: wrote " + ", ".join(str(p) for p in written), file=sys.stderr)
    else:
        emit(ranking_report(ranking))
        if written:
            emit("wrote " + ", ".join(str(p) for p in written))
    return 0

