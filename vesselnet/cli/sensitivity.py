"""``vesselnet sensitivity FILE``: what matters most for each bed's share (adjoint elasticities)."""

from __future__ import annotations

from ..caution import CAUTION


def add_parser(sub) -> None:
    p = sub.add_parser(
        "sensitivity", help="rank what changes each bed's share most (elasticities, %% per %%)",
        description="Derivatives of each bed's flow share with respect to every vessel radius, "
                    "bed resistance and lesion severity, by the adjoint method, as elasticities "
                    "(% change of the share per % change of the parameter).")
    p.add_argument("file", help="the network YAML file")
    p.add_argument("--bed", action="append", metavar="ID", help="only this bed (repeatable)")
    p.add_argument("--top", type=int, default=5, metavar="N", help="parameters listed per bed (default 5)")
    p.add_argument("--json", action="store_true", help="print the JSON result (and nothing else) on stdout")
    p.set_defaults(run=run)


def run(args) -> int:
    from .. import writers
    from ..errors import NetworkSpecError, Problem
    from ..reader import load_network
    from ..sensitivity import sensitivity
    from .steady import emit, print_warnings

    network = load_network(args.file)
    unknown = [b for b in (args.bed or ()) if b not in network.beds.index]
    if unknown:
        raise NetworkSpecError([Problem(args.file, 0, 0, f"--bed '{b}'", "no such bed in the network",
                                        "beds: " + ", ".join(network.beds.ids[:10]))
                                for b in unknown])
    if args.top < 1:
        raise NetworkSpecError([Problem("", 0, 0, "--top", f"must be at least 1, got {args.top}")])
    sens = sensitivity(network, beds=args.bed)
    if args.json:
        emit(writers.dumps(sensitivity_json(sens, args.top)))
    else:
        emit(sensitivity_report(sens, args.top))
    print_warnings(sens.result.warnings)
    return 0


WHAT = {"radius": "radius of vessel", "resistance": "resistance of bed", "stenosis": "stenosis of vessel"}


def sensitivity_report(sens, top: int) -> str:
    """Per bed, its share and the ``top`` parameters ranked by |elasticity|."""
    from ..textreport import format_table

    shares = sens.result.bed_share
    parts = [f"{sens.result.network.name}: elasticities of bed shares (% change of the share per "
             f"1 % change of the parameter), adjoint method", CAUTION, ""]
    for bed, row in zip(sens.beds, sens.bed_rows):
        ranked = sens.ranked(bed, top=top)
        parts.append(f"bed '{bed}' (share {100 * shares[row]:.2f} %): what matters most")
        parts.append(format_table(["#", "parameter", "item", "elasticity [%/%]"],
                                  [[str(k + 1), WHAT[kind], item, e] for k, (kind, item, e)
                                   in enumerate(ranked)], digits=4))
        parts.append("")
    return "\n".join(parts).rstrip()


def sensitivity_json(sens, top: int) -> dict:
    """The ``sensitivity --json`` document: per bed its share and ranked parameters."""
    from .. import writers

    beds = []
    for bed, row in zip(sens.beds, sens.bed_rows):
        beds.append({"id": bed, "share": writers.number(sens.result.bed_share[row]),
                     "ranked": [{"kind": kind, "item": item, "elasticity": writers.number(e)}
                                for kind, item, e in sens.ranked(bed, top=top)]})
    return {"vesselnet": writers.FORMAT_VERSION, "network": sens.result.network.name,
            "method": "adjoint", "quantity": "d ln(share) / d ln(parameter)", "caution": CAUTION,
            "beds": beds, "warnings": list(sens.result.warnings)}
