"""Steady pressure-flow solution of a vessel network.

Unknowns are the pressures at nodes without a fixed pressure.  Kirchhoff's
current law at each of them, with each element's flow law, gives
F(p) = 0, solved by Newton's method with the exact Jacobian.  A network of
linear elements only (rigid vessels, fixed beds) converges in one step; with
lesions the law is quadratic and Newton converges quadratically.  The sparse
structure is built once and reused by every step.

Examples
--------
>>> from vesselnet.model import Network
>>> net = Network.build(nodes={"in": {"pressure_pa": 13332.2}, "out": {"pressure_pa": 0.0}},
...     vessels=[{"id": "a", "from": "in", "to": "mid", "length_m": 0.05, "radius_m": 0.002},
...              {"id": "b", "from": "mid", "to": "out", "length_m": 0.05, "radius_m": 0.002}])
>>> result = solve(net)
>>> round(float(result.vessel_flow_m3_s[0]) * 6e7, 1)            # mL/min
14360.3
>>> result.iterations, result.mass_balance < 1e-12
(1, True)
"""

from __future__ import annotations

import dataclasses

import numpy as np

from .assembly import NodalPattern
from .autoregulation import AutoregulatedLaw
from .elements import ElementGroup, LinearLaw, QuadraticLaw
from .errors import SolveError
from .linsolve import Factorization
from .model import Network
from .resistance import tapered_resistance
from .result import SteadyResult, laminar_warnings
from .stenosis import young_tsai_coefficients
from .topology import connected_parts
from .tubelaw import DistensibleLaw
from .walls import distensible_group, rigid_groups, with_wall_outputs

DEFAULT_TOLERANCE = 1e-10
"""Newton stops when the largest nodal imbalance is below this fraction of the total inflow."""

DEFAULT_MAX_ITERATIONS = 50


def vessel_resistance(network: Network, viscosity_pa_s: np.ndarray) -> np.ndarray:
    """Linear (Poiseuille or taper) resistance of every vessel, lesions ignored (Pa*s/m^3)."""
    v = network.vessels
    return tapered_resistance(v.length_m, v.radius_in_m, v.radius_out_m, viscosity_pa_s)


def element_groups(network: Network, viscosity_pa_s: np.ndarray, *,
                   resistance_pa_s_m3: np.ndarray | None = None) -> list[ElementGroup]:
    """The network's elements grouped by flow law.

    Parameters
    ----------
    network : Network
    viscosity_pa_s : ndarray, shape (n_vessels,)
        Viscosity in each vessel.
    resistance_pa_s_m3 : ndarray, optional
        Linear vessel resistances to use instead of the rigid-tube ones.

    Returns
    -------
    list of ElementGroup
        Open lesion-free vessels (linear), vessels with a lesion (quadratic:
        the Young-Tsai lesion in series with the rest of the vessel),
        distensible lesion-free vessels (square-root wall law, see
        :mod:`vesselnet.walls`), fixed beds (linear, to their outflow
        pressure or outflow node) and autoregulating beds with a target flow
        (:mod:`vesselnet.autoregulation`).

    Notes
    -----
    A lesion of length Ls replaces its stretch of the vessel's linear
    resistance by the lesion law (see :func:`lesion_coefficients`).
    Autoregulating beds whose target is still unresolved (NaN) are linear at
    their resting resistance: in their own baseline they hold that flow.
    """
    v, beds = network.vessels, network.beds
    resistance = vessel_resistance(network, viscosity_pa_s) if resistance_pa_s_m3 is None \
        else np.asarray(resistance_pa_s_m3, dtype=float)
    open_ = ~v.occluded
    lesion = open_ & ~np.isnan(v.stenosis_reduction)
    distensible = open_ & ~lesion & v.distensible
    plain = np.flatnonzero(open_ & ~lesion & ~distensible)
    no_ground = np.full(len(plain), np.nan)
    groups = [ElementGroup("vessel", plain, v.from_node[plain], v.to_node[plain], no_ground,
                           LinearLaw(1.0 / resistance[plain]))]
    rows = np.flatnonzero(lesion)
    if len(rows):
        r_v, k_t, upstream, downstream = lesion_coefficients(network, rows, viscosity_pa_s, resistance)
        groups.append(ElementGroup("vessel", rows, v.from_node[rows], v.to_node[rows],
                                   np.full(len(rows), np.nan),
                                   QuadraticLaw(upstream + downstream + r_v, k_t)))
    if distensible.any():
        groups.append(distensible_group(network, np.flatnonzero(distensible), viscosity_pa_s,
                                        resistance))
    auto = np.isfinite(beds.min_resistance_pa_s_m3) & np.isfinite(beds.target_flow_m3_s)
    bed_rows = np.flatnonzero(~auto)
    groups.append(ElementGroup("bed", bed_rows, beds.node[bed_rows], beds.outflow_node[bed_rows],
                               beds.outflow_pressure_pa[bed_rows],
                               LinearLaw(1.0 / beds.resistance_pa_s_m3[bed_rows])))
    auto_rows = np.flatnonzero(auto)
    if len(auto_rows):
        groups.append(ElementGroup("bed", auto_rows, beds.node[auto_rows], beds.outflow_node[auto_rows],
                                   beds.outflow_pressure_pa[auto_rows],
                                   AutoregulatedLaw(beds.target_flow_m3_s[auto_rows],
                                                    beds.min_resistance_pa_s_m3[auto_rows])))
    return groups


def lesion_coefficients(network: Network, rows: np.ndarray, viscosity_pa_s: np.ndarray,
                        resistance_pa_s_m3: np.ndarray):
    """Young-Tsai coefficients of the lesions on vessel ``rows`` and the healthy rest of each vessel.

    Parameters
    ----------
    network : Network
    rows : ndarray of int
        Vessels with a lesion.
    viscosity_pa_s, resistance_pa_s_m3 : ndarray, shape (n_vessels,)
        Viscosity and linear (lesion-free) resistance of every vessel.

    Returns
    -------
    r_v, k_t : ndarray
        The lesion law dP = r_v Q + k_t Q|Q| (see :mod:`vesselnet.stenosis`).
    upstream, downstream : ndarray
        Linear resistance of the healthy vessel before and after the lesion (Pa*s/m^3).

    Notes
    -----
    The lesion occupies [s, s + Ls] along the vessel, centred at ``at`` x L
    and kept inside it: s = clip(at L - Ls/2, 0, L - Ls).  Its unobstructed
    diameter is the (tapered) diameter at its centre.  The healthy pieces
    take the share of the vessel's resistance that the taper integral gives
    their stretches, so splitting a vessel outside its lesion changes nothing.
    """
    v = network.vessels
    length, lesion_length = v.length_m[rows], v.stenosis_length_m[rows]
    r_in, r_out = v.radius_in_m[rows], v.radius_out_m[rows]
    start = np.clip(v.stenosis_at[rows] * length - lesion_length / 2, 0.0, length - lesion_length)
    end = start + lesion_length

    def radius(x):
        return r_in + (r_out - r_in) * x / length

    d0 = 2.0 * radius(start + lesion_length / 2)
    ds = d0 * (1.0 - v.stenosis_reduction[rows])
    r_v, k_t = young_tsai_coefficients(d0, ds, lesion_length, viscosity_pa_s[rows],
                                       network.blood.density_kg_m3)
    whole = tapered_resistance(length, r_in, r_out, 1.0)
    upstream = tapered_resistance(start, r_in, radius(start), 1.0) / whole
    downstream = tapered_resistance(length - end, radius(end), r_out, 1.0) / whole
    resistance = np.asarray(resistance_pa_s_m3, dtype=float)[rows]
    return r_v, k_t, resistance * upstream, resistance * downstream


def solve(network: Network, *, viscosity_pa_s: np.ndarray | None = None,
          tolerance: float = DEFAULT_TOLERANCE,
          max_iterations: int = DEFAULT_MAX_ITERATIONS, method: str = "auto",
          factorization: Factorization | None = None) -> SteadyResult:
    """Steady pressures and flows of ``network``.

    Parameters
    ----------
    network : Network
        A checked network (see :func:`vesselnet.reader.load_network`).
    viscosity_pa_s : ndarray, shape (n_vessels,), optional
        Viscosity per vessel.  Default: the blood's constant viscosity, or,
        when ``network.blood`` names a viscosity or phase-separation law, the
        coupled solve :func:`vesselnet.rheology.solve_rheology` with its
        default options (``tolerance`` and ``max_iterations`` then apply to
        each of its flow solves).
    tolerance : float
        Convergence: largest nodal imbalance relative to the total inflow.
    max_iterations : int
        Newton step cap.
    method : {'auto', 'superlu', 'tree', 'cholmod', 'amg'}
        Linear solver (see :mod:`vesselnet.linsolve`); ``auto`` eliminates
        trees in O(n) and factorises other networks.
    factorization : Factorization, optional
        Reuse the analysis (ordering, symbolic factorisation) of an earlier
        solve of a network with the same topology (samples of a study);
        ``method`` is then ignored.

    Returns
    -------
    SteadyResult
        ``solver`` and ``solver_reason`` say which linear solver ran and why.

    Raises
    ------
    SolveError
        Newton did not converge (the message names the worst node), or the
        solution lost accuracy.
    """
    n_vessels = len(network.vessels)
    if viscosity_pa_s is None and (network.blood.viscosity_law != "constant"
                                   or network.blood.separation != "none"):
        from .rheology import solve_rheology  # imports this module: import late
        return solve_rheology(network, newton_tolerance=tolerance,
                              newton_max_iterations=max_iterations, method=method)
    if viscosity_pa_s is None:
        viscosity_pa_s = np.full(n_vessels, network.blood.viscosity_pa_s)
    viscosity_pa_s = np.asarray(viscosity_pa_s, dtype=float)
    groups = element_groups(network, viscosity_pa_s)
    linear = factorization if factorization is not None else Factorization(method)
    start = None
    if any(isinstance(g.law, DistensibleLaw) for g in groups):   # Newton from the rigid solution
        start = solve_groups(network, rigid_groups(groups), viscosity_pa_s=viscosity_pa_s,
                             tolerance=tolerance, max_iterations=max_iterations,
                             factorization=linear).pressure_pa
    result = solve_groups(network, groups, viscosity_pa_s=viscosity_pa_s, tolerance=tolerance,
                          max_iterations=max_iterations, initial_pressure_pa=start,
                          factorization=linear)
    if start is not None:
        result = dataclasses.replace(result, solver=result.solver + ", from the rigid-wall solution")
    return with_wall_outputs(result, groups)


def solve_groups(network: Network, groups: list[ElementGroup], *, viscosity_pa_s: np.ndarray,
                 tolerance: float = DEFAULT_TOLERANCE,
                 max_iterations: int = DEFAULT_MAX_ITERATIONS,
                 initial_pressure_pa: np.ndarray | None = None, method: str = "auto",
                 factorization: Factorization | None = None) -> SteadyResult:
    """Newton solve of given element groups on ``network``'s nodes (see :func:`solve`).

    Parts of the network cut off from every pressure reference (possible
    after an occlusion) are left out: their pressures are NaN, their flows
    zero, and a warning names them.  ``initial_pressure_pa`` (per node)
    replaces the default start, the mean of the reference pressures.
    """
    nodes = network.nodes
    n = len(nodes)
    parts = connected_parts(network)
    cut_off = ~parts.referenced[parts.label]
    fixed = ~np.isnan(nodes.pressure_pa)
    free = ~fixed & ~cut_off
    a = np.concatenate([g.a for g in groups])
    b = np.concatenate([g.b for g in groups])
    pattern = NodalPattern(n, a, b, free)
    linear = factorization if factorization is not None else Factorization(method)
    injection = np.where(np.isnan(nodes.inflow_m3_s) | cut_off, 0.0, nodes.inflow_m3_s)
    pressure = initial_pressure(network, groups, fixed) if initial_pressure_pa is None else \
        np.where(fixed, nodes.pressure_pa, np.nan_to_num(initial_pressure_pa))
    pressure[cut_off] = np.nan

    def evaluate(p):
        parts_ = [g.evaluate(np.nan_to_num(p)) for g in groups]
        q = np.concatenate([x[0] for x in parts_])
        dqa = np.concatenate([x[1] for x in parts_])
        dqb = np.concatenate([x[2] for x in parts_])
        imbalance = pattern.node_sum(q) - injection
        return q, dqa, dqb, imbalance

    history: list[float] = []
    q, dqa, dqb, imbalance = evaluate(pressure)
    iterations = 0
    while True:
        scale = flow_scale(q, injection)
        worst = float(np.abs(imbalance[free]).max(initial=0.0)) / scale
        history.append(worst)
        if iterations > 0 and worst <= tolerance or not free.any():
            break
        if iterations >= max_iterations:
            raise non_convergence(network, imbalance, free, history)
        J = pattern.matrix(dqa, dqb, -dqa, -dqb)
        try:
            step = linear.solve(J, -imbalance[free])
        except RuntimeError as exc:  # SuperLU: exactly singular
            raise SolveError(f"the Newton system is singular ({exc}): some part's pressure level is "
                             "set by nothing (for example a prescribed inflow with every bed holding "
                             "its autoregulated flow); give it a fixed pressure or a fixed bed") from None
        pressure, q, dqa, dqb, imbalance = line_search(pressure, step, free, evaluate, worst, scale)
        iterations += 1
        if not np.isfinite(pressure[free]).all():
            raise SolveError("the linear solve returned non-finite pressures; the system is "
                             "singular or too badly conditioned")
    return finish(network, groups, pressure, q, imbalance, free, fixed, cut_off, viscosity_pa_s,
                  iterations, history, linear=linear)


def initial_pressure(network: Network, groups, fixed: np.ndarray) -> np.ndarray:
    """Start at the mean of all reference pressures (fixed nodes and outflows)."""
    refs = [network.nodes.pressure_pa[fixed]] + [g.ground_pa[g.b < 0] for g in groups]
    refs = np.concatenate(refs)
    start = float(np.nanmean(refs)) if np.isfinite(refs).any() else 0.0
    return np.where(fixed, network.nodes.pressure_pa, start)


def flow_scale(q: np.ndarray, injection: np.ndarray) -> float:
    """A flow to measure imbalances against: the larger of the element and boundary flows."""
    return max(float(np.abs(q).max(initial=0.0)), float(np.abs(injection).sum()), 1e-300)


def line_search(pressure, step, free, evaluate, worst, scale, max_halvings=12):
    """Take the Newton step, halving it while the imbalance grows."""
    fraction = 1.0
    for _ in range(max_halvings):
        trial = pressure.copy()
        trial[free] += fraction * step
        q, dqa, dqb, imbalance = evaluate(trial)
        if float(np.abs(imbalance[free]).max(initial=0.0)) / scale <= max(worst, 1e-300) * 1.0001:
            break
        fraction /= 2
    return trial, q, dqa, dqb, imbalance


def non_convergence(network: Network, imbalance, free, history) -> SolveError:
    """The error for a Newton solve that did not converge, naming the worst node."""
    rows = np.flatnonzero(free)
    worst = rows[int(np.argmax(np.abs(imbalance[rows])))]
    node = network.nodes.ids[worst]
    trail = ", ".join(f"{h:.1e}" for h in history[-5:])
    return SolveError(f"the steady solve did not converge in {len(history) - 1} Newton steps: "
                      f"largest flow imbalance {history[-1]:.2e} of the total inflow, at node "
                      f"'{node}' (last residuals {trail}); check lesions, distensible walls and "
                      "extreme values near it",
                      ids=(node,))


def finish(network, groups, pressure, q, imbalance, free, fixed, cut_off, viscosity_pa_s,
           iterations, history, *, linear: Factorization | None = None) -> SteadyResult:
    """Map element flows back to vessels and beds and check the invariants."""
    v = network.vessels
    vessel_flow = np.zeros(len(v))
    bed_flow = np.zeros(len(network.beds))
    resistance = vessel_resistance(network, viscosity_pa_s)
    effective = resistance.copy()
    law_error, drop_scale = 0.0, 1e-300
    offset = 0
    for g in groups:
        flows = q[offset: offset + len(g.a)]
        offset += len(g.a)
        (vessel_flow if g.kind == "vessel" else bed_flow)[g.rows] = flows
        drop = g.pressure_drop(np.nan_to_num(pressure))
        law_drop = g.law_pressure_drop(np.nan_to_num(pressure), flows)
        law_error = max(law_error, float(np.abs(drop - law_drop).max(initial=0.0)))
        drop_scale = max(drop_scale, float(np.abs(drop).max(initial=0.0)))
        if g.kind == "vessel" and not isinstance(g.law, LinearLaw):
            safe = np.where(flows != 0, flows, 1.0)
            slope = g.evaluate(np.nan_to_num(pressure))[1]
            effective[g.rows] = np.where(flows != 0, drop / safe, 1.0 / slope)
    injection = np.where(np.isnan(network.nodes.inflow_m3_s) | cut_off, 0.0, network.nodes.inflow_m3_s)
    boundary = np.where(fixed, imbalance + injection, injection)
    total_in = max(float(boundary[boundary > 0].sum() - bed_flow[(bed_flow < 0)].sum()), 1e-300)
    mass_balance = float(np.abs(imbalance[free]).max(initial=0.0)) / total_in
    result = SteadyResult(
        network=network, pressure_pa=pressure, vessel_flow_m3_s=vessel_flow, bed_flow_m3_s=bed_flow,
        boundary_inflow_m3_s=boundary, vessel_viscosity_pa_s=viscosity_pa_s,
        vessel_resistance_pa_s_m3=effective, iterations=iterations,
        residual_history=tuple(history), mass_balance=mass_balance,
        law_residual=law_error / drop_scale,
        solver=linear.description if linear else "superlu (MMD_AT_PLUS_A ordering)",
        solver_reason=linear.reason if linear else "")
    warnings = laminar_warnings(network, result.vessel_reynolds)
    if cut_off.any():
        names = ", ".join(f"'{network.nodes.ids[i]}'" for i in np.flatnonzero(cut_off)[:8])
        dropped = np.nansum(network.nodes.inflow_m3_s[cut_off])
        lost = (f"; their prescribed inflow of {dropped * 6e7:.4g} mL/min has nowhere to go and was "
                "left out too") if dropped else ""
        warnings.append(f"{int(cut_off.sum())} nodes are cut off from every pressure reference and "
                        f"were left out (pressures undetermined, flows zero): {names}{lost}")
    if mass_balance > 1e-6:
        warnings.append(f"mass balance {mass_balance:.1e}: the solve lost accuracy; check for extreme"
                        " radius or length ratios")
    return dataclasses.replace(result, warnings=tuple(warnings))
