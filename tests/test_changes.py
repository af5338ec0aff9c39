"""Change verbs (SPEC section 3) against closed forms, and their errors.

References: Hagen-Poiseuille R = 8 mu L/(pi r^4) (textbook; REFERENCES 1.1, whose
vasoconstriction check values are [C] from that formula); the linear-taper closed
form checked here against scipy.integrate.quad; series and parallel resistances
(Kirchhoff, common practice, no source).
"""

import numpy as np
import pytest
from scipy import integrate

from vesselnet import changes
from vesselnet.changefile import Change, apply_changes
from vesselnet.changes import Join
from vesselnet.errors import NetworkSpecError
from vesselnet.model import Network
from vesselnet.resistance import poiseuille_resistance, tapered_resistance
from vesselnet.solve import solve
from vesselnet.testing import assert_invariants

MMHG = 133.322387415
MU = 3.5e-3
R_BED = 20 * MMHG / 1e-6     # 20 mmHg*s/mL


def one_vessel(**vessel):
    return Network.build(nodes={"in": {"pressure_pa": 100 * MMHG}, "out": {"pressure_pa": 10 * MMHG}},
                         vessels=[{"id": "a", "from": "in", "to": "out", "length_m": 0.2, "radius_m": 3e-3,
                                   "tags": ["leg"], **vessel}])


def two_paths():
    """A root feeding node j through vessels p and q in parallel; a bed at j."""
    return Network.build(nodes={"root": {"pressure_pa": 100 * MMHG}},
                         vessels=[{"id": "p", "from": "root", "to": "j", "length_m": 0.1, "radius_m": 2e-3},
                                  {"id": "q", "from": "root", "to": "j", "length_m": 0.15, "radius_m": 1.5e-3,
                                   "tags": ["side"]},
                                  {"id": "dead", "from": "j", "to": "tip", "length_m": 0.05, "radius_m": 1e-3}],
                         beds=[{"id": "organ", "node": "j", "resistance_pa_s_m3": R_BED,
                                "outflow_pressure_pa": 0.0}])


@pytest.mark.parametrize("factor", [0.5, 0.8, 1.25, 2.0])
def test_scaling_a_radius_scales_resistance_by_f_to_the_minus_4(factor):
    """Hagen-Poiseuille: R(f r) = f^-4 R(r); at fixed dP the flow scales by f^4."""
    base, scaled = solve(one_vessel()), solve(changes.scale_radius(one_vessel(), vessel="a", factor=factor))
    ratio = scaled.vessel_resistance_pa_s_m3[0] / base.vessel_resistance_pa_s_m3[0]
    assert ratio == pytest.approx(factor**-4, rel=1e-12)
    assert scaled.vessel_flow_m3_s[0] / base.vessel_flow_m3_s[0] == pytest.approx(factor**4, rel=1e-12)


def test_constriction_check_values():
    """REFERENCES 1.1 [C]: r x 0.8 gives R x 2.4414 and Q x 0.4096 at fixed dP."""
    base = solve(one_vessel())
    cold = solve(changes.scale_radius(one_vessel(), tag="leg", factor=0.8))
    assert cold.vessel_resistance_pa_s_m3[0] / base.vessel_resistance_pa_s_m3[0] == pytest.approx(2.4414, rel=1e-4)
    assert cold.vessel_flow_m3_s[0] / base.vessel_flow_m3_s[0] == pytest.approx(0.4096, rel=1e-4)


def test_scaling_a_tapered_vessel_and_its_lesion():
    """Both taper ends scale (taper closed form, REFERENCES 1.2), and so does the lesion throat:
    the lesion-free resistance scales by f^-4 exactly."""
    net = one_vessel(radius_in_m=3e-3, radius_out_m=2e-3, radius_m=None)
    scaled = changes.scale_radius(net, vessels=["a"], factor=0.9)
    assert scaled.vessels.radius_out_m[0] == pytest.approx(1.8e-3)
    r0 = tapered_resistance(0.2, 3e-3, 2e-3, MU)
    r1 = tapered_resistance(0.2, scaled.vessels.radius_in_m[0], scaled.vessels.radius_out_m[0], MU)
    assert r1 / r0 == pytest.approx(0.9**-4, rel=1e-12)


def test_changes_never_touch_the_base_network():
    """Every verb returns a new network; the base's columns are unchanged (and read-only)."""
    base = two_paths()
    before = {k: np.array(getattr(base.vessels, k), copy=True) for k in ("radius_in_m", "occluded", "stenosis_reduction")}
    changed = [changes.narrow(base, vessel="p", reduction=0.5, length_m=0.01),
               changes.occlude(base, vessel="q"), changes.scale_radius(base, tag="side", factor=0.5),
               changes.scale_bed(base, bed="organ", factor=3), changes.remove_vessel(base, vessel="dead"),
               changes.set_boundary(base, node="root", pressure_pa=50 * MMHG),
               changes.add_vessel(base, {"id": "g", "from": Join("p", 0.5), "to": "j",
                                         "length_m": 0.05, "radius_m": 1e-3})]
    for net in changed:
        assert net is not base
    for k, values in before.items():
        np.testing.assert_array_equal(getattr(base.vessels, k), values)
        assert not getattr(base.vessels, k).flags.writeable
    assert base.vessels.ids == ("p", "q", "dead") and base.nodes.pressure_pa[0] == 100 * MMHG


def test_occlusion_gives_zero_flow_and_the_rest_rebalances():
    """With q closed, all flow goes through p: Q = P / (R_p + R_bed) (series, Poiseuille)."""
    result = solve(changes.occlude(two_paths(), vessel="q"))
    assert result.vessel_flow_m3_s[1] == 0.0
    expected = 100 * MMHG / (poiseuille_resistance(0.1, 2e-3, MU) + R_BED)
    assert result.vessel_flow_m3_s[0] == pytest.approx(expected, rel=1e-12)
    assert result.bed_flow_m3_s[0] == pytest.approx(expected, rel=1e-12)
    assert_invariants(result)


def test_occlusion_that_cuts_a_part_off_is_reported_not_a_crash():
    """Closing the only vessel to a dead end leaves that part without a pressure reference:
    its pressure is undetermined (NaN), its flows zero, and a warning names it."""
    result = solve(changes.occlude(two_paths(), vessel="dead"))
    tip = result.network.nodes.index["tip"]
    assert np.isnan(result.pressure_pa[tip])
    assert any("cut off" in w and "'tip'" in w for w in result.warnings)
    assert_invariants(result)


def test_remove_equals_occlude_for_the_rest_of_the_network():
    """Taking a vessel out or closing it gives the same pressures and bed flows."""
    removed, closed = solve(changes.remove_vessel(two_paths(), vessel="q")), solve(changes.occlude(two_paths(), vessel="q"))
    np.testing.assert_allclose(removed.pressure_pa, closed.pressure_pa, rtol=1e-13, equal_nan=True)
    np.testing.assert_allclose(removed.bed_flow_m3_s, closed.bed_flow_m3_s, rtol=1e-13)
    assert removed.network.vessels.ids == ("p", "dead")


def test_scale_bed_and_set_boundary():
    """Bed flow = P / (R_path + f R_bed); a new inlet pressure scales every flow linearly."""
    r_path = 1 / (1 / poiseuille_resistance(0.1, 2e-3, MU) + 1 / poiseuille_resistance(0.15, 1.5e-3, MU))
    bed = solve(changes.scale_bed(two_paths(), bed="organ", factor=0.25))
    assert bed.bed_flow_m3_s[0] == pytest.approx(100 * MMHG / (r_path + 0.25 * R_BED), rel=1e-12)
    low = solve(changes.set_boundary(two_paths(), node="root", pressure_pa=60 * MMHG))
    assert low.bed_flow_m3_s[0] == pytest.approx(0.6 * solve(two_paths()).bed_flow_m3_s[0], rel=1e-12)


def test_set_boundary_inflow_replaces_the_pressure():
    """A prescribed inflow reaches the bed whole (mass conservation); the pressure is then free."""
    net = changes.set_boundary(two_paths(), node="root", inflow_m3_s=2e-6)
    result = solve(net)
    assert np.isnan(net.nodes.pressure_pa[0]) and result.bed_flow_m3_s[0] == pytest.approx(2e-6, rel=1e-12)


def test_split_vessel_keeps_length_taper_and_resistance():
    """Pieces add up to the vessel's length; radii follow the taper; the pieces' resistances add
    up to the integral of 8 mu / (pi r(x)^4) over the whole vessel (scipy.integrate.quad)."""
    net = Network.build(nodes={"in": {"pressure_pa": 100 * MMHG, "position_m": (0.0, 0.0, 0.0)},
                               "out": {"position_m": (0.0, -0.3, 0.0)}},
                        vessels=[{"id": "a", "from": "in", "to": "out", "length_m": 0.3, "radius_in_m": 4e-3,
                                  "radius_out_m": 2.5e-3}],
                        beds=[{"id": "organ", "node": "out", "resistance_pa_s_m3": R_BED}])
    split, nodes = changes.split_vessel(net, "a", [0.2, 0.7])
    v = split.vessels
    assert v.ids == ("a.1", "a.2", "a.3") and nodes == ("a@0.2", "a@0.7")
    np.testing.assert_allclose(v.length_m, [0.06, 0.15, 0.09], rtol=1e-12)
    np.testing.assert_allclose(v.radius_out_m[:2], [3.7e-3, 2.95e-3], rtol=1e-12)
    np.testing.assert_allclose(v.radius_in_m[1:], v.radius_out_m[:2], rtol=0)
    total = tapered_resistance(v.length_m, v.radius_in_m, v.radius_out_m, MU).sum()
    integral, _ = integrate.quad(lambda x: 8 * MU / (np.pi * (4e-3 - 1.5e-3 * x / 0.3) ** 4), 0, 0.3,
                                 epsabs=0, epsrel=1e-12)
    assert total == pytest.approx(integral, rel=1e-10)
    np.testing.assert_allclose(split.nodes.position_m[split.nodes.index["a@0.2"]], [0, -0.06, 0], atol=1e-15)


def test_graft_joining_part_way_is_parallel_to_the_bypassed_stretch():
    """A graft from 25 % to 75 % along a vessel runs in parallel with its middle half:
    Q = P / (R/4 + (R/2 || R_g) + R/4 + R_bed) (series and parallel, Poiseuille)."""
    net = Network.build(nodes={"in": {"pressure_pa": 100 * MMHG}},
                        vessels=[{"id": "a", "from": "in", "to": "out", "length_m": 0.4, "radius_m": 2e-3}],
                        beds=[{"id": "organ", "node": "out", "resistance_pa_s_m3": R_BED, "outflow_pressure_pa": 0.0}])
    grafted = changes.add_vessel(net, {"id": "g", "from": Join("a", 0.25), "to": Join("a", 0.75),
                                       "length_m": 0.3, "radius_m": 1.5e-3, "tags": ["graft"]})
    result = solve(grafted)
    r = poiseuille_resistance(0.4, 2e-3, MU)
    r_g = poiseuille_resistance(0.3, 1.5e-3, MU)
    expected = 100 * MMHG / (r / 2 + 1 / (2 / r + 1 / r_g) + R_BED)
    assert result.bed_flow_m3_s[0] == pytest.approx(expected, rel=1e-12)
    assert grafted.vessels.ids == ("a.1", "a.2", "a.3", "g")
    assert grafted.vessels.tags["graft"].tolist() == [3]
    assert_invariants(result)


def test_join_at_an_end_uses_the_end_node():
    """at = 0 or 1 is the vessel's own end node: nothing is split."""
    grafted = changes.add_vessel(two_paths(), {"id": "g", "from": Join("p", 0.0), "to": Join("dead", 1.0),
                                               "length_m": 0.1, "radius_m": 1e-3})
    assert grafted.vessels.ids == ("p", "q", "dead", "g")
    assert [grafted.nodes.ids[i] for i in (grafted.vessels.from_node[3], grafted.vessels.to_node[3])] == ["root", "tip"]


def test_split_moves_the_lesion_to_its_piece():
    """A lesion at 0.8 of a vessel split at 0.5 sits at 0.6 of the second piece, same physics."""
    net = changes.narrow(one_vessel(), vessel="a", reduction=0.7, length_m=0.02, at=0.8)
    split, _ = changes.split_vessel(net, "a", [0.5])
    v = split.vessels
    assert np.isnan(v.stenosis_reduction[0]) and v.stenosis_reduction[1] == 0.7
    assert v.stenosis_at[1] == pytest.approx(0.6, rel=1e-12)
    assert solve(split).vessel_flow_m3_s[1] == pytest.approx(solve(net).vessel_flow_m3_s[0], rel=1e-12)


BAD = {
    "unknown vessel": (lambda n: changes.occlude(n, vessel="pp"), r"unknown vessel 'pp'; did you mean 'p'"),
    "unknown tag": (lambda n: changes.scale_radius(n, tag="sied", factor=0.9), r"tag 'sied'; did you mean 'side'"),
    "unknown bed": (lambda n: changes.scale_bed(n, bed="orgna", factor=2), r"unknown bed 'orgna'; did you mean 'organ'"),
    "unknown node": (lambda n: changes.set_boundary(n, node="rot", pressure_pa=1.0), r"unknown node 'rot'; did you mean 'root'"),
    "two targets": (lambda n: changes.occlude(n, vessel="p", tag="side"), r"exactly one of 'vessel', 'vessels' and 'tag'"),
    "no target": (lambda n: changes.occlude(n), r"missing the vessels to change"),
    "full reduction": (lambda n: changes.narrow(n, vessel="p", reduction=1.0, length_m=0.01), r"below 1, got 1"),
    "lesion too long": (lambda n: changes.narrow(n, vessel="p", reduction=0.5, length_m=0.5), r"longer than vessel 'p'"),
    "negative factor": (lambda n: changes.scale_radius(n, vessel="p", factor=-1.0), r"factor must be a number > 0"),
    "duplicate graft id": (lambda n: changes.add_vessel(n, {"id": "q", "from": "root", "to": "j", "length_m": 0.1,
                                                            "radius_m": 1e-3}), r"a vessel 'q' already exists"),
    "graft self loop": (lambda n: changes.add_vessel(n, {"id": "g", "from": "j", "to": Join("p", 1.0), "length_m": 0.1,
                                                         "radius_m": 1e-3}), r"starts and ends at node 'j'"),
    "graft unknown node": (lambda n: changes.add_vessel(n, {"id": "g", "from": "roto", "to": "j", "length_m": 0.1,
                                                            "radius_m": 1e-3}), r"unknown node 'roto'; did you mean 'root'"),
    "join inside a lesion": (lambda n: changes.add_vessel(changes.narrow(n, vessel="p", reduction=0.5, length_m=0.04),
                                                          {"id": "g", "from": Join("p", 0.5), "to": "j",
                                                           "length_m": 0.1, "radius_m": 1e-3}), r"inside its lesion"),
    "split vessel named": (lambda n: changes.occlude(changes.split_vessel(n, "p", [0.5])[0], vessel="p"),
                           r"'p' was split by an earlier add_vessel; refer to its pieces 'p.1', 'p.2'"),
    "reserve below one": (lambda n: changes.autoregulate(n, bed="organ", reserve=0.5), r"reserve must be at least 1"),
}


@pytest.mark.parametrize("case", BAD)
def test_bad_changes_raise_located_errors(case):
    """Each bad change raises NetworkSpecError naming the item, with a near-miss where one exists."""
    make, message = BAD[case]
    with pytest.raises(NetworkSpecError, match=message):
        make(two_paths())


def test_changes_that_leave_no_pressure_reference_are_refused():
    """Turning the last fixed pressure of a bed-less network into an inflow leaves every
    pressure undetermined (SPEC section 2: at least one fixed pressure); the change is refused."""
    net = one_vessel()
    steps = [Change("set_boundary", {"node": "in", "inflow_m3_s": 1e-6}, "s.yaml", 7, 9, "changes[0]"),
             Change("set_boundary", {"node": "out", "inflow_m3_s": -1e-6}, "s.yaml", 8, 9, "changes[1]")]
    with pytest.raises(NetworkSpecError, match=r"s.yaml:8:9 changes\[1\]: after these changes no node has a "
                                               r"fixed pressure"):
        apply_changes(net, steps)
    assert solve(apply_changes(net, steps[:1])).vessel_flow_m3_s[0] == pytest.approx(1e-6, rel=1e-12)


def test_an_inflow_cut_off_by_occlusion_is_reported():
    """A prescribed inflow behind closed vessels has nowhere to go: the solve leaves it out and
    says so (no exception, no NaN flows elsewhere)."""
    net = changes.occlude(changes.set_boundary(two_paths(), node="root", inflow_m3_s=1e-6), vessels=["p", "q"])
    result = solve(net)
    assert any("'root'" in w and "nowhere to go" in w for w in result.warnings)
    assert np.all(np.isfinite(result.vessel_flow_m3_s)) and result.bed_flow_m3_s[0] == 0.0
