"""Distensible vessels in the network solve: rigid limit, mass balance, Newton, outputs, warnings.

References used here:
- REFERENCES 6.2 closed form, coded independently in this file from its formula,
  with scipy's brentq for the interior pressure of a series pair.
- Laplace's law for a thin-walled cylinder sigma = P r / h (textbook relation, e.g.
  Fung, Biomechanics: Circulation, 1997), by hand.
- Poiseuille wall shear stress 4 mu Q / (pi r^3) (REFERENCES 1.3).
- Taper volume pi L (r0^2 + r0 r1 + r1^2) / 3 (elementary geometry, checked against
  scipy quadrature in test_tubelaw.py).
- Newton's method converges quadratically near a regular root (common practice, no source).
"""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import brentq

from vesselnet.model import Network
from vesselnet.reader import load_network
from vesselnet.solve import solve
from vesselnet.testing import assert_invariants
from vesselnet.walls import volume_summary

MMHG = 133.322387415
MU = 3.5e-3
NETWORKS = Path(__file__).resolve().parent.parent / "networks"


def with_walls(network: Network, *, modulus_pa=None, distensible=True, thickness_m=None):
    """The network with every vessel given a wall (where missing) and made distensible."""
    v = network.vessels
    h = np.where(np.isnan(v.wall_thickness_m), 0.15 * v.radius_in_m, v.wall_thickness_m)
    e = np.where(np.isnan(v.wall_modulus_pa), 1e6, v.wall_modulus_pa)
    if modulus_pa is not None:
        e = np.broadcast_to(modulus_pa, e.shape).astype(float)
    if thickness_m is not None:
        h = np.broadcast_to(thickness_m, h.shape).astype(float)
    return dataclasses.replace(network, vessels=dataclasses.replace(
        v, wall_thickness_m=h, wall_modulus_pa=e, distensible=np.full(len(v), distensible)))


def random_network(seed: int, *, modulus_pa: float, n: int = 40) -> Network:
    """A random connected network with loops, beds and fixed pressures, all vessels distensible."""
    rng = np.random.default_rng(seed)
    names = [f"n{i}" for i in range(n)]
    vessels = []
    for i in range(1, n):                                     # a random tree
        j = int(rng.integers(0, i))
        vessels.append((names[j], names[i]))
    for _ in range(n // 3):                                   # and loops
        a, b = rng.choice(n, 2, replace=False)
        vessels.append((names[a], names[b]))
    items = [{"id": f"v{k}", "from": a, "to": b, "length_m": float(rng.uniform(0.02, 0.2)),
              "radius_in_m": float(rng.uniform(1e-3, 3e-3)), "radius_out_m": float(rng.uniform(1e-3, 3e-3)),
              "wall_thickness_m": float(rng.uniform(2e-4, 6e-4)), "wall_modulus_pa": modulus_pa,
              "external_pressure_pa": float(rng.uniform(-2, 2)) * MMHG, "distensible": True}
             for k, (a, b) in enumerate(vessels)]
    beds = [{"id": f"bed{k}", "node": names[int(i)], "resistance_pa_s_m3": float(rng.uniform(3e8, 3e9)),
             "outflow_pressure_pa": 5 * MMHG} for k, i in enumerate(rng.choice(n, 6, replace=False))]
    return Network.build(nodes={"n0": {"pressure_pa": 20 * MMHG}}, vessels=items, beds=beds)


def reference_flow(p_in, p_out, r0, e, h, nu, mu, length):
    """REFERENCES 6.2: Q = beta (A_in^2.5 - A_out^2.5) / (40 pi mu L), sqrt(A) from the 6.1 law."""
    a0 = math.pi * r0**2
    beta = math.sqrt(math.pi) * e * h / ((1 - nu**2) * a0)
    a_in = (math.sqrt(a0) + p_in / beta) ** 2
    a_out = (math.sqrt(a0) + p_out / beta) ** 2
    return beta * (a_in**2.5 - a_out**2.5) / (40 * math.pi * mu * length)


# ------------------------------------------------------------------ rigid limit
@pytest.mark.parametrize("name", ["leg", "collateral", "whole_body", "venous_return"])
def test_rigid_limit_reproduces_rigid_solve(name):
    """Modulus -> infinity (E = 1e9 x typical): every vessel distensible gives the rigid
    solve's pressures and flows to 1e-9 (the leg has tapers and a pedal loop)."""
    base = load_network(NETWORKS / f"{name}.yaml")
    rigid = solve(with_walls(base, distensible=False))
    stiff = solve(with_walls(base, modulus_pa=1e15))
    assert stiff.iterations >= 1
    span = np.nanmax(rigid.pressure_pa) - np.nanmin(rigid.pressure_pa)
    assert np.allclose(stiff.pressure_pa, rigid.pressure_pa, rtol=0, atol=1e-9 * span)
    scale = np.abs(rigid.vessel_flow_m3_s).max()
    assert np.allclose(stiff.vessel_flow_m3_s, rigid.vessel_flow_m3_s, rtol=0, atol=1e-9 * scale)
    assert np.allclose(stiff.bed_flow_m3_s, rigid.bed_flow_m3_s, rtol=1e-9, atol=1e-9 * scale)
    assert np.allclose(stiff.vessel_extra["volume_m3"], rigid.vessel_extra["volume_m3"], rtol=1e-9)
    assert np.allclose(stiff.vessel_extra["wall_stress_pa"], rigid.vessel_extra["wall_stress_pa"],
                       rtol=1e-9)
    assert_invariants(stiff)


# ------------------------------------------------------------- mass, law, Newton
@pytest.mark.parametrize("seed, modulus_pa", [(20240611, 1e6), (777123, 2e5), (31337, 8e4)])
def test_random_distensible_networks_conserve_mass(seed, modulus_pa):
    """Mass conserved at every node to 1e-9 and every vessel obeys its wall law
    (vesselnet.testing invariants, which invert the law per vessel)."""
    result = solve(random_network(seed, modulus_pa=modulus_pa))
    report = assert_invariants(result, rtol=1e-9)
    assert report["mass_balance"] <= 1e-9
    assert result.mass_balance <= 1e-9


def test_series_pair_against_brentq():
    """Two distensible vessels in series between fixed pressures: the interior pressure is
    the brentq root of Q1(p_in, p) = Q2(p, p_out) with the REFERENCES 6.2 formula."""
    wall = {"wall_thickness_m": 3e-4, "wall_modulus_pa": 1e5, "distensible": True}
    net = Network.build(nodes={"a": {"pressure_pa": 15 * MMHG}, "c": {"pressure_pa": 3 * MMHG}},
                        vessels=[{"id": "up", "from": "a", "to": "b", "length_m": 0.3,
                                  "radius_m": 0.002, **wall},
                                 {"id": "down", "from": "b", "to": "c", "length_m": 0.2,
                                  "radius_m": 0.003, **wall}])
    result = solve(net)
    mid = brentq(lambda p: reference_flow(15 * MMHG, p, 0.002, 1e5, 3e-4, 0.5, MU, 0.3)
                 - reference_flow(p, 3 * MMHG, 0.003, 1e5, 3e-4, 0.5, MU, 0.2),
                 3 * MMHG, 15 * MMHG, xtol=1e-13, rtol=1e-15)
    assert result.pressure_pa[net.nodes.index["b"]] == pytest.approx(mid, rel=1e-10)
    q = reference_flow(15 * MMHG, mid, 0.002, 1e5, 3e-4, 0.5, MU, 0.3)
    assert result.vessel_flow_m3_s == pytest.approx([q, q], rel=1e-9)
    # effective resistance dP/Q reported for the nonlinear vessels
    assert result.vessel_resistance_pa_s_m3[0] == pytest.approx((15 * MMHG - mid) / q, rel=1e-9)


@pytest.mark.parametrize("seed", [4242, 90210])
def test_newton_converges_quadratically(seed):
    """Newton's method with an exact Jacobian converges quadratically near a regular root
    (common practice): from the default flat start (``solve_groups``) the estimated order
    log(r_k+1 / r_k) / log(r_k / r_k-1) is about 2 once r_k < 0.1, and in ``solve`` (started
    from the rigid solution) every residual below 0.3 is followed by one below its square.
    E = 0.1 MPa gives strains up to about 25 %: a genuinely nonlinear problem."""
    from vesselnet.solve import element_groups, solve_groups

    net = random_network(seed, modulus_pa=1e5)
    mu = np.full(len(net.vessels), MU)
    flat = solve_groups(net, element_groups(net, mu), viscosity_pa_s=mu, tolerance=1e-12)
    history = np.array(flat.residual_history)
    tail = history[(history < 0.1) & (history > 1e-13)]
    assert len(tail) >= 3, history
    orders = np.log(tail[2:] / tail[1:-1]) / np.log(tail[1:-1] / tail[:-2])
    assert orders.min() > 1.8, (history, orders)

    result = solve(net, tolerance=1e-12)
    history = np.array(result.residual_history)
    assert result.iterations <= 4, history
    pairs = [(a, b) for a, b in zip(history[:-1], history[1:]) if a < 0.3 and b > 1e-15]
    assert len(pairs) >= 2, history
    assert all(b <= a * a for a, b in pairs), history


def test_non_convergence_is_a_clear_error():
    """A capped Newton iteration raises SolveError naming the worst node."""
    from vesselnet.errors import SolveError

    with pytest.raises(SolveError, match=r"did not converge in 1 Newton steps.*at node '"):
        solve(random_network(4242, modulus_pa=1e5), max_iterations=1)


# ------------------------------------------------------------------ outputs
def single_vessel(p_a_mmhg, p_b_mmhg, *, distensible, p_ext_mmhg=0.0, stenosis=None):
    vessel = {"id": "v", "from": "a", "to": "b", "length_m": 0.2, "radius_m": 0.003,
              "wall_thickness_m": 0.0006, "wall_modulus_pa": 0.8e6, "distensible": distensible,
              "external_pressure_pa": p_ext_mmhg * MMHG, "tags": ["arterial"]}
    if stenosis:
        vessel.update(stenosis_reduction=stenosis, stenosis_length_m=0.01)
    return Network.build(nodes={"a": {"pressure_pa": p_a_mmhg * MMHG}, "b": {"pressure_pa": p_b_mmhg * MMHG}},
                         vessels=[vessel])


def test_laplace_wall_stress_in_a_solve():
    """Typical artery at 100 mmHg (r0 3 mm, h 0.6 mm, E 0.8 MPa, nu 0.5), Laplace's law
    sigma = P r / h by hand: rigid 13332.24 * 3 / 0.6 = 66.661 kPa; distensible with
    r = r0 (1 + P (1 - nu^2) r0 / (E h)) = 3 * 1.062495 = 3.187485 mm -> 70.827 kPa."""
    rigid = solve(single_vessel(100, 100, distensible=False))
    assert rigid.vessel_extra["wall_stress_pa"][0] == pytest.approx(66661.19, rel=1e-6)
    dist = solve(single_vessel(100, 100, distensible=True))
    assert dist.vessel_extra["lumen_radius_m"][0] == pytest.approx(3.187485e-3, rel=1e-6)
    assert dist.vessel_extra["wall_stress_pa"][0] == pytest.approx(13332.2387 * 3.187485 / 0.6, rel=1e-6)
    assert dist.vessel_extra["wall_strain"][0] == pytest.approx(0.062495, rel=1e-5)
    assert np.isnan(rigid.vessel_extra["wall_strain"][0])


def test_wall_stress_nan_without_thickness_and_volume_from_taper():
    """Rigid vessels without a wall: stress NaN; volume pi L (r0^2 + r0 r1 + r1^2) / 3."""
    net = Network.build(nodes={"a": {"pressure_pa": 1e4}, "b": {"pressure_pa": 0.0}},
                        vessels=[{"id": "t", "from": "a", "to": "b", "length_m": 0.1,
                                  "radius_in_m": 0.003, "radius_out_m": 0.002}])
    result = solve(net)
    assert np.isnan(result.vessel_extra["wall_stress_pa"][0])
    assert result.vessel_extra["volume_m3"][0] == pytest.approx(math.pi * 0.1 * (9 + 6 + 4) * 1e-6 / 3,
                                                                rel=1e-12)


def test_wss_and_velocity_use_the_distended_radius():
    """Poiseuille WSS 4 mu Q / (pi r^3) (REFERENCES 1.3) at the lumen radius at mean pressure."""
    result = solve(single_vessel(100, 95, distensible=True))
    r = result.vessel_extra["lumen_radius_m"][0]
    q = result.vessel_flow_m3_s[0]
    assert r > 0.003 * 1.05
    assert result.vessel_wss_pa[0] == pytest.approx(4 * MU * q / (math.pi * r**3), rel=1e-12)
    assert result.vessel_mean_velocity_m_s[0] == pytest.approx(q / (math.pi * r**2), rel=1e-12)
    assert q == pytest.approx(3.8377e-5, rel=5e-5)          # REFERENCES 6.2 [C]


def test_volume_summary_by_tag():
    """Totals are sums of the per-vessel volumes; shares are fractions of the total."""
    result = solve(load_network(NETWORKS / "venous_return.yaml"))
    summary = volume_summary(result)
    volume = result.vessel_extra["volume_m3"]
    v = result.network.vessels
    assert summary["total_m3"] == pytest.approx(volume.sum(), rel=1e-14)
    for tag in ("arterial", "venous"):
        assert summary["by_tag"][tag]["volume_m3"] == pytest.approx(volume[v.tags[tag]].sum(), rel=1e-14)
    assert summary["by_tag"]["arterial"]["share"] + summary["by_tag"]["venous"]["share"] == pytest.approx(1.0)
    assert summary["stressed_m3"] > 0                           # the veins hold blood under pressure
    assert summary["untagged"]["volume_m3"] == 0.0


# ------------------------------------------------------------------ warnings
def test_negative_transmural_pressure_warns():
    """External pressure above the vessel pressure: the vessel would collapse."""
    result = solve(single_vessel(10, 5, distensible=True, p_ext_mmhg=8))
    assert any("negative transmural pressure" in w and "'v'" in w for w in result.warnings)


def test_large_strain_warns():
    """Strain beyond the 10 % small-strain range.  By hand, strain = P (1 - nu^2) r0 / (E h):
    E = 0.8 MPa at 100 mmHg gives 6.2 % (no warning); E = 0.2 MPa gives 25.0 %."""
    quiet = solve(single_vessel(100, 99, distensible=True))
    assert not any("strain" in w for w in quiet.warnings)
    net = single_vessel(100, 99, distensible=True)
    soft = dataclasses.replace(net, vessels=dataclasses.replace(net.vessels,
                                                                wall_modulus_pa=np.array([0.2e6])))
    result = solve(soft)
    assert any("radial strain above 10%" in w and "'v' (25%)" in w for w in result.warnings)


def test_lesion_on_distensible_vessel_is_solved_rigid():
    """A distensible vessel with a lesion: the rigid lesion solve, and a warning."""
    rigid = solve(single_vessel(100, 80, distensible=False, stenosis=0.6))
    dist = solve(single_vessel(100, 80, distensible=True, stenosis=0.6))
    assert dist.vessel_flow_m3_s[0] == pytest.approx(rigid.vessel_flow_m3_s[0], rel=1e-12)
    assert any("carry a lesion and were solved rigid" in w for w in dist.warnings)


def test_demo_solves_without_warnings():
    """The venous-return demo: converges, passes the invariants, veins hold most blood."""
    result = solve(load_network(NETWORKS / "venous_return.yaml"))
    assert_invariants(result)
    assert result.warnings == ()
    assert 1 <= result.iterations <= 6
    summary = volume_summary(result)
    assert summary["by_tag"]["venous"]["share"] > 0.7   # most blood volume is venous (common practice)
    distensible = result.network.vessels.distensible
    assert distensible.sum() == 16
    assert np.all(result.vessel_extra["wall_strain"][distensible] > 0)
