"""Steady solver against closed forms (Hagen-Poiseuille, series, parallel, taper).

References: Hagen-Poiseuille R = 8 mu L/(pi r^4) (textbook, REFERENCES 1.1, the
check values there are [C] from the formula); the taper closed form of
REFERENCES 1.2 checked independently here by scipy.integrate.quad.
"""

import numpy as np
import pytest
from scipy import integrate

from vesselnet.model import Network
from vesselnet.resistance import (poiseuille_resistance, reynolds_number, tapered_resistance,
                                  wall_shear_stress)
from vesselnet.solve import solve
from vesselnet.testing import assert_invariants

MMHG = 133.322387415
MU = 3.5e-3


@pytest.mark.parametrize(("mu", "length", "radius", "expected"), [
    (3.5e-3, 0.1, 2e-3, 5.5704e7), (1.0e-3, 1.0, 1e-3, 2.5465e9),
    (3.5e-3, 0.2, 3e-3, 2.2007e7), (1.2e-3, 1e-3, 5e-6, 4.8892e15)])
def test_poiseuille_check_values(mu, length, radius, expected):
    """REFERENCES 1.1 check values ([C] from R = 8 mu L / (pi r^4))."""
    assert poiseuille_resistance(length, radius, mu) == pytest.approx(expected, rel=1e-4)


def test_poiseuille_in_clinical_units():
    """0.2 m of 3 mm radius at 3.5 cP is 0.16507 mmHg*s/mL (REFERENCES 1.1)."""
    assert poiseuille_resistance(0.2, 3e-3, MU) / (MMHG / 1e-6) == pytest.approx(0.16507, rel=1e-4)


@pytest.mark.parametrize(("length", "r0", "r1"), [(0.1, 3e-3, 2e-3), (0.3, 5e-3, 3e-3),
                                                   (0.05, 1e-4, 2e-4)])
def test_taper_against_quadrature(length, r0, r1):
    """Closed-form taper equals the integral of 8 mu / (pi r(x)^4) (scipy.integrate.quad)."""
    numeric, _ = integrate.quad(lambda x: 8 * MU / (np.pi * (r0 + (r1 - r0) * x / length) ** 4),
                                0, length, epsabs=0, epsrel=1e-12)
    assert tapered_resistance(length, r0, r1, MU) == pytest.approx(numeric, rel=1e-10)


def test_taper_check_values_and_mean_radius_trap():
    """REFERENCES 1.2: 2.6133e7; Poiseuille at the mean radius is 12.7 % low."""
    r = tapered_resistance(0.1, 3e-3, 2e-3, MU)
    assert r == pytest.approx(2.6133e7, rel=1e-4)
    assert poiseuille_resistance(0.1, 2.5e-3, MU) / r == pytest.approx(1 - 0.127, abs=0.002)


@pytest.mark.parametrize(("q", "r", "wss", "re"), [(5e-6, 3e-3, 0.8252, 321.3),
                                                   (100e-6 / 60, 2e-3, 0.9284, 160.7),
                                                   (5e-3 / 60, 12.5e-3, 0.1901, 1285.4)])
def test_shear_and_reynolds_check_values(q, r, wss, re):
    """REFERENCES 1.3 and 1.4 ([C] from 4 mu Q/(pi r^3) and 4 rho Q/(pi D mu))."""
    assert wall_shear_stress(q, r, MU) == pytest.approx(wss, rel=1e-3)
    assert reynolds_number(q, r, MU, 1060.0) == pytest.approx(re, rel=1e-3)


def _two_fixed(vessels):
    return Network.build(nodes={"in": {"pressure_pa": 100 * MMHG}, "out": {"pressure_pa": 10 * MMHG}},
                         vessels=vessels)


def test_single_vessel_flow_is_dp_over_r():
    """Q = dP / R for one vessel between two fixed pressures (Hagen-Poiseuille)."""
    net = Network.build(nodes={"in": {"pressure_pa": 100 * MMHG}},
                        vessels=[{"id": "a", "from": "in", "to": "t", "length_m": 0.2, "radius_m": 3e-3}],
                        beds=[{"id": "bed", "node": "t", "resistance_pa_s_m3": 1e8,
                               "outflow_pressure_pa": 10 * MMHG}])
    result = solve(net)
    expected = 90 * MMHG / (poiseuille_resistance(0.2, 3e-3, MU) + 1e8)
    assert result.vessel_flow_m3_s[0] == pytest.approx(expected, rel=1e-12)
    assert result.bed_flow_m3_s[0] == pytest.approx(expected, rel=1e-12)
    assert_invariants(result)


def test_series_resistances_add():
    """Three vessels in series carry dP / (R1 + R2 + R3) (Kirchhoff, common practice)."""
    radii = [3e-3, 2e-3, 1.5e-3]
    vessels = [{"id": f"v{i}", "from": ["in", "n1", "n2"][i], "to": ["n1", "n2", "out"][i],
                "length_m": 0.1, "radius_m": r} for i, r in enumerate(radii)]
    result = solve(_two_fixed(vessels))
    total = sum(poiseuille_resistance(0.1, r, MU) for r in radii)
    np.testing.assert_allclose(result.vessel_flow_m3_s, 90 * MMHG / total, rtol=1e-12)
    assert_invariants(result)


def test_parallel_flow_divides_by_conductance():
    """Parallel vessels between the same nodes split flow by r^4 (Hagen-Poiseuille)."""
    radii = np.array([1e-3, 2e-3, 3e-3])
    vessels = [{"id": f"p{i}", "from": "a", "to": "b", "length_m": 0.1, "radius_m": r}
               for i, r in enumerate(radii)]
    vessels += [{"id": "feed", "from": "in", "to": "a", "length_m": 0.1, "radius_m": 4e-3},
                {"id": "drain", "from": "b", "to": "out", "length_m": 0.1, "radius_m": 4e-3}]
    result = solve(_two_fixed(vessels))
    flows = result.vessel_flow_m3_s[:3]
    np.testing.assert_allclose(flows / flows.sum(), radii**4 / (radii**4).sum(), rtol=1e-12)
    assert_invariants(result)


def test_symmetric_bifurcation_splits_evenly():
    """A Murray-law symmetric bifurcation (r_d = 2^(-1/3) r_p, Murray 1926) splits flow in half
    and gives the same Poiseuille wall shear stress in parent and daughters."""
    rp = 2e-3
    rd = rp * 2 ** (-1 / 3)
    net = Network.build(nodes={"in": {"pressure_pa": 100 * MMHG}},
                        vessels=[{"id": "p", "from": "in", "to": "j", "length_m": 0.1, "radius_m": rp},
                                 {"id": "d1", "from": "j", "to": "t1", "length_m": 0.1, "radius_m": rd},
                                 {"id": "d2", "from": "j", "to": "t2", "length_m": 0.1, "radius_m": rd}],
                        beds=[{"id": "b1", "node": "t1", "resistance_pa_s_m3": 2e8},
                              {"id": "b2", "node": "t2", "resistance_pa_s_m3": 2e8}])
    result = solve(net)
    q = result.vessel_flow_m3_s
    assert q[1] == pytest.approx(q[0] / 2, rel=1e-12) and q[2] == pytest.approx(q[0] / 2, rel=1e-12)
    np.testing.assert_allclose(result.vessel_wss_pa, result.vessel_wss_pa[0], rtol=1e-12)
    np.testing.assert_allclose(result.bed_share, 0.5, rtol=1e-12)
    assert_invariants(result)


def test_prescribed_inflow_reaches_beds():
    """With a prescribed inflow, the beds' flows add up to it (mass conservation)."""
    net = Network.build(nodes={"heart": {"inflow_m3_s": 5e-3 / 60}},
                        vessels=[{"id": "ao", "from": "heart", "to": "j", "length_m": 0.3, "radius_m": 0.012},
                                 {"id": "a", "from": "j", "to": "t1", "length_m": 0.1, "radius_m": 3e-3},
                                 {"id": "b", "from": "j", "to": "t2", "length_m": 0.1, "radius_m": 2e-3}],
                        beds=[{"id": "x", "node": "t1", "resistance_pa_s_m3": 2e8},
                              {"id": "y", "node": "t2", "resistance_pa_s_m3": 3e8}])
    result = solve(net)
    assert result.bed_flow_m3_s.sum() == pytest.approx(5e-3 / 60, rel=1e-12)
    assert result.inflow_m3_s == pytest.approx(5e-3 / 60, rel=1e-12)
    assert_invariants(result)
