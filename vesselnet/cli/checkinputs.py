"""``vesselnet check`` for sweep, uncertainty and targets files."""

from __future__ import annotations


def check_input_file(path, kind: str, network_path: str | None) -> str:
    """Validate a sweep file (with the network it names) or an uncertainty or targets file
    (against ``network_path``); returns a one-line description.

    Raises
    ------
    NetworkSpecError
        Every problem found, located; or no network given for a file that needs one.
    """
    from ..errors import NetworkSpecError, Problem
    from ..reader import load_network

    if kind == "sweep":
        from ..sweep import load_sweep

        spec = load_sweep(path)
        what = (f"{len(spec.parameters)} parameter(s)" if spec.parameters
                else f"{len(spec.cases)} listed case(s)")
        return (f"{path}: valid sweep file '{spec.name}': {what}, {len(spec.cases)} case(s) on "
                f"network '{spec.network.name}', {len(spec.report)} bed(s) reported")
    if not network_path:
        raise NetworkSpecError([Problem(str(path), 0, 0, "", f"this {kind} file names items of a network, "
                                        "so it is checked against one",
                                        "give the network: vesselnet check FILE --network NETWORK.yaml")])
    network = load_network(network_path)
    if kind == "uncertainty":
        from ..uncertainty import load_uncertainty

        spec = load_uncertainty(path, network)
        return (f"{path}: valid uncertainty file: {len(spec.entries)} uncertain input(s) for "
                f"network '{network.name}'")
    from ..targets import load_targets

    targets = load_targets(path, network)
    net = targets.network
    count = int((net.beds.share == net.beds.share).sum()) + len(targets.bed_flow_m3_s)
    pressures = int((net.nodes.target_pressure_pa == net.nodes.target_pressure_pa).sum())
    return (f"{path}: valid targets file: {count} bed target(s), {pressures} pressure target(s) "
            f"for network '{network.name}'")
