"""Bypass graft planning: each candidate graft against the healthy and the diseased network.

For a plan (:mod:`vesselnet.planfile`) the healthy network, the diseased
network (the plan's condition) and, for every candidate, the diseased
network with that graft are solved.  Each candidate is then measured:

* **target flow**: the summed flow of the target beds; the *lost flow* is
  healthy minus diseased, and the candidate's *restored fraction* is
  (grafted - diseased) / (healthy - diseased);
* **distal pressure**: the mean pressure at the target bed with the lowest
  perfusion pressure, its perfusion pressure, and the ratio of that pressure
  to the *proximal* pressure, the pressure where most blood enters the
  network (an ankle-brachial-like ratio, but of mean, not systolic, pressures);
* **graft**: flow (positive from its ``from`` to its ``to`` end), mean
  velocity, Poiseuille wall shear stress, resistance;
* **competing flow**: native flow arriving at the graft's distal
  anastomosis (its downstream end) through the other vessels that meet there,
  the flow that still takes the native diseased path and meets the graft's
  flow (zero beyond an occlusion, the flow through a lesion that the graft
  bypasses), and its ratio to the graft flow;
* **steal**: the largest flow loss among the non-target beds, against the
  diseased state (what the operation takes from other beds) and against
  the healthy one;
* **flags**: graft values the literature links with failure
  (:mod:`vesselnet.graftflags`), each with its source.

Candidates are ranked by :data:`SCORE_DEFINITION`; nothing else enters the
score.  :mod:`vesselnet.graftrobust` re-ranks under perturbed inputs.

Examples
--------
>>> from vesselnet.demos import demo_path
>>> from vesselnet.planfile import load_plan
>>> ranking = rank_plan(load_plan(demo_path("leg_graft_plan")), samples=0)
>>> best = ranking.candidates[0]
>>> best.rank, 0 < best.restored_fraction <= 1.5
(1, True)
>>> ranking_json(ranking)["caution"] == CAUTION
True
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from .caution import CAUTION
from .errors import NetworkSpecError, Problem, SolveError
from .graftflags import Flag, graft_flags
from .planfile import Candidate, Plan
from .result import SteadyResult
from .solve import DEFAULT_MAX_ITERATIONS, DEFAULT_TOLERANCE, solve
from .units import DISPLAY_UNITS, from_si
from .writers import FORMAT_VERSION, number, units_map

if TYPE_CHECKING:
    from .graftrobust import Robustness

TIE_MARGIN = 0.005
"""Scores closer than this (0.5 percentage points of restored fraction) to the best of their
group share its rank."""

SCORE_DEFINITION = (
    "score = restored fraction of the lost target flow = (Q_grafted - Q_diseased) / "
    "(Q_healthy - Q_diseased), Q the summed mean flow of the target beds; ranked highest first; "
    f"scores within {TIE_MARGIN:g} ({100 * TIE_MARGIN:g} percentage points) of the best of their "
    "group share its rank (a tie, listed by id); flags, steal and competing flow are shown beside "
    "the score and never enter it")
"""The ranking rule, printed with every ranking."""

CONDITIONS = (
    "steady mean flow, supine (no hydrostatic columns), rigid graft walls unless the plan makes them "
    "distensible; beds at the state the network and the condition give them (resting unless "
    "changed), so pressures and flows are resting values, not those at maximal dilation")
"""The conditions every ranking assumes (REFERENCES 10.14)."""

STEAL_TOLERANCE = 1e-9
"""Bed flow losses below this fraction of the healthy inflow are not steal (rounding)."""


@dataclass(frozen=True, eq=False)
class StateMetrics:
    """Target-bed values of one solution (SI)."""

    target_flow_m3_s: float
    target_bed_flow_m3_s: np.ndarray
    distal_bed: str
    distal_pressure_pa: float
    distal_perfusion_pressure_pa: float
    proximal_pressure_pa: float

    @property
    def distal_pressure_ratio(self) -> float:
        """Distal over proximal mean pressure."""
        return self.distal_pressure_pa / self.proximal_pressure_pa


@dataclass(frozen=True)
class Steal:
    """The largest flow loss of a non-target bed (SI), or none."""

    bed: str
    flow_change_m3_s: float
    flow_change_percent: float


@dataclass(frozen=True, eq=False)
class CandidateOutcome:
    """One candidate, solved and measured; ``rank`` 1 is best, ``tied`` shares its rank."""

    candidate: Candidate
    result: SteadyResult
    state: StateMetrics
    restored_fraction: float
    graft_flow_m3_s: float
    graft_velocity_m_s: float
    graft_wss_pa: float
    graft_resistance_pa_s_m3: float
    competing_flow_m3_s: float
    native_inflow: tuple[tuple[str, float], ...]
    steal: Steal | None
    steal_vs_healthy: Steal | None
    flags: tuple[Flag, ...]
    not_evaluated: tuple[str, ...]
    rank: int = 0
    tied: bool = False

    @property
    def id(self) -> str:
        """The candidate's id."""
        return self.candidate.id

    @property
    def score(self) -> float:
        """The ranking score: the restored fraction (:data:`SCORE_DEFINITION`)."""
        return self.restored_fraction

    @property
    def competing_ratio(self) -> float:
        """Competing flow over graft flow (NaN without forward graft flow)."""
        return self.competing_flow_m3_s / self.graft_flow_m3_s if self.graft_flow_m3_s > 0 else np.nan


@dataclass(frozen=True, eq=False)
class GraftRanking:
    """A plan's candidates, ranked.

    Attributes
    ----------
    plan : Plan
    healthy, diseased : SteadyResult
    healthy_state, diseased_state : StateMetrics
    candidates : tuple of CandidateOutcome
        In rank order (ties by id).
    robustness : graftrobust.Robustness or None
    caution, conditions, score_definition : str
        Printed with every ranking.
    """

    plan: Plan
    healthy: SteadyResult
    diseased: SteadyResult
    healthy_state: StateMetrics
    diseased_state: StateMetrics
    candidates: tuple[CandidateOutcome, ...]
    robustness: Robustness | None = None
    caution: str = CAUTION
    conditions: str = CONDITIONS
    score_definition: str = SCORE_DEFINITION

    @property
    def lost_flow_m3_s(self) -> float:
        """Target flow the condition costs: healthy minus diseased (m^3/s)."""
        return self.healthy_state.target_flow_m3_s - self.diseased_state.target_flow_m3_s

    def summary(self) -> str:
        """One line: the plan, its network, how many candidates, the best."""
        best = self.candidates[0]
        return (f"{self.plan.name}: {len(self.candidates)} candidate graft(s) on '{self.plan.network.name}'; "
                f"best '{best.id}' restores {100 * best.restored_fraction:.1f} % of the lost target flow")


# --- measuring ---------------------------------------------------------------------------

def inlet_node(result: SteadyResult) -> int:
    """Row of the node where most blood enters the network (the proximal pressure is taken there)."""
    return int(np.argmax(result.boundary_inflow_m3_s))


def state_metrics(result: SteadyResult, target_rows: np.ndarray, inlet: int) -> StateMetrics:
    """Target-bed flow and distal pressure of one solution; ``inlet`` is the proximal node row."""
    flows = result.bed_flow_m3_s[target_rows]
    perfusion = result.bed_perfusion_pressure_pa[target_rows]
    proximal = float(result.pressure_pa[inlet])
    if np.isnan(perfusion).all():           # every target cut off from every pressure reference
        return StateMetrics(float(flows.sum()), flows, "", np.nan, np.nan, proximal)
    k = int(np.nanargmin(perfusion))
    return StateMetrics(float(flows.sum()), flows, result.network.beds.ids[target_rows[k]],
                        float(result.bed_pressure_pa[target_rows[k]]), float(perfusion[k]), proximal)


def restored_fraction(grafted_m3_s, diseased_m3_s, healthy_m3_s):
    """(grafted - diseased) / (healthy - diseased): the share of the lost flow a graft restores.

    >>> restored_fraction(90.0, 40.0, 100.0)
    0.8333333333333334
    """
    return (grafted_m3_s - diseased_m3_s) / (healthy_m3_s - diseased_m3_s)


def largest_loss(after: np.ndarray, before: np.ndarray, rows: np.ndarray, ids, tolerance_m3_s: float):
    """The bed among ``rows`` that loses most flow from ``before`` to ``after``, or None."""
    if not len(rows):
        return None
    change = after[rows] - before[rows]
    k = int(np.argmin(change))
    if not change[k] < -tolerance_m3_s:
        return None
    base = before[rows[k]]
    percent = 100.0 * change[k] / abs(base) if base != 0 else np.nan
    return Steal(ids[rows[k]], float(change[k]), float(percent))


def native_inflow(result: SteadyResult, graft_row: int) -> tuple[float, tuple[tuple[str, float], ...]]:
    """Native flow arriving at the graft's downstream end through the other vessels there.

    Returns the total and (vessel id, flow arriving) for each vessel that brings flow in.
    """
    v = result.network.vessels
    q = result.vessel_flow_m3_s
    node = v.to_node[graft_row] if q[graft_row] >= 0 else v.from_node[graft_row]
    arriving = []
    for row in np.flatnonzero((v.to_node == node) | (v.from_node == node)):
        if row == graft_row:
            continue
        into = q[row] if v.to_node[row] == node else -q[row]
        if into > 0:
            arriving.append((v.ids[row], float(into)))
    return float(sum(x for _, x in arriving)), tuple(arriving)


def measure(candidate: Candidate, result: SteadyResult, *, plan: Plan, healthy: SteadyResult,
            diseased: SteadyResult, healthy_state: StateMetrics, diseased_state: StateMetrics,
            inlet: int) -> CandidateOutcome:
    """Every value of one grafted solution (see the module docstring)."""
    rows = plan.target_rows
    state = state_metrics(result, rows, inlet)
    row = result.network.vessels.index[candidate.id]
    flow = float(result.vessel_flow_m3_s[row])
    wss = float(result.vessel_wss_pa[row])
    others = np.setdiff1d(np.arange(len(result.network.beds)), rows)
    tolerance = STEAL_TOLERANCE * healthy.inflow_m3_s
    ids = result.network.beds.ids
    competing, arriving = native_inflow(result, row)
    flags, missing = graft_flags(flow_m3_s=flow, wss_pa=wss, min_diameter_m=candidate.min_diameter_m,
                                 conduit_kind=candidate.conduit_kind, territory=plan.territory)
    return CandidateOutcome(
        candidate=candidate, result=result, state=state,
        restored_fraction=float(restored_fraction(state.target_flow_m3_s, diseased_state.target_flow_m3_s,
                                                  healthy_state.target_flow_m3_s)),
        graft_flow_m3_s=flow, graft_velocity_m_s=float(result.vessel_mean_velocity_m_s[row]),
        graft_wss_pa=wss, graft_resistance_pa_s_m3=float(result.vessel_resistance_pa_s_m3[row]),
        competing_flow_m3_s=competing, native_inflow=arriving,
        steal=largest_loss(result.bed_flow_m3_s, diseased.bed_flow_m3_s, others, ids, tolerance),
        steal_vs_healthy=largest_loss(result.bed_flow_m3_s, healthy.bed_flow_m3_s, others, ids, tolerance),
        flags=flags, not_evaluated=missing)


def rank_order(ids, scores, *, margin: float = TIE_MARGIN) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Order, rank and tie flag of candidates by score (highest first, ties by id).

    A candidate within ``margin`` of the best of the group above it shares that
    rank (standard competition ranking: 1, 1, 3).  NaN scores come last.

    Returns
    -------
    order : ndarray of int
        Positions into ``ids`` in rank order.
    rank, tied : ndarray
        Per position in ``order``.

    >>> order, rank, tied = rank_order(["b", "a", "c"], [0.9, 0.903, 0.5])
    >>> order.tolist(), rank.tolist(), tied.tolist()
    ([1, 0, 2], [1, 1, 3], [True, True, False])
    """
    scores = np.asarray(scores, dtype=float)
    key = np.where(np.isnan(scores), -np.inf, scores)
    order = np.array(sorted(range(len(ids)), key=lambda i: (-key[i], str(ids[i]))), dtype=np.int64)
    # equal-within-margin groups are re-sorted by id so that input order never matters
    rank = np.zeros(len(order), dtype=np.int64)
    tied = np.zeros(len(order), dtype=bool)
    start = 0
    while start < len(order):
        leader = key[order[start]]
        end = start + 1
        while end < len(order) and np.isfinite(leader) and leader - key[order[end]] <= margin:
            end += 1
        group = sorted(order[start:end], key=lambda i: str(ids[i]))
        order[start:end] = group
        rank[start:end] = start + 1
        tied[start:end] = end - start > 1
        start = end
    return order, rank, tied


def rank_plan(plan: Plan, *, samples: int | None = None, seed: int | None = None, solver=solve,
              tolerance: float = DEFAULT_TOLERANCE,
              max_iterations: int = DEFAULT_MAX_ITERATIONS) -> GraftRanking:
    """Solve, measure and rank every candidate of ``plan``; then the robustness check.

    Parameters
    ----------
    plan : Plan
    samples, seed : int, optional
        Robustness sampling (default the plan's; 0 samples skips it).
    solver : callable
        ``solver(network, tolerance=, max_iterations=) -> SteadyResult``;
        :func:`vesselnet.solve.solve` by default (as in :func:`vesselnet.compare.compare_networks`).
    tolerance, max_iterations
        Of each Newton solve.

    Raises
    ------
    NetworkSpecError
        The condition does not lower the target flow (there is nothing to restore).
    SolveError
        A solve failed; the message names the state or candidate.
    """
    options = {"tolerance": tolerance, "max_iterations": max_iterations}
    healthy = _solve(solver, "the healthy network", plan.network, options)
    diseased = _solve(solver, "the diseased network", plan.diseased_network(healthy.bed_flow_m3_s), options)
    inlet = inlet_node(healthy)
    rows = plan.target_rows
    healthy_state, diseased_state = state_metrics(healthy, rows, inlet), state_metrics(diseased, rows, inlet)
    lost = healthy_state.target_flow_m3_s - diseased_state.target_flow_m3_s
    if not lost > STEAL_TOLERANCE * healthy.inflow_m3_s:
        q = from_si(lost, "flow", DISPLAY_UNITS["flow"])
        raise NetworkSpecError([Problem(plan.source, *plan.where.get("condition", (0, 0)), "condition",
                                        f"the condition lowers the target beds' flow by {q:.3g} mL/min: "
                                        "there is no lost flow for a graft to restore",
                                        "check the condition and the targets")])
    outcomes = []
    for candidate in plan.candidates:
        result = _solve(solver, f"candidate '{candidate.id}'",
                        plan.grafted_network(candidate, healthy.bed_flow_m3_s), options)
        outcomes.append(measure(candidate, result, plan=plan, healthy=healthy, diseased=diseased,
                                healthy_state=healthy_state, diseased_state=diseased_state, inlet=inlet))
    order, rank, tied = rank_order([o.id for o in outcomes], [o.score for o in outcomes])
    ranked = tuple(_with_rank(outcomes[i], int(r), bool(t)) for i, r, t in zip(order, rank, tied))
    robustness = None
    samples = plan.samples if samples is None else samples
    if samples > 0:
        from .graftrobust import robustness_check

        robustness = robustness_check(plan, top=ranked[0].id, samples=samples,
                                      seed=plan.seed if seed is None else seed, solver=solver, **options)
    return GraftRanking(plan, healthy, diseased, healthy_state, diseased_state, ranked, robustness)


def _with_rank(outcome: CandidateOutcome, rank: int, tied: bool) -> CandidateOutcome:
    return dataclasses.replace(outcome, rank=rank, tied=tied)


def _solve(solver, name: str, network, options) -> SteadyResult:
    try:
        return solver(network, **options)
    except SolveError as exc:
        raise SolveError(f"{name}: {exc}", ids=exc.ids) from None


# --- JSON (SPEC section 6, grafts --json) ----------------------------------------------------

def _u(value, kind):
    return number(from_si(float(value), kind, DISPLAY_UNITS[kind]))


def _state_json(state: StateMetrics, targets) -> dict:
    return {"target_flow": _u(state.target_flow_m3_s, "flow"),
            "target_beds": [{"id": t, "flow": _u(q, "flow")} for t, q in zip(targets, state.target_bed_flow_m3_s)],
            "distal_bed": state.distal_bed, "distal_pressure": _u(state.distal_pressure_pa, "pressure"),
            "distal_perfusion_pressure": _u(state.distal_perfusion_pressure_pa, "pressure"),
            "proximal_pressure": _u(state.proximal_pressure_pa, "pressure"),
            "distal_pressure_ratio": number(state.distal_pressure_ratio)}


def _steal_json(steal: Steal | None):
    if steal is None:
        return None
    return {"bed": steal.bed, "flow_change": _u(steal.flow_change_m3_s, "flow"),
            "flow_change_percent": number(steal.flow_change_percent)}


def candidate_json(outcome: CandidateOutcome, ranking: GraftRanking) -> dict:
    """One candidate's record of ``grafts --json``."""
    c = outcome.candidate
    state = _state_json(outcome.state, ranking.plan.targets)
    vessel = c.vessel
    ends = {k: (vessel[k] if isinstance(vessel[k], str) else {"vessel": vessel[k].vessel, "at": vessel[k].at})
            for k in ("from", "to")}
    return {
        "id": c.id, "rank": outcome.rank, "tied": outcome.tied, "score": number(outcome.score),
        "target_flow": state["target_flow"], "restored_fraction": number(outcome.restored_fraction),
        "target_flow_change": _u(outcome.state.target_flow_m3_s - ranking.diseased_state.target_flow_m3_s, "flow"),
        "target_flow_vs_healthy": _u(outcome.state.target_flow_m3_s - ranking.healthy_state.target_flow_m3_s,
                                     "flow"),
        "target_beds": state["target_beds"], "distal_bed": state["distal_bed"],
        "distal_pressure": state["distal_pressure"],
        "distal_perfusion_pressure": state["distal_perfusion_pressure"],
        "proximal_pressure": state["proximal_pressure"],
        "distal_pressure_ratio": state["distal_pressure_ratio"],
        "graft_flow": _u(outcome.graft_flow_m3_s, "flow"),
        "graft_velocity": _u(outcome.graft_velocity_m_s, "velocity"),
        "graft_wss": number(outcome.graft_wss_pa),
        "graft_resistance": _u(outcome.graft_resistance_pa_s_m3, "resistance"),
        "competing_flow": _u(outcome.competing_flow_m3_s, "flow"),
        "competing_ratio": number(outcome.competing_ratio),
        "native_inflow": [{"vessel": vid, "flow": _u(q, "flow")} for vid, q in outcome.native_inflow],
        "steal": _steal_json(outcome.steal), "steal_vs_healthy": _steal_json(outcome.steal_vs_healthy),
        "flags": [{"code": f.code, "text": f.text, "source": f.source} for f in outcome.flags],
        "not_evaluated": list(outcome.not_evaluated),
        "graft": {"from": ends["from"], "to": ends["to"], "length": _u(c.length_m, "length"),
                  "radius_in": _u(vessel["radius_in_m"], "radius"),
                  "radius_out": _u(vessel["radius_out_m"], "radius"),
                  "routing_factor": number(c.routing_factor), "conduit": c.conduit or None,
                  "wall_thickness": _u(vessel.get("wall_thickness_m", np.nan), "radius"),
                  "wall_modulus": number(vessel.get("wall_modulus_pa", np.nan) / 1e6),
                  "description": c.description},
        "warnings": list(outcome.result.warnings)}


def ranking_json(ranking: GraftRanking) -> dict:
    """The whole ``grafts --json`` document (SPEC section 6), caution first."""
    plan = ranking.plan
    doc = {"vesselnet": FORMAT_VERSION, "caution": ranking.caution, "network": plan.network.name,
           "plan": plan.name, "conditions": ranking.conditions, "score_definition": ranking.score_definition,
           "units": {**units_map(), "modulus": "MPa"}, "territory": plan.territory or None, "targets": list(plan.targets),
           "healthy": _state_json(ranking.healthy_state, plan.targets),
           "diseased": _state_json(ranking.diseased_state, plan.targets),
           "lost_flow": _u(ranking.lost_flow_m3_s, "flow"),
           "candidates": [candidate_json(o, ranking) for o in ranking.candidates]}
    if ranking.robustness is not None:
        doc["robustness"] = ranking.robustness.to_json()
    return doc
