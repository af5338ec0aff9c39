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

from .assembly import NodalPattern, ScaledFactor
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

CONDITION_LIMIT = 1e10
"""Above this condition estimate of the scaled nodal matrix a warning says how many digits a
plain solve would keep (about 16 - log10(condition); 6 here) and what refinement reached."""

STAGNANT = 1024 * np.finfo(float).eps ** 2
"""A pressure drop below this fraction of the pressure is rounding: the flow is set to 0."""

STALL_STEPS = 4
"""Newton gives up after this many steps in a row that reduce the imbalance by less than 1 %."""


def vessel_resistance(network: Network, viscosity_pa_s: np.ndarray) -> np.ndarray:
    """Linear (Poiseuille or taper) resistance of every vessel, lesions ignored (Pa*s/m^3)."""
    v = network.vessels
    with np.errstate(over="ignore", under="ignore", divide="ignore", invalid="ignore"):
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
        with np.errstate(over="ignore", divide="ignore", invalid="ignore"):  # checked in solve_groups
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

    Once converged, one more step with the last factorisation (iterative
    refinement, not counted in ``iterations`` or the residual history)
    takes the imbalance to rounding, so that the flows of vessels 10^20
    times narrower than the largest keep their digits too.
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

    low = np.zeros(n)  # pressure = pressure + low, a double-double (see group_flows)

    def evaluate(p, p_low):
        parts_ = [group_flows(g, np.nan_to_num(p), p_low) for g in groups]
        q = np.concatenate([x[0] for x in parts_])
        dqa = np.concatenate([x[1] for x in parts_])
        dqb = np.concatenate([x[2] for x in parts_])
        imbalance = pattern.node_sum(q) - injection
        return q, dqa, dqb, imbalance

    history: list[float] = []
    q, dqa, dqb, imbalance = evaluate(pressure, low)
    check_conductances(network, groups, dqa, cut_off)
    iterations, stalled, factor = 0, 0, None
    while True:
        scale = flow_scale(q, injection)
        worst = float(np.abs(imbalance[free]).max(initial=0.0)) / scale
        stalled = stalled + 1 if history and worst > 0.99 * history[-1] else 0
        history.append(worst)
        if iterations > 0 and worst <= tolerance or not free.any():
            careful = pattern.n_free <= CAREFUL_MAX_NODES or worst > 1e-12
            if factor is not None and worst > 0 and careful:  # polish: one refinement step
                step = factor.solve(-imbalance[free])
                trial = add_step(pressure, low, np.flatnonzero(free), step)
                polished = evaluate(*trial)
                if np.abs(polished[3][free]).max(initial=0.0) < worst * scale:
                    (pressure, low), (q, dqa, dqb, imbalance) = trial, polished
            break
        if iterations >= max_iterations or stalled >= STALL_STEPS:
            raise non_convergence(network, imbalance, free, history, factor, dqa,
                                  stalled=stalled >= STALL_STEPS)
        J = pattern.matrix(dqa, dqb, -dqa, -dqb)
        try:
            step = linear.solve(J, -imbalance[free], structure=pattern.structure)
        except (RuntimeError, SolveError) as exc:  # SuperLU: exactly singular
            raise SolveError(f"the Newton system is singular ({exc}); some part's pressure level is "
                             "set by nothing (for example a prescribed inflow with every bed holding "
                             "its autoregulated flow): give it a fixed pressure or a fixed bed") from None
        factor = LastJacobian(J, linear)
        (pressure, low), q, dqa, dqb, imbalance = line_search((pressure, low), step, free, evaluate,
                                                              worst, scale)
        iterations += 1
        if not np.isfinite(pressure[free]).all():
            raise SolveError("the linear solve returned non-finite pressures; the system is "
                             "singular or too badly conditioned")
    careful = pattern.n_free <= CAREFUL_MAX_NODES or history[-1] > 1e-12
    condition = factor.condition_estimate() if factor is not None and careful else float("nan")
    return finish(network, groups, pressure, q, imbalance, free, fixed, cut_off, viscosity_pa_s,
                  iterations, history, condition=condition, linear=linear)


CAREFUL_MAX_NODES = 200_000
"""Up to this many free nodes every solve is polished by one refinement step and its
condition estimated (an extra factorisation each); larger networks only when the
residual is not already at rounding level, so that 10^6-segment solves stay fast."""


class LastJacobian:
    """The last Newton matrix: one SuperLU factor of its scaled form, made on first
    use, serves the refinement step and the condition estimate (the step solver
    itself, ``linear``, keeps its own analysis for the next matrix)."""

    def __init__(self, matrix, linear: Factorization):
        self.matrix = matrix
        self.linear = linear
        self._factor: ScaledFactor | None = None

    @property
    def factor(self) -> ScaledFactor:
        if self._factor is None:
            self._factor = ScaledFactor(self.matrix)
        return self._factor

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        return self.factor.solve(rhs)

    def condition_estimate(self) -> float:
        """See :meth:`vesselnet.assembly.ScaledFactor.condition_estimate`."""
        return self.factor.condition_estimate()


def group_flows(group: ElementGroup, high: np.ndarray, low: np.ndarray):
    """(q, dq/dp_a, dq/dp_b) of a group at the double-double pressures ``high + low``.

    Notes
    -----
    A conductance 10^16 times its neighbours' carries its flow across a
    pressure drop below the rounding of the pressures themselves: from
    plain doubles the law gets noise and Newton stalls.  Pressures are
    therefore kept as unevaluated sums ``high + low`` of two doubles (Dekker
    1971, A floating-point technique for extending the available precision),
    and a law of the drop alone (linear, lesion) gets the drop
    ``(high_a - high_b) + (low_a - low_b)``, whose first difference is exact
    for nearby pressures (Sterbenz 1974).  Newton's steps are then iterative
    refinement with a residual of about 32 digits.  A drop within the
    rounding of that (:data:`STAGNANT` of the pressure) counts as none: the
    vessel is stagnant and its flow exactly 0.  Other laws get the pressures
    rounded to doubles.
    """
    if not isinstance(group.law, (LinearLaw, QuadraticLaw)):
        return group.evaluate(high + low)
    grounded = group.b < 0
    b = np.maximum(group.b, 0)
    high_b = np.where(grounded, group.ground_pa, high[b])
    drop = (high[group.a] - high_b) + (low[group.a] - np.where(grounded, 0.0, low[b]))
    level = np.maximum(np.abs(high[group.a]), np.abs(high_b))
    drop = np.where(np.abs(drop) <= STAGNANT * level, 0.0, drop)
    return group.law.evaluate(drop, np.zeros_like(drop))


def add_step(high: np.ndarray, low: np.ndarray, rows: np.ndarray, step: np.ndarray):
    """``(high + low)[rows] += step`` in double-double arithmetic (Knuth's two-sum).

    >>> import numpy as np
    >>> h, l = add_step(np.array([1.0]), np.array([0.0]), np.array([0]), np.array([1e-20]))
    >>> float(h[0]), float(l[0])
    (1.0, 1e-20)
    """
    high, low = high.copy(), low.copy()
    x, y = high[rows], step
    total = x + y
    back = total - x
    error = (x - (total - back)) + (y - back) + low[rows]
    high[rows] = total + error
    low[rows] = error - (high[rows] - total)
    return high, low


def check_conductances(network: Network, groups, slope, cut_off) -> None:
    """Refuse elements whose conductance is infinite, undefined or (for linear laws) zero."""
    offset, bad = 0, []
    for g in groups:
        s = slope[offset: offset + len(g.a)]
        offset += len(g.a)
        wrong = ~np.isfinite(s) | (s == 0 if isinstance(g.law, LinearLaw) else False)
        wrong &= ~cut_off[g.a]
        ids = network.vessels.ids if g.kind == "vessel" else network.beds.ids
        bad += [f"{g.kind} '{ids[r]}'" for r in g.rows[wrong]]
    if bad:
        more = f" and {len(bad) - 5} more" if len(bad) > 5 else ""
        raise SolveError(f"{', '.join(bad[:5])}{more}: the resistance is zero, infinite or "
                         "undefined in double precision (an extreme length, radius or resistance); "
                         "check the values and their units", ids=tuple(bad))


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
    """Take the Newton step, halving it while the imbalance grows.

    ``pressure`` is an array, or the pair (high, low) of double-double
    pressures (see :func:`group_flows`); ``evaluate`` takes the same.
    """
    fraction = 1.0
    rows = np.flatnonzero(free)
    for _ in range(max_halvings):
        if isinstance(pressure, tuple):
            trial = add_step(*pressure, rows, fraction * step)
            q, dqa, dqb, imbalance = evaluate(*trial)
        else:
            trial = pressure.copy()
            trial[free] += fraction * step
            q, dqa, dqb, imbalance = evaluate(trial)
        if float(np.abs(imbalance[free]).max(initial=0.0)) / scale <= max(worst, 1e-300) * 1.0001:
            break
        fraction /= 2
    return trial, q, dqa, dqb, imbalance


def non_convergence(network: Network, imbalance, free, history, factor=None,
                    slope=None, stalled=False) -> SolveError:
    """The error for a Newton solve that did not converge, naming the worst node.

    A solve that stalled says so, with the condition estimate and the spread
    of the conductances, the usual reasons.
    """
    rows = np.flatnonzero(free)
    worst = rows[int(np.argmax(np.abs(imbalance[rows])))]
    node = network.nodes.ids[worst]
    trail = ", ".join(f"{h:.1e}" for h in history[-5:])
    if stalled:
        size = np.abs(slope[np.isfinite(slope) & (slope != 0)]) if slope is not None else ()
        spread = f", conductances spanning {float(size.max()) / float(size.min()):.1e}" \
            if len(size) else ""
        cond = f"condition estimate {factor.condition_estimate():.1e}" if factor else ""
        return SolveError(f"the steady solve stalled after {len(history) - 1} Newton steps at a "
                          f"flow imbalance of {history[-1]:.2e} of the total inflow, at node "
                          f"'{node}': {STALL_STEPS} steps in a row gained less than 1 % ({cond}"
                          f"{spread}); the usual cause is a value beyond double precision (an "
                          "extreme length, radius or resistance, or a unit slip), else lesions or "
                          "distensible walls near that node", ids=(node,))
    return SolveError(f"the steady solve did not converge in {len(history) - 1} Newton steps: "
                      f"largest flow imbalance {history[-1]:.2e} of the total inflow, at node "
                      f"'{node}' (last residuals {trail}); check lesions, distensible walls and "
                      "extreme values near it",
                      ids=(node,))


def finish(network, groups, pressure, q, imbalance, free, fixed, cut_off, viscosity_pa_s,
           iterations, history, *, condition=float("nan"),
           linear: Factorization | None = None) -> SteadyResult:
    """Map element flows back to vessels and beds and check the invariants.

    ``condition`` is the condition estimate of the last scaled Jacobian.
    """
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
        solver_reason=linear.reason if linear else "", condition_estimate=condition)
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
    if not result.inflow_m3_s > 0:
        warnings.append("no flow enters the network (no prescribed inflow, and no pressure drives "
                        "flow from a fixed node to a bed): bed shares are undefined")
    if condition > CONDITION_LIMIT:
        digits = max(0, int(16 - np.log10(condition)))
        warnings.append(f"condition estimate {condition:.1e} of the scaled nodal matrix: a plain "
                        f"solve keeps only about {digits} significant digits of the pressures; these "
                        f"were refined to a mass balance of {mass_balance:.0e}, but the smallest "
                        "flows deserve care; check for extreme radius or length ratios")
    return dataclasses.replace(result, warnings=tuple(warnings))
