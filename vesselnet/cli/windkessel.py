"""``vesselnet windkessel FILE -o OUT``: give the beds three-element Windkessels (REFERENCES 5.6)."""

from __future__ import annotations


def add_parser(sub) -> None:
    p = sub.add_parser("windkessel", help="set up Windkessel beds for pulsatile work; write the network",
                       description="Give every arterial bed a three-element Windkessel: R1 the "
                                   "characteristic impedance of its terminal vessel, R2 the rest of "
                                   "its resistance (steady results unchanged), C its flow share of "
                                   "the total compliance minus the compliance of the modelled vessels. "
                                   "Writes the network file with the windkessel blocks.")
    p.add_argument("file", help="the network YAML file")
    p.add_argument("-o", "--output", metavar="OUT", required=True, help="network file to write")
    p.add_argument("--total-compliance", type=float, metavar="ML_PER_MMHG",
                   help="total arterial compliance (default 1.5 mL/mmHg per 5 L/min of inflow)")
    p.add_argument("--json", action="store_true", help="print the set-up as JSON on stdout")
    p.set_defaults(run=run)


def run(args) -> int:
    from .. import writers
    from ..networkwriter import write_network_yaml
    from ..pulsereport import setup_json
    from ..pulsesetup import setup_windkessels
    from ..reader import load_network
    from ..units import MMHG_PA
    from .steady import emit

    net = load_network(args.file)
    compliance = None if args.total_compliance is None else args.total_compliance * 1e-6 / MMHG_PA
    setup = setup_windkessels(net, total_compliance_m3_pa=compliance)
    paths = write_network_yaml(setup.network, args.output)
    if args.json:
        emit(writers.dumps({"vesselnet": writers.FORMAT_VERSION, "network": net.name,
                            "units": {"resistance": "mmHg*s/mL", "compliance": "mL/mmHg"},
                            "windkessel": setup_json(setup), "output": str(args.output)}))
    else:
        emit(f"{net.name}: {setup.summary()}")
        emit(f"wrote {', '.join(str(p) for p in paths)}")
    return 0
