"""Adjoint elasticities of bed shares against closed forms and central finite differences.

References: the closed form of a two-branch network (derived in the test);
central finite differences of full re-solves (the textbook check of a
derivative: (f(x e^h) - f(x e^-h)) / 2h in ln x, error O(h^2)).
"""

import dataclasses

import numpy as np
import pytest

from calib_networks import random_network
from vesselnet.cli import main
from vesselnet.demos import demo_path
from vesselnet.model import Network
from vesselnet.reader import load_network
from vesselnet.sensitivity import sensitivity
from vesselnet.solve import solve

MU = 3.5e-3
LOG_H = 1e-4
"""Step of the reference central differences; 1e-5 is already limited by the solver's
rounding (about 1e-13 of the inflow per solve) on the smallest elasticities."""


def scaled(network: Network, kind: str, row: int, factor: float) -> Network:
    v, beds = network.vessels, network.beds
    if kind == "radius":
        r_in, r_out = v.radius_in_m.copy(), v.radius_out_m.copy()
        r_in[row] *= factor
        r_out[row] *= factor
        return dataclasses.replace(network, vessels=dataclasses.replace(v, radius_in_m=r_in, radius_out_m=r_out))
    if kind == "stenosis":
        red = v.stenosis_reduction.copy()
        red[row] *= factor
        return dataclasses.replace(network, vessels=dataclasses.replace(v, stenosis_reduction=red))
    res = beds.resistance_pa_s_m3.copy()
    res[row] *= factor
    return dataclasses.replace(network, beds=dataclasses.replace(beds, resistance_pa_s_m3=res))


def finite_differences(network: Network, sens) -> np.ndarray:
    """Central differences of ln|share| in ln(parameter), one pair of solves per parameter
    (a bed in series may carry reversed, negative flow)."""
    out = np.empty_like(sens.elasticity)
    for j, (kind, item) in enumerate(zip(sens.kind, sens.item)):
        section = network.beds if kind == "resistance" else network.vessels
        row = section.index[item]
        up = solve(scaled(network, kind, row, np.exp(LOG_H))).bed_share[sens.bed_rows]
        down = solve(scaled(network, kind, row, np.exp(-LOG_H))).bed_share[sens.bed_rows]
        out[:, j] = (np.log(np.abs(up)) - np.log(np.abs(down))) / (2 * LOG_H)
    return out


def assert_matches(adjoint: np.ndarray, reference: np.ndarray):
    """Relative agreement to 1e-5; an elasticity more than a thousand times below the largest
    one of its bed is compared at that floor (the reference itself is no better there)."""
    floor = 1e-3 * np.abs(reference).max(axis=1, keepdims=True)
    error = np.abs(adjoint - reference) / np.maximum(np.abs(reference), floor)
    assert error.max() < 1e-5, f"worst relative error {error.max():.2e}"


def test_two_branches_closed_form():
    """Derivation: beds x, y behind branches of resistance R_v each, fed from a node at a
    fixed pressure P through a trunk.  Branch totals T_i = R_v,i + R_i; the share of x is
    s = (1/T_x) / (1/T_x + 1/T_y), independent of the trunk.  Then
    d ln s / d ln R_x = -(1 - s) R_x / T_x,  d ln s / d ln R_y = (1 - s) R_y / T_y,
    d ln s / d ln r_b = (1 - s) 4 R_v,x / T_x (Poiseuille: R_v ~ r^-4), and the trunk does not matter."""
    r_v = 8 * MU * 0.1 / (np.pi * 0.001**4)
    net = Network.build(nodes={"r": {"pressure_pa": 13332.2}},
                        vessels=[{"id": "a", "from": "r", "to": "j", "length_m": 0.1, "radius_m": 0.002},
                                 {"id": "b", "from": "j", "to": "t", "length_m": 0.1, "radius_m": 0.001},
                                 {"id": "c", "from": "j", "to": "u", "length_m": 0.1, "radius_m": 0.001}],
                        beds=[{"id": "x", "node": "t", "resistance_pa_s_m3": 1e9},
                              {"id": "y", "node": "u", "resistance_pa_s_m3": 3e9}])
    t_x, t_y = r_v + 1e9, r_v + 3e9
    s = (1 / t_x) / (1 / t_x + 1 / t_y)
    e = dict(zip(zip(sensitivity(net, beds=["x"]).kind, sensitivity(net, beds=["x"]).item),
                 sensitivity(net, beds=["x"]).elasticity[0]))
    assert e[("resistance", "x")] == pytest.approx(-(1 - s) * 1e9 / t_x, rel=1e-8)
    assert e[("resistance", "y")] == pytest.approx((1 - s) * 3e9 / t_y, rel=1e-8)
    assert e[("radius", "b")] == pytest.approx((1 - s) * 4 * r_v / t_x, rel=1e-8)
    assert e[("radius", "c")] == pytest.approx(-(1 - s) * 4 * r_v / t_y, rel=1e-8)
    assert abs(e[("radius", "a")]) < 1e-12


CASES = [(seed, inlet, lesions) for seed in (20240611, 8807, 41221)
         for inlet in ("inflow", "pressure") for lesions in (0, 2)]


@pytest.mark.parametrize("seed,inlet,lesions", CASES)
def test_random_networks_match_finite_differences(seed, inlet, lesions):
    rng = np.random.default_rng(seed)
    net = random_network(rng, inlet=inlet, lesions=lesions, series=seed % 2 == 1)
    sens = sensitivity(net)
    assert set(sens.kind) == {"radius", "resistance"} | ({"stenosis"} if lesions else set())
    assert_matches(sens.elasticity, finite_differences(net, sens))


def test_leg_demo_with_lesions_matches_finite_differences():
    net = load_network(demo_path("leg"))
    v = net.vessels
    red, length = v.stenosis_reduction.copy(), v.stenosis_length_m.copy()
    for vessel, r, ls in (("sfa_mid", 0.7, 0.03), ("ata_prox", 0.5, 0.01)):
        red[v.index[vessel]], length[v.index[vessel]] = r, ls
    net = dataclasses.replace(net, vessels=dataclasses.replace(v, stenosis_reduction=red, stenosis_length_m=length))
    sens = sensitivity(net, beds=["foot", "calf_muscle_superficial", "pelvis"])
    assert_matches(sens.elasticity, finite_differences(net, sens))


def test_shares_sum_to_one_so_elasticities_balance():
    """The terminal shares of a network without reversed beds sum to one for every parameter
    value, so sum_b s_b d ln s_b / d ln theta = 0 for every theta (a check of the adjoint's
    inflow term)."""
    rng = np.random.default_rng(66021)
    net = random_network(rng, inlet="pressure", loops=3)
    sens = sensitivity(net)
    shares = sens.result.bed_share[sens.bed_rows]
    weighted = shares @ sens.elasticity
    assert np.abs(weighted).max() < 1e-10 * np.abs(sens.elasticity).max()


def test_ranked_lists_largest_first():
    sens = sensitivity(load_network(demo_path("collateral")))
    bed = sens.beds[0]
    ranked = sens.ranked(bed, top=5)
    values = [abs(e) for _, _, e in ranked]
    assert values == sorted(values, reverse=True) and len(ranked) == 5
    k = sens.beds.index(bed)
    assert values[0] == pytest.approx(np.abs(sens.elasticity[k]).max())


def test_cli_sensitivity_report_and_json(capsys):
    import json

    assert main(["sensitivity", str(demo_path("leg")), "--bed", "foot", "--top", "3"]) == 0
    out = capsys.readouterr().out
    assert "bed 'foot'" in out and "not a medical device" in out and "elasticity [%/%]" in out
    assert main(["sensitivity", str(demo_path("leg")), "--bed", "foot", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["beds"][0]["id"] == "foot" and len(doc["beds"][0]["ranked"]) == 5
    assert main(["sensitivity", str(demo_path("leg")), "--bed", "fot"]) == 2
    assert "no such bed" in capsys.readouterr().err
