"""Graft ranking against closed forms and an outside circuit solver.

References, named beside each check:
* Hagen-Poiseuille R = 8 mu L / (pi r^4) (textbook; REFERENCES 1.1) and Poiseuille wall
  shear stress 4 mu Q / (pi r^3) (REFERENCES 1.3);
* Kirchhoff's laws: two elements between the same two nodes see the same pressure drop, so
  they share flow in proportion to their conductances; networks with the same conductances
  between the same nodes have the same solution (common practice, no source);
* ngspice solving the same network as a resistor circuit (tests/spice_oracle.py);
* straight-line distance between points (Pythagoras) for routed graft lengths.
"""

import dataclasses
import math

import numpy as np
import pytest
import spice_oracle
from graft_cases import ML_S, MMHG, MU, OHM, SERIES, SHARED_TRUNK, plan_from

from vesselnet.demos import demo_folder, demo_path
from vesselnet.grafts import TIE_MARGIN, rank_order, rank_plan
from vesselnet.planfile import load_plan, read_plan_text
from vesselnet.testing import assert_invariants


def poiseuille(length_m, radius_m):
    return 8 * MU * length_m / (math.pi * radius_m**4)


# --- a graft that duplicates an occluded vessel -----------------------------------------------

DUPLICATES = {
    # occluded vessel: (from, to, length cm, radius text, targets)
    "sfa_mid": ("upper_thigh", "lower_thigh", 10.0, "{in: 2.9, out: 2.8}", "[foot, calf_muscle_deep]"),
    "popliteal_ak": ("adductor_hiatus", "knee_joint", 8.5, "{in: 2.7, out: 2.6}", "[calf_muscle_superficial]"),
    "tibioperoneal_trunk": ("popliteal_bifurcation", "tibioperoneal_bifurcation", 3.5, "2.1",
                            "[foot, calf_muscle_lateral]"),
    "profunda_distal": ("profunda_mid", "profunda_end", 11.5, "{in: 2.3, out: 1.8}", "[thigh_muscle_distal]"),
}


@pytest.mark.parametrize("vessel", sorted(DUPLICATES))
def test_a_graft_duplicating_an_occluded_vessel_restores_the_healthy_solution(vessel):
    """Kirchhoff: the grafted network has the same conductances between the same nodes as the
    healthy one (the occluded vessel carries nothing, the graft is its copy, taper included), so
    every original node pressure and every bed flow is the healthy one, and the restored
    fraction is exactly 1.  No bed has less than in health; against the diseased state a bed
    that the occlusion had fed more gives exactly that back."""
    a, b, length, radius, targets = DUPLICATES[vessel]
    text = f"""vesselnet: 1
network: leg.yaml
condition: [{{occlude: {{vessel: {vessel}}}}}]
targets: {targets}
candidates:
  - {{id: copy, from: {a}, to: {b}, length: {length}, radius: {radius}}}
robustness: {{samples: 0}}
"""
    ranking = rank_plan(read_plan_text(text, "copy.yaml", demo_folder()))
    [outcome] = ranking.candidates
    assert outcome.restored_fraction == pytest.approx(1.0, abs=1e-9)
    np.testing.assert_allclose(outcome.result.bed_flow_m3_s, ranking.healthy.bed_flow_m3_s, rtol=1e-9)
    healthy = ranking.healthy
    rows = [outcome.result.network.nodes.index[n] for n in healthy.network.nodes.ids]
    np.testing.assert_allclose(outcome.result.pressure_pa[rows], healthy.pressure_pa, rtol=1e-11)
    original = healthy.vessel_flow_m3_s[healthy.network.vessels.index[vessel]]
    assert outcome.graft_flow_m3_s == pytest.approx(original, rel=1e-9)
    assert outcome.steal_vs_healthy is None
    if outcome.steal is not None:       # a bed the occlusion had fed more gives that back, exactly
        k = healthy.network.beds.index[outcome.steal.bed]
        assert outcome.steal.flow_change_m3_s == pytest.approx(
            healthy.bed_flow_m3_s[k] - ranking.diseased.bed_flow_m3_s[k], rel=1e-8)
    assert_invariants(outcome.result)


# --- a graft in parallel with a healthy vessel ----------------------------------------------------

PARALLEL = """condition: [{narrow: {vessel: d, reduction: 70%, length: 2}}]
targets: [organ]
territory: infrainguinal
candidates:
  - {id: g, from: ROOT_END, to: J_END, length: LENGTH, radius: RADIUS}
robustness: {samples: 0}
"""


@pytest.mark.parametrize("radius_mm, length_cm", [(3.0, 50.0), (2.0, 35.0), (4.0, 80.0), (1.2, 10.0)])
def test_a_graft_parallel_to_a_healthy_vessel_splits_flow_by_conductance(tmp_path, radius_mm, length_cm):
    """Graft and vessel p both join root and j: Q_g / Q_p = G_g / G_p with G = pi r^4 / (8 mu L)
    (Hagen-Poiseuille, REFERENCES 1.1); the graft's resistance is 8 mu L / (pi r^4) and its wall
    shear stress 4 mu Q / (pi r^3) (REFERENCES 1.3).  The native flow meeting the graft at j is
    p's, so the competing/graft ratio is G_p / G_g."""
    body = (PARALLEL.replace("ROOT_END", "root").replace("J_END", "j")
            .replace("LENGTH", str(length_cm)).replace("RADIUS", str(radius_mm)))
    plan = plan_from(tmp_path, SERIES, body)
    [o] = rank_plan(plan).candidates
    result = o.result
    q_p = result.vessel_flow_m3_s[result.network.vessels.index["p"]]
    conductance_ratio = (radius_mm**4 / length_cm) / (3.0**4 / 50.0)
    assert o.graft_flow_m3_s / q_p == pytest.approx(conductance_ratio, rel=1e-10)
    assert o.graft_resistance_pa_s_m3 == pytest.approx(poiseuille(length_cm / 100, radius_mm / 1e3), rel=1e-12)
    radius = radius_mm / 1e3
    assert o.graft_wss_pa == pytest.approx(4 * MU * o.graft_flow_m3_s / (math.pi * radius**3), rel=1e-12)
    assert o.graft_velocity_m_s == pytest.approx(o.graft_flow_m3_s / (math.pi * radius**2), rel=1e-12)
    assert o.competing_flow_m3_s == pytest.approx(q_p, rel=1e-12)
    assert o.competing_ratio == pytest.approx(1 / conductance_ratio, rel=1e-10)
    assert 0 < o.restored_fraction < 1


@pytest.mark.parametrize("start, end", [(0.25, 0.75), (0.1, 0.5), (0.4, 0.9)])
def test_a_part_way_graft_parallels_the_piece_between_its_joins(tmp_path, start, end):
    """Joined at fractions s < e along p, the graft parallels the piece p.2 of length (e - s) L_p:
    Q_g / Q_p.2 = (r_g^4 / L_g) / (r_p^4 / ((e - s) L_p)) (Hagen-Poiseuille), and the pieces
    before and after carry the sum (mass conservation)."""
    body = (PARALLEL.replace("ROOT_END", f"{{vessel: p, at: {start}}}").replace("J_END", f"{{vessel: p, at: {end}}}")
            .replace("LENGTH", "30").replace("RADIUS", "2.5"))
    [o] = rank_plan(plan_from(tmp_path, SERIES, body)).candidates
    q = dict(zip(o.result.network.vessels.ids, o.result.vessel_flow_m3_s))
    ratio = (2.5**4 / 30.0) / (3.0**4 / ((end - start) * 50.0))
    assert o.graft_flow_m3_s / q["p.2"] == pytest.approx(ratio, rel=1e-10)
    assert q["p.1"] == pytest.approx(q["p.2"] + o.graft_flow_m3_s, rel=1e-12)
    assert q["p.3"] == pytest.approx(q["p.1"], rel=1e-12)


@pytest.mark.parametrize("factor", [1.0, 1.25, 1.6])
@pytest.mark.parametrize("at", [0.0, 0.5, 0.8])
def test_a_routed_length_is_the_straight_distance_times_the_factor(tmp_path, at, factor):
    """root at (0, 0, 0) cm, j at (30, 40, 0): a point at fraction f along p is at (30 f, 40 f, 0),
    k is at (30, 60, 0); the routed length is factor x the Pythagorean distance, and the graft's
    resistance the Poiseuille one of that length."""
    body = f"""condition: [{{narrow: {{vessel: d, reduction: 70%, length: 2}}}}]
targets: [organ]
candidates:
  - {{id: g, from: {{vessel: p, at: {at}}}, to: k, radius: 2, routing_factor: {factor}}}
robustness: {{samples: 0}}
"""
    plan = plan_from(tmp_path, SERIES, body)
    distance_cm = math.hypot(30 - 30 * at, 60 - 40 * at)
    assert plan.candidates[0].length_m == pytest.approx(factor * distance_cm / 100, rel=1e-12)
    [o] = rank_plan(plan).candidates
    assert o.graft_resistance_pa_s_m3 == pytest.approx(poiseuille(factor * distance_cm / 100, 2e-3), rel=1e-12)


# --- ranking ------------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def demo_plan():
    return load_plan(demo_path("leg_graft_plan"))


@pytest.fixture(scope="module")
def demo_ranking(demo_plan):
    return rank_plan(demo_plan, samples=0)


@pytest.mark.parametrize("seed", [7919, 104729, 1299709])
def test_ranking_does_not_depend_on_the_order_of_the_candidates(demo_plan, demo_ranking, seed):
    """The same candidates in another order: same ids in the same places, same scores, ranks and
    ties (the score of a candidate depends only on its own network)."""
    order = np.random.default_rng(seed).permutation(len(demo_plan.candidates))
    shuffled = dataclasses.replace(demo_plan, candidates=tuple(demo_plan.candidates[i] for i in order))
    again = rank_plan(shuffled, samples=0)
    assert [o.id for o in again.candidates] == [o.id for o in demo_ranking.candidates]
    assert [(o.rank, o.tied, o.score) for o in again.candidates] == \
        [(o.rank, o.tied, o.score) for o in demo_ranking.candidates]


@pytest.mark.parametrize("first", [0, 1])
def test_identical_candidates_tie_and_are_listed_by_id(demo_plan, first):
    """Two candidates that are the same graft under different ids have the same score: they share
    a rank, both marked tied, listed by id whichever comes first in the plan."""
    base = demo_plan.candidates[0]
    twin = dataclasses.replace(base, id="zz_twin", change=dataclasses.replace(
        base.change, arguments={"vessel": {**base.vessel, "id": "zz_twin"}}))
    pair = (base, twin) if first == 0 else (twin, base)
    plan = dataclasses.replace(demo_plan, candidates=pair + demo_plan.candidates[1:])
    ranked = rank_plan(plan, samples=0).candidates
    names = [o.id for o in ranked]
    i, j = names.index(base.id), names.index("zz_twin")
    assert j == i + 1 and ranked[i].rank == ranked[j].rank and ranked[i].tied and ranked[j].tied


@pytest.mark.parametrize("scores, ranks, tied", [
    ([0.9, 0.9 - 0.999 * TIE_MARGIN, 0.5], [1, 1, 3], [True, True, False]),
    ([0.9, 0.9 - 1.001 * TIE_MARGIN, 0.5], [1, 2, 3], [False, False, False]),
    ([0.5, 0.9, 0.7], [1, 2, 3], [False, False, False]),
    ([0.9, 0.8970, 0.8940], [1, 1, 3], [True, True, False]),     # grouped by the group's best
])
def test_rank_order_follows_the_documented_tie_rule(scores, ranks, tied):
    """SCORE_DEFINITION: highest first; within TIE_MARGIN of the best of the group: same rank
    (standard competition ranking, 1 1 3; common practice, no source)."""
    ids = [f"c{k}" for k in range(len(scores))]
    order, rank, tie = rank_order(ids, scores)
    assert sorted(np.array(scores)[order], reverse=True) == list(np.array(scores)[order])
    assert rank.tolist() == ranks and tie.tolist() == tied


def test_demo_ranks_candidates_with_their_invariants(demo_ranking):
    """Every grafted solution conserves mass and keeps every element law (vesselnet.testing), the
    condition costs target flow, and the best candidate restores the most of it."""
    assert demo_ranking.lost_flow_m3_s > 0
    scores = [o.score for o in demo_ranking.candidates]
    assert scores == sorted(scores, reverse=True)
    for o in demo_ranking.candidates:
        assert_invariants(o.result)
        assert o.graft_flow_m3_s > 0


# --- steal ----------------------------------------------------------------------------------------

STEAL_PLAN = """condition: [{occlude: {vessel: main}}]
targets: [target]
candidates:
  - {id: from_trunk, from: {vessel: trunk, at: 0.5}, to: k, length: 25, radius: 2}
  - {id: from_root, from: root, to: k, length: 35, radius: 2}
robustness: {samples: 0}
"""


@pytest.fixture(scope="module")
def steal_ranking(tmp_path_factory):
    return rank_plan(plan_from(tmp_path_factory.mktemp("steal"), SHARED_TRUNK, STEAL_PLAN))


def _circuit(graft):
    """SHARED_TRUNK as an ngspice circuit (1 V = 1 mmHg, 1 A = 1 mL/s), main occluded, with an
    optional graft (node, resistance) into k.  Nodes: 0 root, 1 trunk middle, 2 j, 3 s, 4 k, 5 m."""
    ohm = lambda length_cm, radius_mm: poiseuille(length_cm / 100, radius_mm / 1e3) / OHM
    resistors = [(0, 1, ohm(10, 2)), (1, 2, ohm(10, 2)), (2, 3, ohm(10, 1.5)), (3, None, 30.0, 0.0),
                 (4, None, 30.0, 0.0), (0, 5, ohm(10, 1.5)), (5, None, 30.0, 0.0)]
    if graft is not None:
        resistors.append((graft[0], 4, graft[1]))
    _, amps = spice_oracle.solve_dc(6, resistors, {0: 100.0})
    return {"other": amps[3], "target": amps[4], "elsewhere": amps[6]}


def test_steal_appears_when_the_inflow_vessel_also_feeds_another_bed(steal_ranking):
    """Grafting from part-way along the trunk, which also feeds 'other', lowers the pressure at j:
    'other' loses flow.  The loss equals ngspice's for the same circuit."""
    o = next(c for c in steal_ranking.candidates if c.id == "from_trunk")
    diseased = _circuit(None)
    grafted = _circuit((1, poiseuille(0.25, 2e-3) / OHM))
    expected = (grafted["other"] - diseased["other"]) * ML_S
    assert expected < 0
    assert o.steal is not None and o.steal.bed == "other"
    assert o.steal.flow_change_m3_s == pytest.approx(expected, rel=1e-8)
    assert o.steal.flow_change_percent == pytest.approx(100 * expected / (diseased["other"] * ML_S), rel=1e-8)
    assert o.state.target_flow_m3_s == pytest.approx(grafted["target"] * ML_S, rel=1e-8)


def test_no_steal_when_the_graft_takes_its_inflow_from_the_fixed_pressure_source(steal_ranking):
    """From the fixed-pressure root no vessel that feeds another bed carries the graft's flow: no
    bed loses flow (ngspice agrees: 'other' and 'elsewhere' keep theirs)."""
    o = next(c for c in steal_ranking.candidates if c.id == "from_root")
    assert o.steal is None
    diseased = _circuit(None)
    grafted = _circuit((0, poiseuille(0.35, 2e-3) / OHM))
    assert grafted["other"] == pytest.approx(diseased["other"], rel=1e-9)
    assert o.state.target_flow_m3_s == pytest.approx(grafted["target"] * ML_S, rel=1e-8)
    assert o.competing_flow_m3_s == 0.0          # beyond an occlusion no native flow arrives at k


def test_restored_fraction_matches_the_circuit(steal_ranking):
    """restored = (Q_grafted - Q_diseased) / (Q_healthy - Q_diseased) on ngspice's target flows,
    the healthy circuit having 'main' open (SCORE_DEFINITION)."""
    ohm = lambda length_cm, radius_mm: poiseuille(length_cm / 100, radius_mm / 1e3) / OHM
    _, amps = spice_oracle.solve_dc(6, [(0, 1, ohm(10, 2)), (1, 2, ohm(10, 2)), (2, 3, ohm(10, 1.5)),
                                        (3, None, 30.0, 0.0), (2, 4, ohm(20, 2)), (4, None, 30.0, 0.0),
                                        (0, 5, ohm(10, 1.5)), (5, None, 30.0, 0.0)], {0: 100.0})
    healthy, diseased = amps[5], _circuit(None)["target"]
    for o in steal_ranking.candidates:
        graft = (1, poiseuille(0.25, 2e-3) / OHM) if o.id == "from_trunk" else (0, poiseuille(0.35, 2e-3) / OHM)
        expected = (_circuit(graft)["target"] - diseased) / (healthy - diseased)
        assert o.restored_fraction == pytest.approx(expected, rel=1e-8)
