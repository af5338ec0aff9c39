"""A lesion inside a solved network against the Young-Tsai formula.

Sources: Young DF & Tsai FY (1973) J Biomech 6:395-410 (steady model
stenoses) and Young DF (1979) J Biomech Eng 101:157-175 (review), as
restated in REFERENCES 4.1:

    dP = (Kv mu / D0) U + (Kt rho / 2) (A0/As - 1)^2 |U| U,
    Kv = 32 (La/D0) (A0/As)^2,  La = 0.83 Ls + 1.64 Ds,  Kt = 1.52,  U = Q/A0.

The formula, La and Kt = 1.52 rest on memory ([M] in REFERENCES; the papers
themselves could not be read).  The check values of REFERENCES 4.1 are [C]:
computed from that formula with numpy, not by vesselnet.  The formula is
coded again below in its velocity form, independently of vesselnet's
Q-form coefficients.
"""

import numpy as np
import pytest

from vesselnet.lesions import lesion_table
from vesselnet.model import Network
from vesselnet.resistance import poiseuille_resistance
from vesselnet.solve import solve
from vesselnet.stenosis import young_tsai_coefficients
from vesselnet.testing import assert_invariants

MMHG = 133.322387415
MU, RHO = 3.5e-3, 1060.0
ML_MIN = 1e-6 / 60


def young_tsai_drop(q, d0, ds, ls, mu=MU, rho=RHO, kt=1.52):
    """Young & Tsai (1973) in their own variables (REFERENCES 4.1, [M])."""
    a0, a_s = np.pi * d0**2 / 4, np.pi * ds**2 / 4
    u = q / a0
    kv = 32 * (0.83 * ls + 1.64 * ds) / d0 * (a0 / a_s) ** 2
    return kv * mu / d0 * u + kt * rho / 2 * (a0 / a_s - 1) ** 2 * abs(u) * u


def lesion_network(flow, d0, reduction, ls, *, vessel_length=None, at=0.5, reverse=False):
    """A prescribed inflow through one vessel with a lesion into a fixed-pressure outlet."""
    inlet, outlet = ("in", "out") if not reverse else ("out", "in")
    return Network.build(
        nodes={inlet: {"inflow_m3_s": flow}, outlet: {"pressure_pa": 80 * MMHG}},
        vessels=[{"id": "v", "from": "in", "to": "out", "length_m": vessel_length or 4 * ls,
                  "radius_m": d0 / 2, "stenosis_reduction": reduction, "stenosis_length_m": ls,
                  "stenosis_at": at}])


@pytest.mark.parametrize(("q_ml_min", "d0", "ds", "ls", "total_mmhg"), [
    (100, 4e-3, 2e-3, 10e-3, 2.25), (300, 4e-3, 2e-3, 10e-3, 12.48), (100, 4e-3, 1.2e-3, 10e-3, 19.69),
    (300, 6e-3, 2.4e-3, 20e-3, 8.52), (240, 3e-3, 1.5e-3, 10e-3, 26.51)])
def test_lesion_drop_matches_reference_check_values(q_ml_min, d0, ds, ls, total_mmhg):
    """REFERENCES 4.1 table ([C] from the Young-Tsai formula, coefficients [M])."""
    net = lesion_network(q_ml_min * ML_MIN, d0, 1 - ds / d0, ls)
    result = solve(net)
    assert_invariants(result)
    drop = lesion_table(result)["pressure_drop_pa"][0] / MMHG
    assert drop == pytest.approx(total_mmhg, abs=0.006)


@pytest.mark.parametrize("reduction", [0.3, 0.5, 0.7, 0.85, 0.95])
@pytest.mark.parametrize("q_ml_min", [5.0, 60.0, 250.0, 900.0])
def test_lesion_drop_follows_the_formula_at_many_flows_and_severities(q_ml_min, reduction):
    """The drop across the lesion in the solved network is Young & Tsai's (1973) formula."""
    d0, ls = 5e-3, 15e-3
    result = solve(lesion_network(q_ml_min * ML_MIN, d0, reduction, ls, at=0.3))
    table = lesion_table(result)
    expected = young_tsai_drop(q_ml_min * ML_MIN, d0, d0 * (1 - reduction), ls)
    assert table["pressure_drop_pa"][0] == pytest.approx(expected, rel=1e-9)
    assert result.vessel_flow_m3_s[0] == pytest.approx(q_ml_min * ML_MIN, rel=1e-10)


@pytest.mark.parametrize("reduction", [0.4, 0.8])
def test_the_rest_of_the_vessel_is_poiseuille_in_series(reduction):
    """Vessel drop = Poiseuille over the healthy length + the lesion's Young-Tsai drop
    (series elements add; Hagen-Poiseuille for the healthy tube, REFERENCES 1.1)."""
    d0, ls, length, q = 4e-3, 10e-3, 0.12, 200 * ML_MIN
    result = solve(lesion_network(q, d0, reduction, ls, vessel_length=length))
    healthy = poiseuille_resistance(length - ls, d0 / 2, MU) * q
    expected = healthy + young_tsai_drop(q, d0, d0 * (1 - reduction), ls)
    assert result.vessel_pressure_drop_pa[0] == pytest.approx(expected, rel=1e-9)


def test_viscous_coefficient_is_poiseuille_at_the_throat_over_la():
    """REFERENCES 10.9: R_v is exactly the Poiseuille resistance of length La at Ds."""
    d0, ds, ls = 4e-3, 2e-3, 10e-3
    r_v, _ = young_tsai_coefficients(d0, ds, ls, MU, RHO)
    assert r_v == pytest.approx(poiseuille_resistance(0.83 * ls + 1.64 * ds, ds / 2, MU), rel=1e-12)
    assert r_v == pytest.approx(1.03209e8, rel=1e-5)  # REFERENCES 4.1 [C]


@pytest.mark.parametrize("q_ml_min", [40.0, 400.0])
def test_reversed_flow_uses_q_abs_q(q_ml_min):
    """Flow pushed the other way through the lesion: the drop has the same size and the
    opposite sign (Q|Q|, never Q^2; REFERENCES 10.5), and the pressure ratio is still taken
    in the flow direction (<= 1)."""
    forward = solve(lesion_network(q_ml_min * ML_MIN, 4e-3, 0.7, 10e-3, at=0.2))
    backward = solve(lesion_network(q_ml_min * ML_MIN, 4e-3, 0.7, 10e-3, at=0.2, reverse=True))
    assert backward.vessel_flow_m3_s[0] == pytest.approx(-forward.vessel_flow_m3_s[0], rel=1e-10)
    assert backward.vessel_pressure_drop_pa[0] == pytest.approx(-forward.vessel_pressure_drop_pa[0],
                                                                rel=1e-9)
    f, b = lesion_table(forward), lesion_table(backward)
    assert b["pressure_drop_pa"][0] == pytest.approx(f["pressure_drop_pa"][0], rel=1e-9)
    assert 0 < b["pressure_ratio"][0] < 1 and 0 < f["pressure_ratio"][0] < 1
    assert_invariants(backward)


def test_pressure_ratio_of_a_whole_vessel_lesion_is_the_end_pressure_ratio():
    """A lesion as long as its vessel: distal/proximal = p(to)/p(from) (the definition)."""
    net = Network.build(nodes={"a": {"pressure_pa": 95 * MMHG}},
                        vessels=[{"id": "cor", "from": "a", "to": "d", "length_m": 0.01, "radius_m": 1.5e-3,
                                  "stenosis_reduction": 0.6, "stenosis_length_m": 0.01}],
                        beds=[{"id": "bed", "node": "d", "resistance_pa_s_m3": 90 * MMHG / (60 * ML_MIN)}])
    result = solve(net)
    ratio = lesion_table(result)["pressure_ratio"][0]
    assert ratio == pytest.approx(result.pressure_pa[1] / result.pressure_pa[0], rel=1e-12)


@pytest.mark.parametrize("at", [0.0, 0.5, 1.0])
def test_lesion_at_the_vessel_ends_stays_inside(at):
    """A lesion centred at an end is kept inside the vessel: same drop wherever it sits
    in an untapered vessel (series elements commute)."""
    result = solve(lesion_network(150 * ML_MIN, 4e-3, 0.75, 10e-3, vessel_length=0.05, at=at))
    expected = poiseuille_resistance(0.04, 2e-3, MU) * 150 * ML_MIN + young_tsai_drop(
        150 * ML_MIN, 4e-3, 1e-3, 10e-3)
    assert result.vessel_pressure_drop_pa[0] == pytest.approx(expected, rel=1e-9)
