"""``vesselnet generate OUT``: write a synthetic microvascular network."""

from __future__ import annotations


def add_parser(sub) -> None:
    p = sub.add_parser("generate", help="write a seeded synthetic microvascular network",
                       description="Generate an arteriolar tree feeding a capillary mesh drained "
                                   "by a venular tree (Murray-law radii) and write it as OUT.yaml "
                                   "with OUT_vessels.csv and OUT_nodes.csv beside it.")
    p.add_argument("out", help="output path without extension (or ending in .yaml)")
    p.add_argument("--segments", type=int, default=2000, metavar="N",
                   help="number of vessel segments (default 2000; at least 100)")
    p.add_argument("--seed", type=int, default=20250611, metavar="S",
                   help="random seed: the same seed gives the same network")
    p.add_argument("--law", default="pries-vivo", choices=("constant", "pries-vitro", "pries-vivo"),
                   help="viscosity law written into the file (default pries-vivo)")
    p.add_argument("--separation", default="pries-1990", choices=("none", "pries-1990", "pries-2005"),
                   help="phase-separation law written into the file (default pries-1990)")
    p.add_argument("--hematocrit", type=float, default=0.45, metavar="H",
                   help="discharge hematocrit at the inlet, a fraction (default 0.45)")
    p.set_defaults(run=run)


def run(args) -> int:
    from ..errors import NetworkSpecError, Problem
    from ..generate import describe, microvascular_network
    from ..networkwriter import write_network_yaml
    from .steady import emit

    if not 0 <= args.hematocrit < 1:
        raise NetworkSpecError([Problem("", 0, 0, "--hematocrit",
                                        f"must be a fraction in [0, 1), got {args.hematocrit:g}",
                                        "for example 0.45")])
    network = microvascular_network(args.segments, args.seed, viscosity_law=args.law,
                                    separation=args.separation, hematocrit=args.hematocrit)
    out = args.out if args.out.endswith(".yaml") else args.out + ".yaml"
    paths = write_network_yaml(network, out, tables=True,
                               comment=describe(network, args.segments, args.seed))
    emit(f"wrote {', '.join(str(p) for p in paths)}: {len(network.vessels)} vessels, "
         f"{len(network.nodes)} nodes")
    return 0
