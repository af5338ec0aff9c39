"""Each scenario against the baseline: bed flows, lesions, reversed flow (``compare``).

Examples
--------
>>> from vesselnet.demos import demo_path
>>> comparison = compare_file(demo_path("collateral_steal"))
>>> outcome = comparison.scenarios[0]
>>> outcome.name, outcome.reversed
('left feeder occluded', ('left_side_branch',))
>>> doc = comparison_json(comparison)
>>> sorted(doc["scenarios"][0]["beds"][0])[:4]
['flow', 'flow_change', 'flow_change_percent', 'id']
"""

from __future__ import annotations

import functools
import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from .autoregulation import bed_effective_resistance, bed_states, with_targets
from .caution import CAUTION
from .errors import SolveError
from .lesions import lesion_table
from .model import Network
from .result import SteadyResult
from .scenarios import ScenarioFile, load_scenarios
from .solve import DEFAULT_MAX_ITERATIONS, DEFAULT_TOLERANCE, solve
from .units import DISPLAY_UNITS, from_si
from .writers import (FORMAT_VERSION, beds_json, checks_json, nodes_json, number, units_map,
                      vessels_json)

REVERSAL_THRESHOLD = 1e-9
"""Flows below this fraction of the largest vessel flow have no direction (for ``reversed``)."""

CONDITIONS = ("steady mean flow, supine (no hydrostatic columns); beds at the state the network "
              "and the changes give them (resting unless a change dilates them), so lesion pressure "
              "ratios are resting ratios unless the beds are at maximal dilation, where FFR is defined")
"""The conditions every comparison assumes, printed with it (REFERENCES 10.14)."""

_PIECE = re.compile(r"^(.*)\.\d+$")


@dataclass(frozen=True, eq=False)
class ScenarioOutcome:
    """One scenario's solution and its differences from the baseline (SI)."""

    name: str
    result: SteadyResult
    baseline: SteadyResult
    description: str = ""

    @functools.cached_property
    def vessel_origin(self) -> np.ndarray:
        """Baseline row of each vessel: the same id, or the vessel it was split from; -1 for new ones."""
        index = self.baseline.network.vessels.index
        out = np.full(len(self.result.network.vessels), -1, dtype=np.int64)
        for i, vid in enumerate(self.result.network.vessels.ids):
            while vid not in index and _PIECE.match(vid):
                vid = _PIECE.match(vid).group(1)
            out[i] = index.get(vid, -1)
        return out

    @functools.cached_property
    def node_origin(self) -> np.ndarray:
        """Baseline row of each node (same id), -1 for nodes the changes created."""
        index = self.baseline.network.nodes.index
        return np.array([index.get(n, -1) for n in self.result.network.nodes.ids], dtype=np.int64)

    @property
    def bed_flow_change_m3_s(self) -> np.ndarray:
        """Bed flow minus baseline bed flow (beds keep their rows under every change)."""
        return self.result.bed_flow_m3_s - self.baseline.bed_flow_m3_s

    @property
    def bed_flow_change_percent(self) -> np.ndarray:
        """Change as a percentage of the baseline flow (NaN where the baseline flow is 0)."""
        return _percent(self.bed_flow_change_m3_s, self.baseline.bed_flow_m3_s)

    @property
    def vessel_flow_change_m3_s(self) -> np.ndarray:
        """Vessel flow minus the baseline flow of its origin (NaN for new vessels)."""
        return _minus_origin(self.result.vessel_flow_m3_s, self.baseline.vessel_flow_m3_s, self.vessel_origin)

    @property
    def node_pressure_change_pa(self) -> np.ndarray:
        """Node pressure minus its baseline pressure (NaN for new nodes)."""
        return _minus_origin(self.result.pressure_pa, self.baseline.pressure_pa, self.node_origin)

    @property
    def inflow_change_m3_s(self) -> float:
        return self.result.inflow_m3_s - self.baseline.inflow_m3_s

    @functools.cached_property
    def reversed_rows(self) -> np.ndarray:
        """Rows of the vessels whose flow runs opposite to their origin's baseline flow."""
        origin = self.vessel_origin
        now = _direction(self.result.vessel_flow_m3_s)
        before = np.where(origin >= 0, _direction(self.baseline.vessel_flow_m3_s)[np.maximum(origin, 0)], 0)
        return np.flatnonzero(now * before < 0)

    @property
    def reversed(self) -> tuple[str, ...]:
        """Ids of the vessels whose flow reversed against the baseline."""
        ids = self.result.network.vessels.ids
        return tuple(ids[i] for i in self.reversed_rows)


def _direction(q: np.ndarray) -> np.ndarray:
    scale = float(np.abs(q).max(initial=0.0))
    return np.where(np.abs(q) > REVERSAL_THRESHOLD * scale, np.sign(q), 0).astype(int)


def _percent(change, base):
    safe = np.where(base != 0, base, 1.0)
    return np.where(base != 0, 100.0 * change / np.abs(safe), np.nan)


def _minus_origin(values, base_values, origin):
    base = np.where(origin >= 0, base_values[np.maximum(origin, 0)], np.nan)
    return values - base


@dataclass(frozen=True, eq=False)
class Comparison:
    """Scenarios against their baseline.

    Attributes
    ----------
    title : str
        The scenario file's name.
    baseline : SteadyResult
        The unchanged network's solution.
    scenarios : tuple of ScenarioOutcome
        In file order.
    caution, conditions : str
        Printed with every comparison.
    """

    title: str
    baseline: SteadyResult
    scenarios: tuple[ScenarioOutcome, ...]
    caution: str = CAUTION
    conditions: str = CONDITIONS

    def summary(self) -> str:
        """One line: how many scenarios, on which network."""
        return (f"{self.title}: {len(self.scenarios)} scenario(s) against the baseline of "
                f"'{self.baseline.network.name}'")


Solver = Callable[..., SteadyResult]


def compare_networks(baseline: Network, scenarios: Sequence[tuple[str, Network]], *, title: str = "",
                     solver: Solver = solve, tolerance: float = DEFAULT_TOLERANCE,
                     max_iterations: int = DEFAULT_MAX_ITERATIONS) -> Comparison:
    """Solve ``baseline`` and each named changed network, and compare.

    Parameters
    ----------
    baseline : Network
    scenarios : sequence of (name, Network)
        Changed networks (for example from :mod:`vesselnet.changes`); beds
        keep their rows.  Autoregulation targets still unresolved hold the
        baseline flow.
    solver : callable
        ``solver(network, tolerance=, max_iterations=) -> SteadyResult``;
        :func:`vesselnet.solve.solve` by default (other physics plug in here).

    Raises
    ------
    SolveError
        A solve failed; the message names the scenario.
    """
    base = _solve("baseline", baseline, solver, tolerance, max_iterations)
    outcomes = []
    for name, network in scenarios:
        network = with_targets(network, base.bed_flow_m3_s)
        outcomes.append(ScenarioOutcome(name, _solve(name, network, solver, tolerance, max_iterations), base))
    return Comparison(title or baseline.name, base, tuple(outcomes))


def compare_scenarios(scenario_file: ScenarioFile, *, solver: Solver = solve,
                      tolerance: float = DEFAULT_TOLERANCE,
                      max_iterations: int = DEFAULT_MAX_ITERATIONS) -> Comparison:
    """Compare every scenario of a read scenario file with its baseline."""
    base = _solve("baseline", scenario_file.network, solver, tolerance, max_iterations)
    networks = scenario_file.networks(base.bed_flow_m3_s)
    outcomes = tuple(ScenarioOutcome(s.name, _solve(s.name, net, solver, tolerance, max_iterations), base,
                                     s.description)
                     for s, net in zip(scenario_file.scenarios, networks))
    return Comparison(scenario_file.name, base, outcomes)


def compare_file(path, **options) -> Comparison:
    """:func:`compare_scenarios` of the scenario file at ``path`` (options as there)."""
    return compare_scenarios(load_scenarios(path), **options)


def _solve(name, network, solver, tolerance, max_iterations) -> SteadyResult:
    try:
        return solver(network, tolerance=tolerance, max_iterations=max_iterations)
    except SolveError as exc:
        raise SolveError(f"scenario '{name}': {exc}", ids=exc.ids) from None


# --- JSON (SPEC section 6, compare --json) ------------------------------------------------------

def _convert(values, kind):
    return from_si(np.asarray(values, dtype=float), kind, DISPLAY_UNITS[kind])


def lesions_json(result: SteadyResult) -> list[dict]:
    """Per lesion: vessel, reduction, flow, pressure drop, proximal/distal pressure and their ratio."""
    table = lesion_table(result)
    flow = _convert(table["flow_m3_s"], "flow")
    drop = _convert(table["pressure_drop_pa"], "pressure")
    proximal = _convert(table["proximal_pressure_pa"], "pressure")
    distal = _convert(table["distal_pressure_pa"], "pressure")
    return [{"vessel": vid, "reduction": number(table["reduction"][k]),
             "area_reduction": number(table["area_reduction"][k]), "flow": number(flow[k]),
             "pressure_drop": number(drop[k]), "proximal_pressure": number(proximal[k]),
             "distal_pressure": number(distal[k]), "pressure_ratio": number(table["pressure_ratio"][k]),
             "fitted_range": bool(table["fitted_range"][k])}
            for k, vid in enumerate(table["vessel"].tolist())]


def state_json(result: SteadyResult) -> dict:
    """The SPEC section 5 pieces of one solution, beds with ``state`` and ``resistance``, and lesions."""
    beds = beds_json(result)
    resistance = _convert(bed_effective_resistance(result), "resistance")
    for record, state, r in zip(beds, bed_states(result), resistance):
        record["resistance"] = number(r)
        record["state"] = str(state)
    return {"inflow": number(_convert(result.inflow_m3_s, "flow")), "nodes": nodes_json(result),
            "vessels": vessels_json(result), "beds": beds, "lesions": lesions_json(result),
            "checks": checks_json(result), "warnings": list(result.warnings)}


def scenario_json(outcome: ScenarioOutcome) -> dict:
    """One scenario: its solution and the differences from the baseline."""
    doc = {"name": outcome.name}
    if outcome.description:
        doc["description"] = outcome.description
    doc.update(state_json(outcome.result))
    doc["inflow_change"] = number(_convert(outcome.inflow_change_m3_s, "flow"))
    for record, change, percent in zip(doc["beds"], _convert(outcome.bed_flow_change_m3_s, "flow"),
                                       outcome.bed_flow_change_percent):
        record["flow_change"], record["flow_change_percent"] = number(change), number(percent)
    q0 = np.where(outcome.vessel_origin >= 0,
                  outcome.baseline.vessel_flow_m3_s[np.maximum(outcome.vessel_origin, 0)], np.nan)
    base_ids = outcome.baseline.network.vessels.ids
    for record, change, percent, origin in zip(doc["vessels"],
                                               _convert(outcome.vessel_flow_change_m3_s, "flow"),
                                               _percent(outcome.vessel_flow_change_m3_s, q0),
                                               outcome.vessel_origin):
        record["flow_change"], record["flow_change_percent"] = number(change), number(percent)
        if origin < 0 or base_ids[origin] != record["id"]:
            record["origin"] = base_ids[origin] if origin >= 0 else None
    for record, change in zip(doc["nodes"], _convert(outcome.node_pressure_change_pa, "pressure")):
        record["pressure_change"] = number(change)
    doc["reversed"] = list(outcome.reversed)
    order = ("name", "description", "inflow", "inflow_change", "nodes", "vessels", "beds", "lesions",
             "reversed", "checks", "warnings")
    return {k: doc[k] for k in order if k in doc}


def comparison_json(comparison: Comparison) -> dict:
    """The whole ``compare --json`` document (SPEC section 6, with the caution and conditions)."""
    return {"vesselnet": FORMAT_VERSION, "network": comparison.baseline.network.name,
            "scenario_file": comparison.title, "caution": comparison.caution,
            "conditions": comparison.conditions, "units": units_map(),
            "baseline": state_json(comparison.baseline),
            "scenarios": [scenario_json(s) for s in comparison.scenarios]}
