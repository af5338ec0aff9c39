"""Calibration: bed resistances that reproduce measured targets exactly.

Targets are bed flow shares (or bed flows), a node's mean pressure
(``target_pressure``, typically the inlet) and the total inflow.  Once the
flow of every targeted bed and the targeted pressures are fixed, the vessel
network is an ordinary nodal problem: each targeted bed becomes a prescribed
outflow at its node (and a prescribed inflow at its outflow node for a bed in
series), each target pressure a fixed pressure.  One solve gives every nodal
pressure, and then each bed's resistance directly::

    R_bed = (p_node - p_outflow) / Q_target

No optimisation is involved.  Lesions make the vessel laws nonlinear; the
same problem is then solved by Newton's method on the pressures (with the
flows fixed at the beds the system is still square and well posed).

Examples
--------
>>> from vesselnet.model import Network
>>> net = Network.build(
...     nodes={"root": {"inflow_m3_s": 1e-4, "target_pressure_pa": 12000.0}},
...     vessels=[{"id": "trunk", "from": "root", "to": "fork", "length_m": 0.1, "radius_m": 0.004},
...              {"id": "left", "from": "fork", "to": "l", "length_m": 0.1, "radius_m": 0.002},
...              {"id": "right", "from": "fork", "to": "r", "length_m": 0.1, "radius_m": 0.002}],
...     beds=[{"id": "a", "node": "l", "resistance_pa_s_m3": 1e8, "share": 0.3},
...           {"id": "b", "node": "r", "resistance_pa_s_m3": 1e8, "share": 0.7}])
>>> cal = calibrate(net)
>>> [round(float(s), 12) for s in cal.result.bed_share]
[0.3, 0.7]
>>> round(float(cal.result.pressure_pa[0]), 6)
12000.0
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from .errors import NetworkSpecError, Problem, SolveError
from .model import Beds, Network
from .result import SteadyResult
from .solve import solve
from .topology import connected_parts
from .units import MMHG_PA

TOLERANCE = 1e-9
"""Targets must be reproduced to this fraction (of the total inflow for flows,
of the largest pressure for pressures)."""

MAX_NAMED = 8
ML_MIN = 1e-6 / 60


@dataclass(frozen=True, eq=False)
class Calibration:
    """A calibrated network and how well it meets its targets.

    Attributes
    ----------
    network : Network
        The calibrated network (targeted beds carry their new resistance).
    original : Network
        The network before calibration.
    result : SteadyResult
        The steady solution of the calibrated network.
    calibrated : ndarray of bool, shape (n_beds,)
        True for beds whose resistance was set.
    target_flow_m3_s : ndarray, shape (n_beds,)
        The flow each targeted bed was given (NaN for the others).
    target_share : ndarray, shape (n_beds,)
        The share targets (NaN where the bed had none or a flow target).
    target_pressure_pa : ndarray, shape (n_nodes,)
        Pressure targets (NaN: none).
    inflow_m3_s : float
        Total inflow the shares refer to.
    inflow_source : str
        Where that inflow came from (prescribed, requested, present solution,
        or found so that the shares are shares of the calibrated total).
    flow_error : float
        Largest |bed flow - target| over the total inflow.
    pressure_error : float
        Largest |pressure - target| over the largest pressure.
    """

    network: Network
    original: Network
    result: SteadyResult
    calibrated: np.ndarray
    target_flow_m3_s: np.ndarray
    target_share: np.ndarray
    target_pressure_pa: np.ndarray
    inflow_m3_s: float
    inflow_source: str
    flow_error: float
    pressure_error: float

    @property
    def resistance_pa_s_m3(self) -> np.ndarray:
        """Bed resistances after calibration (Pa*s/m^3)."""
        return self.network.beds.resistance_pa_s_m3

    def bed_table(self) -> dict[str, np.ndarray]:
        """Per-bed columns (SI): old and new resistance, targets, achieved share and flow."""
        beds = self.network.beds
        return {"id": np.array(beds.ids, dtype=object), "calibrated": self.calibrated,
                "resistance_before_pa_s_m3": self.original.beds.resistance_pa_s_m3,
                "resistance_pa_s_m3": beds.resistance_pa_s_m3,
                "target_share": self.target_share, "target_flow_m3_s": self.target_flow_m3_s,
                "share": self.result.bed_share, "flow_m3_s": self.result.bed_flow_m3_s}


def calibrate(network: Network, *, bed_flow_m3_s: Mapping[str, float] | None = None,
              inflow_m3_s: float | None = None) -> Calibration:
    """Set bed resistances so that the network meets its targets exactly.

    Parameters
    ----------
    network : Network
        Targets are read from it: bed ``share`` and node ``target_pressure_pa``.
    bed_flow_m3_s : mapping of bed id to flow (m^3/s), optional
        Flow targets, instead of shares, for some beds.
    inflow_m3_s : float, optional
        Total inflow the shares refer to, for networks fed at a fixed
        pressure (a network with a prescribed inflow uses that).

    Returns
    -------
    Calibration

    Raises
    ------
    NetworkSpecError
        The targets are inconsistent or incomplete; the message says which
        and why: shares that do not add up, a pressure that is already fixed,
        pressures left undetermined, a bed that would need a negative
        resistance.
    SolveError
        The nonlinear solve did not converge.

    Notes
    -----
    The total inflow Q the shares refer to is, in order: the prescribed
    inflow of a network without fixed-pressure nodes; ``inflow_m3_s``; for a
    network fed at a fixed pressure in which every terminal bed has a target,
    its present total inflow (the shares alone do not fix it); otherwise the
    inflow for which the shares are shares of the calibrated network's own
    total (found by the secant method; one step for linear networks).

    Each connected part of the network that remains once the targeted beds
    are replaced by their flows needs exactly one pressure reference: a
    target pressure (then the flows in and out of the part must balance,
    which is where shares summing to one comes from), or a fixed pressure or
    beds without targets (then no target pressure may lie in it).
    """
    problems = _target_problems(network, bed_flow_m3_s, inflow_m3_s)
    if problems:
        raise NetworkSpecError(problems)
    beds, nodes = network.beds, network.nodes
    flow_target = np.full(len(beds), np.nan)
    for bed_id, q in (bed_flow_m3_s or {}).items():
        flow_target[beds.index[bed_id]] = float(q)
    share = np.where(np.isnan(flow_target), beds.share, np.nan)
    targeted = ~np.isnan(share) | ~np.isnan(flow_target)
    target_p = np.where(np.isnan(nodes.pressure_pa), nodes.target_pressure_pa, np.nan)
    fixed_nodes = ~np.isnan(nodes.pressure_pa)
    prescribed = np.where(np.isnan(nodes.inflow_m3_s), 0.0, nodes.inflow_m3_s)
    free_beds_terminal = (~targeted & (beds.outflow_node < 0)).any()

    def flows_for(total):
        return np.where(np.isnan(flow_target), share * total, flow_target)

    shares_given = bool((~np.isnan(share)).any())
    if not fixed_nodes.any() and (prescribed != 0).any():
        total, source = float(prescribed[prescribed > 0].sum()), "prescribed inflow"
    elif inflow_m3_s is not None:
        total, source = float(inflow_m3_s), "requested inflow"
    elif not shares_given:
        total, source = np.nan, "not needed (flow targets only)"
    elif not free_beds_terminal:
        total = solve(network).inflow_m3_s
        source = "present solution (the shares alone do not fix it)"
    else:
        total, source = None, "total of the calibrated network"
    if total is not None:
        net, result = _calibrate_at(network, flows_for(total), targeted, target_p)
    else:
        total, net, result = _self_consistent_total(network, flows_for, targeted, target_p)
    calibration = _checked(network, net, result, flows_for(total), share, targeted, target_p,
                           total, source)
    return calibration


def _target_problems(network: Network, bed_flows, inflow) -> list[Problem]:
    """Targets that are missing, contradictory or out of range, before any solve."""
    beds, nodes = network.beds, network.nodes
    file = network.source
    out = []
    for bed_id, q in (bed_flows or {}).items():
        if bed_id not in beds.index:
            out.append(Problem(file, 0, 0, f"bed '{bed_id}'", "no such bed", "check the id"))
            continue
        i = beds.index[bed_id]
        if not np.isnan(beds.share[i]):
            out.append(Problem(file, int(beds.line[i]), 0, f"beds '{bed_id}'",
                               "has both a share and a flow target", "give one of them"))
        if not (np.isfinite(q) and q > 0):
            out.append(Problem(file, int(beds.line[i]), 0, f"beds '{bed_id}'",
                               f"a flow target must be > 0, got {q / ML_MIN:g} mL/min"))
    has_flow = np.zeros(len(beds), dtype=bool)
    for bed_id in (bed_flows or {}):
        if bed_id in beds.index:
            has_flow[beds.index[bed_id]] = True
    zero = np.flatnonzero((beds.share == 0) & ~has_flow)
    for i in zero:
        out.append(Problem(file, int(beds.line[i]), 0, f"beds '{beds.ids[i]}'",
                           "share 0 would need an infinite resistance",
                           "give a positive share, or remove the share and the bed keeps its resistance"))
    if not ((~np.isnan(beds.share)).any() or has_flow.any()):
        out.append(Problem(file, 0, 0, "beds", "no calibration targets: no bed has a share or a flow target",
                           "add 'share:' to the beds to calibrate"))
    both = ~np.isnan(nodes.pressure_pa) & ~np.isnan(nodes.target_pressure_pa)
    for i in np.flatnonzero(both):
        if abs(nodes.pressure_pa[i] - nodes.target_pressure_pa[i]) > 1e-9 * abs(nodes.pressure_pa[i]):
            out.append(Problem(file, int(nodes.line[i]), 0, f"nodes '{nodes.ids[i]}'",
                               f"has a fixed pressure ({nodes.pressure_pa[i] / MMHG_PA:.6g} mmHg) and a "
                               f"different target_pressure ({nodes.target_pressure_pa[i] / MMHG_PA:.6g} mmHg)",
                               "keep one of them"))
    if inflow is not None:
        if not (np.isfinite(inflow) and inflow > 0):
            out.append(Problem(file, 0, 0, "inflow", f"the total inflow must be > 0, got {inflow}"))
        elif not np.isnan(nodes.inflow_m3_s).all() and np.isnan(nodes.pressure_pa).all():
            given = np.nansum(nodes.inflow_m3_s) / ML_MIN
            out.append(Problem(file, 0, 0, "inflow",
                               f"the network prescribes its inflow ({given:.6g} mL/min) already",
                               "change the inflow in the file instead"))
        elif (~np.isnan(beds.share)).any() and ((np.isnan(beds.share) & ~has_flow)
                                                 & (beds.outflow_node < 0)).any():
            free = [beds.ids[i] for i in np.flatnonzero(np.isnan(beds.share) & ~has_flow
                                                        & (beds.outflow_node < 0))]
            out.append(Problem(file, 0, 0, "inflow",
                               "a total inflow target into a network fed at a fixed pressure needs a "
                               "target on every terminal bed: the beds without one (" + _names(free) +
                               ") keep their resistance, so they, not the target, decide the inflow",
                               "give those beds a share, or drop the inflow target"))
    return out


def _names(ids) -> str:
    ids = list(ids)
    shown = ", ".join(f"'{i}'" for i in ids[:MAX_NAMED])
    return shown + (f" and {len(ids) - MAX_NAMED} more" if len(ids) > MAX_NAMED else "")


def take_beds(beds: Beds, keep: np.ndarray) -> Beds:
    """The beds of rows ``keep`` (bool mask or rows), every column sliced alike."""
    rows = np.flatnonzero(keep) if np.asarray(keep).dtype == bool else np.asarray(keep)
    changes = {}
    for f in dataclasses.fields(beds):
        value = getattr(beds, f.name)
        if isinstance(value, np.ndarray):
            changes[f.name] = value[rows]
    return dataclasses.replace(beds, ids=tuple(beds.ids[i] for i in rows), **changes)


def flow_fixed_network(network: Network, flows_m3_s: np.ndarray, targeted: np.ndarray,
                       target_pressure_pa: np.ndarray) -> Network:
    """The network with targeted beds replaced by their flows and target pressures fixed.

    Parameters
    ----------
    network : Network
    flows_m3_s : ndarray, shape (n_beds,)
        Flow of each targeted bed (ignored elsewhere).
    targeted : ndarray of bool, shape (n_beds,)
    target_pressure_pa : ndarray, shape (n_nodes,)
        Pressures to fix (NaN: none).

    Returns
    -------
    Network
        Targeted beds removed; their flows leave their node as a negative
        prescribed inflow and, for beds in series, enter their outflow node.
    """
    beds, nodes = network.beds, network.nodes
    n = len(nodes)
    t = np.flatnonzero(targeted)
    inflow = np.where(np.isnan(nodes.inflow_m3_s), 0.0, nodes.inflow_m3_s)
    inflow = inflow - np.bincount(beds.node[t], flows_m3_s[t], n)
    series = t[beds.outflow_node[t] >= 0]
    inflow = inflow + np.bincount(beds.outflow_node[series], flows_m3_s[series], n)
    pressure = np.where(np.isnan(target_pressure_pa), nodes.pressure_pa, target_pressure_pa)
    return dataclasses.replace(network, nodes=dataclasses.replace(nodes, inflow_m3_s=inflow,
                                                                  pressure_pa=pressure),
                               beds=take_beds(beds, ~targeted))


def _calibrate_at(network: Network, flows: np.ndarray, targeted: np.ndarray,
                  target_p: np.ndarray) -> tuple[Network, SteadyResult]:
    """Resistances for given target flows; the calibrated network and its solution."""
    aux = flow_fixed_network(network, flows, targeted, target_p)
    _check_parts(network, aux, flows, targeted, target_p)
    fixed_result = solve(aux)
    beds = network.beds
    p = fixed_result.pressure_pa
    outflow = np.where(beds.outflow_node >= 0, p[np.maximum(beds.outflow_node, 0)],
                       beds.outflow_pressure_pa)
    drop = p[beds.node] - outflow
    t = np.flatnonzero(targeted)
    resistance = beds.resistance_pa_s_m3.copy()
    resistance[t] = drop[t] / flows[t]
    bad = t[~(resistance[t] > 0) | ~np.isfinite(resistance[t])]
    if len(bad):
        raise NetworkSpecError([_negative_problem(network, bad, p[beds.node], outflow, flows)])
    proximal = beds.windkessel_proximal_pa_s_m3.copy()
    scaled = np.isfinite(proximal) & targeted
    proximal[scaled] *= resistance[scaled] / beds.resistance_pa_s_m3[scaled]
    new_beds = dataclasses.replace(beds, resistance_pa_s_m3=resistance,
                                   windkessel_proximal_pa_s_m3=proximal)
    calibrated = dataclasses.replace(network, beds=new_beds)
    return calibrated, solve(calibrated)


def _negative_problem(network, bad, p_node, p_out, flows) -> Problem:
    """One problem for every bed that would need a resistance <= 0."""
    beds, ids = network.beds, network.nodes.ids

    def drain(i):
        if beds.outflow_node[i] >= 0:
            return f"outflow node '{ids[beds.outflow_node[i]]}'"
        return "outflow pressure"

    first = bad[0]
    text = (f"would need a negative resistance: with the target flows the pressure at its node "
            f"'{ids[beds.node[first]]}' comes out at {p_node[first] / MMHG_PA:.4g} mmHg, not above "
            f"its {drain(first)} ({p_out[first] / MMHG_PA:.4g} mmHg), so no positive resistance "
            f"passes {flows[first] / ML_MIN:.4g} mL/min")
    if len(bad) > 1:
        more = [f"'{beds.ids[i]}' ({p_node[i] / MMHG_PA:.4g} vs {p_out[i] / MMHG_PA:.4g} mmHg)"
                for i in bad[1:MAX_NAMED]]
        extra = f" and {len(bad) - MAX_NAMED} more" if len(bad) > MAX_NAMED else ""
        text += "; so would " + ", ".join(more) + extra
    return Problem(network.source, int(beds.line[first]), 0, f"beds '{beds.ids[first]}'", text,
                   "the target pressure is too low, or the vessels leading to the bed are too "
                   "narrow for the flow asked (their pressure drop uses up the perfusion pressure): "
                   "raise target_pressure, lower the share, or check those vessels")


def _check_parts(network: Network, aux: Network, flows, targeted, target_p) -> None:
    """Each part of the flow-fixed network needs exactly one pressure reference, and balance."""
    parts = connected_parts(aux)
    nodes = network.nodes
    has_target = ~np.isnan(target_p)
    fixed = ~np.isnan(nodes.pressure_pa)
    terminal_free_beds = aux.beds.node[aux.beds.outflow_node < 0]
    refs = np.bincount(parts.label[fixed], minlength=parts.count)
    refs += np.bincount(parts.label[terminal_free_beds], minlength=parts.count)
    n_targets = np.bincount(parts.label[has_target], minlength=parts.count)
    net_in = np.bincount(parts.label, aux.nodes.inflow_m3_s, minlength=parts.count)
    scale = max(float(np.abs(aux.nodes.inflow_m3_s).sum()), 1e-300)
    problems = []
    for k in range(parts.count):
        members = np.flatnonzero(parts.label == k)
        where = _part_label(network, members, has_target)
        if n_targets[k] and (refs[k] or n_targets[k] > 1):
            problems.append(_overdetermined(network, members, has_target, fixed, aux, k, parts))
        elif not refs[k] and abs(net_in[k]) > TOLERANCE * scale:
            problems.append(_unbalanced(network, members, flows, targeted, net_in[k], where))
        elif not refs[k] and not n_targets[k]:
            problems.append(Problem(network.source, 0, 0, where,
                                    "pressures undetermined: once the bed flows are fixed by their "
                                    "targets, nothing in this part of the network sets its pressure "
                                    "level (every bed on it has a target and no node a pressure)",
                                    "give one of its nodes a target_pressure (for example the "
                                    "inlet's mean pressure), or remove the target of one bed there "
                                    "so that it keeps its resistance"))
    if problems:
        raise NetworkSpecError(problems)


def _part_label(network: Network, members: np.ndarray, has_target: np.ndarray) -> str:
    """'the part of the network around 'heart' (75 nodes)': named by an inlet when it has one."""
    nodes = network.nodes
    inlets = [i for i in members if has_target[i] or nodes.inflow_m3_s[i] > 0
              or not np.isnan(nodes.pressure_pa[i])]
    if len(members) <= 3:
        return "the part of the network made of nodes " + _names(nodes.ids[i] for i in members)
    name = nodes.ids[inlets[0] if inlets else members[0]]
    return f"the part of the network around node '{name}' ({len(members)} nodes)"


def _overdetermined(network, members, has_target, fixed, aux, k, parts) -> Problem:
    nodes = network.nodes
    targets = [nodes.ids[i] for i in members if has_target[i]]
    others = [f"the fixed pressure at '{nodes.ids[i]}'" for i in members if fixed[i]]
    beds = aux.beds
    free = [beds.ids[j] for j in range(len(beds))
            if beds.outflow_node[j] < 0 and parts.label[beds.node[j]] == k]
    if free:
        others.append("the beds without a target (" + _names(free) + "), which keep their resistance")
    if len(targets) > 1:
        others.append("the other target pressures")
    first = int(nodes.line[nodes.index[targets[0]]])
    return Problem(network.source, first, 0, "target_pressure at " + _names(targets),
                   "cannot be met: the pressures of this part of the network are already set by "
                   + "; ".join(others),
                   "remove the target pressure, or give every bed in that part a target")


def _unbalanced(network, members, flows, targeted, imbalance, where) -> Problem:
    """Flows in and out of a part without any other outlet do not match."""
    beds, nodes = network.beds, network.nodes
    inside = np.zeros(len(nodes), dtype=bool)
    inside[members] = True
    drains_out = ~inside[np.maximum(beds.outflow_node, 0)] | (beds.outflow_node < 0)
    leaving = targeted & inside[beds.node] & drains_out
    entering = targeted & ~inside[beds.node] & (beds.outflow_node >= 0) \
        & inside[np.maximum(beds.outflow_node, 0)]
    prescribed = np.where(np.isnan(nodes.inflow_m3_s), 0.0, nodes.inflow_m3_s)[members].sum()
    q_in = float(prescribed + flows[entering].sum())
    q_out = float(flows[leaving].sum())
    text = (f"the targets do not balance: {q_in / ML_MIN:.6g} mL/min enters this part "
            f"(prescribed inflow and beds in series draining into it) but its targeted beds take "
            f"{q_out / ML_MIN:.6g} mL/min out of it, and nothing else there can take up or supply "
            f"the difference of {abs(imbalance) / ML_MIN:.4g} mL/min (every bed has a target, no "
            f"node a fixed pressure)")
    shares = beds.share[leaving]
    if len(shares) and not np.isnan(shares).any() and not (entering & np.isnan(beds.share)).any():
        total_in = float(np.nansum(beds.share[entering])) + (1.0 if prescribed > 0 else 0.0)
        text += (f"; as shares of the total inflow, {shares.sum():.6g} leaves but "
                 f"{total_in:.6g} enters")
    return Problem(network.source, 0, 0, where, text,
                   "make the shares of the terminal beds sum to one (a bed in series counts once, "
                   "at the bed it drains into), or leave one bed without a share so that it takes "
                   "the rest")


def _self_consistent_total(network, flows_for, targeted, target_p):
    """Find Q with Q = total inflow of the network calibrated for shares of Q (secant)."""
    q0 = solve(network).inflow_m3_s
    points = []
    for q in (q0, 1.1 * q0):
        net, result = _calibrate_at(network, flows_for(q), targeted, target_p)
        points.append((q, result.inflow_m3_s - q, net, result))
    for _ in range(40):
        (qa, ga, _, _), (qb, gb, net, result) = points[-2], points[-1]
        if abs(gb) <= 1e-13 * abs(qb):
            return qb, net, result
        if gb == ga:
            break
        q = qb - gb * (qb - qa) / (gb - ga)
        if not q > 0:
            break
        net, result = _calibrate_at(network, flows_for(q), targeted, target_p)
        points.append((q, result.inflow_m3_s - q, net, result))
    raise SolveError("calibration: no total inflow makes the share targets shares of the "
                     "calibrated network's own inflow; the beds without a target take too much or "
                     "too little flow: give them targets too, or give the total with an inflow target")


def _checked(original, net, result, flows, share, targeted, target_p, total, source) -> Calibration:
    """Verify the calibrated solution meets every target; wrap it up."""
    scale = max(float(result.inflow_m3_s), float(np.abs(flows[targeted]).sum()), 1e-300)
    flow_error = float(np.abs(result.bed_flow_m3_s[targeted] - flows[targeted]).max(initial=0.0)) / scale
    has_p = ~np.isnan(target_p)
    p_scale = max(float(np.nanmax(np.abs(result.pressure_pa))), 1e-300)
    pressure_error = float(np.abs(result.pressure_pa[has_p] - target_p[has_p]).max(initial=0.0)) / p_scale
    if flow_error > TOLERANCE or pressure_error > TOLERANCE:
        raise SolveError(f"calibration did not reproduce its targets (flow error {flow_error:.1e} "
                         f"of the inflow, pressure error {pressure_error:.1e}); the targets are "
                         "probably over-determined")
    return Calibration(network=net, original=original, result=result, calibrated=targeted.copy(),
                       target_flow_m3_s=np.where(targeted, flows, np.nan), target_share=share.copy(),
                       target_pressure_pa=target_p.copy(), inflow_m3_s=float(total),
                       inflow_source=source, flow_error=flow_error, pressure_error=pressure_error)
