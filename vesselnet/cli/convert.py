"""``vesselnet convert IN OUT``: rewrite a network as binary columns (.npz) or JSON."""

from __future__ import annotations


def add_parser(sub) -> None:
    p = sub.add_parser("convert", help="rewrite a network file as .npz (fast binary columns) or .json",
                       description="Read and check a network (YAML with or without tables, JSON or "
                                   ".npz) and write it as OUT: .npz for large networks (reads back "
                                   "in a fraction of a second at 10^6 vessels) or .json, both in SI.")
    p.add_argument("input", help="the network file (.yaml, .yml, .json or .npz)")
    p.add_argument("output", help="the file to write, ending in .npz or .json")
    p.set_defaults(run=run)


def run(args) -> int:
    from ..netfiles import write_network
    from ..reader import load_network
    from .steady import emit

    net = load_network(args.input)
    path = write_network(net, args.output)
    emit(f"wrote {path}: {len(net.vessels)} vessels, {len(net.nodes)} nodes, {len(net.beds)} beds")
    return 0
