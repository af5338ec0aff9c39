"""Tests of the pulsatile set-up helpers (vesselnet.pulsesetup); the network file they are
written to is tested in test_networkwriter.py.

Outside references: REFERENCES 5.3 [C] check table (compliance, characteristic
impedance of a thin-walled tube), REFERENCES 5.6 [M, common practice] RCR rules
and its [C] check (1.5 mL/mmHg, 10 % share -> 0.15 mL/mmHg), REFERENCES 5.4 /
8.1 typical values, and the steady solver (the set-up must not change it).
"""

import numpy as np
import pytest

from vesselnet.demos import demo_path
from vesselnet.errors import NetworkSpecError
from vesselnet.model import Network
from vesselnet.pulsesetup import (aortic_pressure_waveform, default_total_compliance, setup_windkessels,
                                  shape_constant_inflows)
from vesselnet.reader import load_network
from vesselnet.solve import solve
from vesselnet.units import MMHG_PA

ML_MMHG = 1e-6 / MMHG_PA
MMHG_S_ML = MMHG_PA / 1e-6


def femoral_network(poisson, beds=(("b", 40.0),)):
    """One vessel of the REFERENCES 5.3 table's second row (E 0.8 MPa, h 0.6 mm, r 3 mm, 0.1 m)
    into beds (id, resistance in mmHg*s/mL) on its outlet."""
    return Network.build(
        nodes={"in": {"inflow_m3_s": 5e-6}},
        vessels=[{"id": "v", "from": "in", "to": "out", "length_m": 0.1, "radius_m": 3e-3,
                  "wall_thickness_m": 0.6e-3, "wall_modulus_pa": 0.8e6, "wall_poisson": poisson}],
        beds=[{"id": b, "node": "out", "resistance_pa_s_m3": r * MMHG_S_ML} for b, r in beds])


@pytest.mark.parametrize("poisson, z0_mmhg_s_ml, c_ml_mmhg", [
    (0.0, 2.443, 3.534e-3 * 4 / 3),            # free wall: table Z0 and the 4/3 larger compliance
    (0.5, 2.443 / np.sqrt(0.75), 3.534e-3),     # tethered: c = c0/sqrt(1 - nu^2), table compliance
])
def test_terminal_impedance_and_conduit_compliance(poisson, z0_mmhg_s_ml, c_ml_mmhg):
    """REFERENCES 5.3 [C]: Z0 = rho c0 / (pi r^2) = 2.443 mmHg*s/mL, C = 3 pi r^3 L/(2 E h) =
    3.534e-3 mL/mmHg (nu = 0.5; 4/3 of it at nu = 0).  R1 = Z0, R2 = R_T - R1, C_bed =
    C_total - C_conduit for a single bed (REFERENCES 5.6)."""
    total = 0.2 * ML_MMHG
    setup = setup_windkessels(femoral_network(poisson), total_compliance_m3_pa=total)
    p = setup.parameters
    assert p.proximal_resistance_pa_s_m3[0] / MMHG_S_ML == pytest.approx(z0_mmhg_s_ml, rel=2e-4)
    assert p.proximal_resistance_pa_s_m3[0] + p.distal_resistance_pa_s_m3[0] == pytest.approx(
        40 * MMHG_S_ML, rel=1e-15)
    assert p.conduit_compliance_m3_pa / ML_MMHG == pytest.approx(c_ml_mmhg, rel=5e-4)
    assert p.compliance_m3_pa[0] == pytest.approx(total - p.conduit_compliance_m3_pa, rel=1e-12)


def two_bed_network(share):
    """Rigid vessels (no conduit compliance) to two beds taking `share` and 1 - share of the flow."""
    r_total = 1.0 * MMHG_S_ML
    return Network.build(
        nodes={"heart": {"inflow_m3_s": 1e-4}},
        vessels=[{"id": "a", "from": "heart", "to": "j", "length_m": 0.01, "radius_m": 0.02},
                 {"id": "b", "from": "j", "to": "arm", "length_m": 0.01, "radius_m": 0.02},
                 {"id": "c", "from": "j", "to": "rest", "length_m": 0.01, "radius_m": 0.02}],
        beds=[{"id": "arm", "node": "arm", "resistance_pa_s_m3": r_total / share},
              {"id": "rest", "node": "rest", "resistance_pa_s_m3": r_total / (1 - share)}])


def test_compliance_follows_the_flow_share():
    """REFERENCES 5.6 [C]: C_total 1.5 mL/mmHg and a 10 % share give 0.15 mL/mmHg (no conduit
    compliance: rigid vessels); beds fed only by rigid vessels with no walled vessel upstream get
    R1 = 0 (a two-element Windkessel)."""
    setup = setup_windkessels(two_bed_network(0.1), total_compliance_m3_pa=1.5 * ML_MMHG)
    c = setup.parameters.compliance_m3_pa / ML_MMHG
    assert c == pytest.approx([0.15, 1.35], rel=1e-4)   # shares from the steady flows
    assert setup.parameters.conduit_compliance_m3_pa == 0
    assert np.all(setup.parameters.proximal_resistance_pa_s_m3 == 0)
    assert setup.rigid_terminal == ("arm", "rest")


def test_setup_leaves_the_steady_solution_unchanged():
    """R1 + R2 = R_T (REFERENCES 10.12): the steady solve of the set-up network is the same."""
    net = load_network(demo_path("whole_body"))
    setup = setup_windkessels(net)
    a, b = solve(net), solve(setup.network)
    assert np.array_equal(a.pressure_pa, b.pressure_pa)
    assert np.array_equal(a.bed_flow_m3_s, b.bed_flow_m3_s)


def test_whole_body_bookkeeping():
    """Whole-body demo: the portal-side liver bed is left resistive (REFERENCES 10.13: it is in
    series behind the gut beds); the arterial beds' compliances plus the conduit compliance add up
    to the default total of 1.5 mL/mmHg for 5 L/min (REFERENCES 5.4 typical 1-2 mL/mmHg [M])."""
    net = load_network(demo_path("whole_body"))
    setup = setup_windkessels(net)
    p = setup.parameters
    assert setup.left_resistive == ("liver",)
    assert p.total_compliance_m3_pa / ML_MMHG == pytest.approx(1.5, rel=1e-9)
    assert p.compliance_m3_pa.sum() + p.conduit_compliance_m3_pa == pytest.approx(p.total_compliance_m3_pa,
                                                                                  rel=1e-12)
    assert 0 < p.conduit_compliance_m3_pa < p.total_compliance_m3_pa
    liver = net.beds.index["liver"]
    assert np.isnan(setup.network.beds.windkessel_compliance_m3_pa[liver])
    assert np.all(p.proximal_resistance_pa_s_m3 > 0)      # every bed has a walled vessel upstream


def test_beds_sharing_a_node_split_the_characteristic_impedance():
    """Two beds on one node: their R1 combine in parallel to the node's Z0 (so the node stays
    matched, REFERENCES 5.6 R1 = Z0), each R1 in inverse proportion to the bed's conductance."""
    net = femoral_network(0.0, beds=(("b", 40.0), ("c", 80.0)))
    r1 = setup_windkessels(net, total_compliance_m3_pa=0.2 * ML_MMHG).parameters.proximal_resistance_pa_s_m3
    assert 1 / (1 / r1).sum() / MMHG_S_ML == pytest.approx(2.443, rel=2e-4)
    assert r1[1] / r1[0] == pytest.approx(2.0, rel=1e-12)


def test_rigid_branch_takes_the_walled_parent_impedance():
    """A bed behind a lumped rigid branch gets the Z0 of the walled vessel above it."""
    net = Network.build(
        nodes={"in": {"inflow_m3_s": 5e-6}},
        vessels=[{"id": "v", "from": "in", "to": "out", "length_m": 0.1, "radius_m": 3e-3,
                  "wall_thickness_m": 0.6e-3, "wall_modulus_pa": 0.8e6, "wall_poisson": 0.0},
                 {"id": "lumped", "from": "out", "to": "tissue", "length_m": 0.05, "radius_m": 1e-3}],
        beds=[{"id": "b", "node": "tissue", "resistance_pa_s_m3": 40 * MMHG_S_ML}])
    setup = setup_windkessels(net, total_compliance_m3_pa=0.2 * ML_MMHG)
    assert setup.parameters.proximal_resistance_pa_s_m3[0] / MMHG_S_ML == pytest.approx(2.443, rel=2e-4)
    assert setup.rigid_terminal == ("b",)


def test_target_below_conduit_compliance_is_an_error():
    """C_periph = C_total - C_conduit must be positive (REFERENCES 5.6)."""
    with pytest.raises(NetworkSpecError, match="peripheral compliance"):
        setup_windkessels(femoral_network(0.5), total_compliance_m3_pa=1e-3 * ML_MMHG)


def test_default_total_compliance():
    """1.5 mL/mmHg at 5 L/min (REFERENCES 5.4 [M] 1-2 mL/mmHg; 8.1 cardiac output), in proportion."""
    assert default_total_compliance(5e-3 / 60) / ML_MMHG == pytest.approx(1.5, rel=1e-12)
    assert default_total_compliance(0.5e-3 / 60) / ML_MMHG == pytest.approx(0.15, rel=1e-12)


def test_shaped_inflow_keeps_the_mean():
    """Stroke volume x heart rate = the constant inflow it replaces (SPEC 7: the steady solve
    uses the mean); a stroke volume sets the rate; rate and volume together are refused."""
    net = two_bed_network(0.3)
    shaped = shape_constant_inflows(net, heart_rate_hz=1.25, ejection_time_s=0.28)
    w = shaped.nodes.inflow_waveforms[0]
    assert w["stroke_volume_m3"] * w["heart_rate_hz"] == pytest.approx(1e-4, rel=1e-15)
    assert np.array_equal(solve(shaped).pressure_pa, solve(net).pressure_pa)
    by_volume = shape_constant_inflows(net, stroke_volume_m3=80e-6).nodes.inflow_waveforms[0]
    assert by_volume["heart_rate_hz"] == pytest.approx(1e-4 / 80e-6, rel=1e-15)
    with pytest.raises(NetworkSpecError, match="not both"):
        shape_constant_inflows(net, heart_rate_hz=1.0, stroke_volume_m3=70e-6)
    with pytest.raises(NetworkSpecError, match="does not fit"):
        shape_constant_inflows(net, heart_rate_hz=3.0, ejection_time_s=0.4)


def test_aortic_pressure_shape():
    """Mean and pulse pressure as asked; the peak falls within ejection and pressure decays
    through late diastole (aortic pressure shape, common practice, no source)."""
    hr = 70 / 60
    p = aortic_pressure_waveform(93 * MMHG_PA, 40 * MMHG_PA, hr, ejection_time_s=0.3, n_samples=600)
    t = np.arange(600) / 600 / hr
    assert p.mean() / MMHG_PA == pytest.approx(93.0, rel=1e-12)
    assert np.ptp(p) / MMHG_PA == pytest.approx(40.0, rel=1e-12)
    assert 0.05 < t[np.argmax(p)] < 0.3
    late = (t > 0.5) & (t < 0.8)
    assert np.all(np.diff(p[late]) < 0)
