"""Figure data of the view layer: every vessel once, colours equal to results, units, scales.

References used here (outside the code under test):
- 1 mmHg = 133.322387415 Pa (conventional millimetre of mercury; common practice, pint agrees).
- 1 m^3/s = 6e7 mL/min (definition of the litre and the minute).
- Poiseuille wall shear stress tau = 4 mu |Q| / (pi r^3) (Poiseuille flow in a straight tube;
  Fung, Biomechanics: Circulation, 1997; REFERENCES [V]).
- Graph distances from networkx's breadth-first shortest paths.
"""

from __future__ import annotations

import dataclasses
import json
from collections import Counter

import networkx as nx
import numpy as np
import pytest
from plotly.colors import hex_to_rgb

from vesselnet.demos import DEMOS, demo_path
from vesselnet.model import Network
from vesselnet.reader import load_network
from vesselnet.solve import solve

from viz import bins, palette
from viz.layout import computed_layout, place_nodes, plane_axes, radial_tree_layout
from viz.network import SVG_LIMIT, network_figure

MMHG_PA = 133.322387415
ML_MIN_PER_M3_S = 6e7
CRAFTED = '<img src=x onerror="window.__pwned=1">'


def tree_network(levels: int, *, positions: bool = False, crafted: bool = False) -> Network:
    """A binary tree (heap numbering) with Murray radii, a root pressure and a bed per leaf."""
    n_nodes = 2 ** (levels + 1) - 1
    child = np.arange(1, n_nodes)
    parent = (child - 1) // 2
    depth = np.floor(np.log2(child + 1)).astype(int)
    radius = 3e-3 * 2.0 ** (-depth / 3.0)
    ids = [f"v{c}" for c in child]
    if crafted:
        ids[0] = CRAFTED
    vessels = {"id": ids, "from": [f"n{p}" for p in parent], "to": [f"n{c}" for c in child],
               "length_m": 0.02 * 0.8**depth, "radius_m": radius}
    leaves = np.arange(2**levels - 1, n_nodes)
    nodes = {"id": ["n0"], "pressure_pa": [100 * MMHG_PA]}
    if positions:
        rng = np.random.default_rng(20240611)
        nodes = {"id": [f"n{k}" for k in range(n_nodes)],
                 "pressure_pa": [100 * MMHG_PA] + [np.nan] * (n_nodes - 1),
                 "position_m": rng.normal(size=(n_nodes, 3)) * 0.1}
    beds = {"id": [f"bed{k}" for k in leaves], "node": [f"n{k}" for k in leaves],
            "resistance_pa_s_m3": np.full(len(leaves), 2e10)}
    if crafted:
        beds["id"][0] = "<script>window.__pwned=2</script>"
    return Network.from_columns(vessels=vessels, nodes=nodes, beds=beds, name="tree <b>test</b>")


@pytest.fixture(scope="module")
def demo_results():
    return {name: solve(load_network(demo_path(name))) for name in DEMOS}


def traces(fig, role, quantity=None):
    return [t for t in fig.data if t.meta and t.meta.get("role") == role
            and (quantity is None or t.meta.get("quantity") == quantity)]


def segment_rows(trace, dims):
    """Segments of a gapped line trace as ((start), (end)) tuples."""
    coords = [np.asarray(getattr(trace, a), dtype=float).reshape(-1, 3) for a in "xyz"[:dims]]
    return [tuple((tuple(c[k, 0] for c in coords), tuple(c[k, 1] for c in coords)))
            for k in range(coords[0].shape[0])]


def expected_segments(result, dims, dtype=float):
    place = place_nodes(result.network, dims=dims)
    v = result.network.vessels
    xyz = place.xyz.astype(dtype).astype(float)
    return [(tuple(xyz[a]), tuple(xyz[b])) for a, b in zip(v.from_node, v.to_node)]


@pytest.mark.parametrize("name", DEMOS)
@pytest.mark.parametrize("dims", [2, 3])
def test_every_vessel_drawn_once(demo_results, name, dims):
    """Each vessel is one segment of exactly one line trace per quantity, and one hover point."""
    result = demo_results[name]
    fig = network_figure(result, color=["pressure", "flow"], dims=dims)
    for q in ("pressure", "flow"):
        drawn = [s for t in traces(fig, "vessels", q) for s in segment_rows(t, dims)]
        assert Counter(drawn) == Counter(expected_segments(result, dims))
        (points,) = traces(fig, "vessel-points", q)
        assert len(points.customdata) == len(result.network.vessels)
    assert len(fig.data) < 5 * len(bins.colour_scale(np.zeros(1)).colours) * 2 + 10


def _independent(result, name):
    """Per-vessel values computed here from the result's primary arrays and outside formulas."""
    v = result.network.vessels
    p = result.pressure_pa
    # shear is reported at the lumen radius: distended where wall mechanics ran, else the mean end radius
    r = result.vessel_extra.get("lumen_radius_m", 0.5 * (v.radius_in_m + v.radius_out_m))
    q = result.vessel_flow_m3_s
    return {"pressure": 0.5 * (p[v.from_node] + p[v.to_node]) / MMHG_PA,
            "flow": np.abs(q) * ML_MIN_PER_M3_S,
            "wss": 4 * result.vessel_viscosity_pa_s * np.abs(q) / (np.pi * r**3),
            "pressure_drop": (p[v.from_node] - p[v.to_node]) / MMHG_PA}[name]


@pytest.mark.parametrize("name", DEMOS)
@pytest.mark.parametrize("quantity", ["pressure", "flow", "wss", "pressure_drop"])
def test_colour_values_equal_result_values(demo_results, name, quantity):
    """Hover values equal the result; every vessel's line colour is the class holding its value."""
    result = demo_results[name]
    fig = network_figure(result, color=quantity)
    expected = _independent(result, quantity)
    (points,) = traces(fig, "vessel-points", quantity)
    np.testing.assert_allclose(np.asarray(points.customdata, dtype=float)[:, 0], expected, rtol=1e-12)
    colour_axis = np.asarray(points.marker.color, dtype=float)
    if points.meta["log"]:  # colour axis is log10 of the value; zero flow sits at the lowest value
        lowest = expected[expected > 0].min()
        target = np.log10(np.where(expected > 0, expected, lowest))
    else:
        target = expected
    np.testing.assert_allclose(colour_axis, target, rtol=1e-12, atol=1e-12)
    where = dict(zip(expected_segments(result, 2), expected))
    scale_colours = [c for _, c in points.marker.colorscale][::2]
    for t in traces(fig, "vessels", quantity):
        lo, hi = t.meta["range"]
        assert t.line.color in scale_colours
        for seg in segment_rows(t, 2):
            value = where[seg]
            if points.meta["log"] and value < lo:
                assert lo == pytest.approx(10**points.marker.cmin)  # zero flow: lowest class
                continue
            assert lo * (1 - 1e-9) - 1e-12 <= value <= hi * (1 + 1e-9) + 1e-12


def _all_titles(fig):
    layout = fig.layout
    out = []
    for axis in (layout.xaxis, layout.yaxis):
        if axis.visible is not False and axis.title.text:
            out.append(axis.title.text)
    for axis in (layout.scene.xaxis, layout.scene.yaxis, layout.scene.zaxis):
        if axis.visible is not False and axis.title.text:
            out.append(axis.title.text)
    for t in fig.data:
        marker = getattr(t, "marker", None)
        if marker is not None and getattr(marker, "showscale", None):
            out.append(marker.colorbar.title.text)
    return out


@pytest.mark.parametrize("dims", [2, 3])
@pytest.mark.parametrize("quantity", ["pressure", "flow", "wss", "velocity", "radius", "reynolds"])
def test_units_in_every_label(demo_results, dims, quantity):
    """Every axis title and colour-bar title names its unit in brackets (common practice)."""
    fig = network_figure(demo_results["leg"], color=quantity, dims=dims)
    titles = _all_titles(fig)
    assert len(titles) == dims + 1
    assert all("[" in t and t.endswith("]") for t in titles), titles


def _occluded(result, vessel_id):
    net = result.network
    occluded = np.array(net.vessels.occluded)
    occluded[net.vessels.index[vessel_id]] = True
    return solve(dataclasses.replace(net, vessels=dataclasses.replace(net.vessels, occluded=occluded)))


def test_change_view_is_centred_on_zero(demo_results):
    """Changes use the diverging scale symmetric about zero; unchanged vessels get its neutral middle."""
    base = demo_results["collateral"]
    scenario = _occluded(base, "left_feeder_proximal")
    fig = network_figure(scenario, color="flow", baseline=base)
    (points,) = traces(fig, "vessel-points", "flow")
    assert points.marker.cmid == 0.0
    assert points.marker.cmin == pytest.approx(-points.marker.cmax)
    change = np.abs(scenario.vessel_flow_m3_s) - np.abs(base.vessel_flow_m3_s)
    np.testing.assert_allclose(np.asarray(points.customdata, dtype=float)[:, 0],
                               change * ML_MIN_PER_M3_S, rtol=1e-9, atol=1e-9)
    assert max(abs(points.marker.cmin), points.marker.cmax) == pytest.approx(
        np.abs(change).max() * ML_MIN_PER_M3_S)
    middle = bins.DIVERGING_CLASSES // 2
    colours = [c for _, c in points.marker.colorscale][::2]
    assert colours[middle] == bins.colour_scale(np.array([-1.0, 1.0]), diverging=True).colours[middle]
    assert (traces(fig, "changed")[0].meta["count"], len(traces(fig, "reversed"))) == (1, 1)
    title = points.marker.colorbar.title.text
    assert title.startswith("change in flow [") and title.endswith("]")


def test_change_view_matches_vessels_by_id(demo_results):
    """A vessel only in the scenario is marked added (no change value); one only in the baseline, removed."""
    base = demo_results["collateral"]
    net = base.network
    v = net.vessels
    keep = [i for i in range(len(v)) if v.ids[i] != "left_side_branch"]
    cols = {"id": [v.ids[i] for i in keep] + ["graft <i>1</i>"],
            "from": [net.nodes.ids[v.from_node[i]] for i in keep] + [net.nodes.ids[v.from_node[0]]],
            "to": [net.nodes.ids[v.to_node[i]] for i in keep] + [net.nodes.ids[v.to_node[-1]]],
            "length_m": list(v.length_m[keep]) + [0.1], "radius_m": list(v.radius_in_m[keep]) + [2e-3]}
    beds = net.beds
    changed = Network.from_columns(
        vessels=cols, nodes={"id": list(net.nodes.ids), "pressure_pa": net.nodes.pressure_pa,
                             "position_m": net.nodes.position_m},
        beds={"id": list(beds.ids), "node": [net.nodes.ids[k] for k in beds.node],
              "resistance_pa_s_m3": beds.resistance_pa_s_m3}, name=net.name)
    scenario = solve(changed)
    fig = network_figure(scenario, color="pressure", baseline=base)
    (points,) = traces(fig, "vessel-points", "pressure")
    values = np.asarray(points.customdata, dtype=float)[:, 0]
    assert np.isnan(values[-1]) and np.isfinite(values[:-1]).all()
    assert traces(fig, "added")[0].meta["count"] == 1
    assert traces(fig, "removed")[0].meta["count"] == 1
    assert "graft &lt;i&gt;1&lt;/i&gt;" in points.text[-1]


def test_crafted_ids_are_escaped():
    """Ids with markup reach plotly only escaped (plotly shows entities as text)."""
    result = solve(tree_network(3, crafted=True))
    fig = network_figure(result, color="flow")
    text = json.dumps(fig.to_plotly_json(), default=str)
    assert CRAFTED not in text and "<script>" not in text and "<b>test</b>" not in text
    (points,) = traces(fig, "vessel-points", "flow")
    assert "&lt;img src=x onerror=&#34;window.__pwned=1&#34;&gt;" in points.text[0]
    assert "&lt;b&gt;test&lt;/b&gt;" in fig.layout.title.text


def test_large_network_uses_few_webgl_traces():
    """A 2^15-vessel tree without positions: computed layout, WebGL lines, traces per class only."""
    result = solve(tree_network(14))
    n = len(result.network.vessels)
    assert n > SVG_LIMIT
    fig = network_figure(result, color="flow")
    lines = traces(fig, "vessels")
    assert sum(t.meta["count"] for t in lines) == n
    assert len(lines) <= bins.SEQUENTIAL_CLASSES * 5
    assert all(t.type == "scattergl" for t in lines)
    assert fig.layout.xaxis.visible is False
    xyz = np.concatenate([np.asarray(t.x, dtype=float) for t in lines])
    assert np.isfinite(xyz).sum() == 2 * n


def test_plane_axes_keep_the_file_plane():
    """x-y is kept unless x or y is flat; y stays the second (vertical) axis."""
    assert plane_axes(np.array([13.0, 101.0, 15.5])) == [0, 1]
    assert plane_axes(np.array([40.0, 0.0, 30.0])) == [0, 2]
    assert plane_axes(np.array([0.0, 40.0, 30.0])) == [1, 2]


def test_missing_positions_are_filled_between_neighbours():
    """A node without a position between two with positions lands at their midpoint
    (the discrete harmonic function on a path is linear); a dangling one steps out by its length."""
    net = Network.build(
        nodes={"a": {"position_m": (0.0, 0.0, 0.0), "pressure_pa": 1e4},
               "c": {"position_m": (0.4, 0.2, 0.0)}},
        vessels=[{"id": "u", "from": "a", "to": "b", "length_m": 0.1, "radius_m": 1e-3},
                 {"id": "w", "from": "b", "to": "c", "length_m": 0.1, "radius_m": 1e-3},
                 {"id": "z", "from": "c", "to": "d", "length_m": 0.05, "radius_m": 1e-3}])
    place = place_nodes(net, dims=3)
    xyz = dict(zip(place.ids, place.xyz))
    np.testing.assert_allclose(xyz["b"], [20.0, 10.0, 0.0], atol=1e-6)
    assert np.linalg.norm(xyz["d"] - xyz["c"]) == pytest.approx(5.0, rel=1e-6)
    assert not place.computed


def test_radial_tree_layout_rings_are_graph_depths():
    """Each node sits on the ring of its breadth-first depth from the root (networkx distances)."""
    net = tree_network(6)
    xy = radial_tree_layout(net)
    depth = nx.single_source_shortest_path_length(net.to_networkx().to_undirected(), "n0")
    radius = np.hypot(xy[:, 0], xy[:, 1])
    expected = np.array([depth[n] for n in net.nodes.ids], dtype=float)
    np.testing.assert_allclose(radius, expected, atol=1e-9)
    assert len({tuple(p) for p in np.round(xy, 9)}) == len(net.nodes)


def test_small_computed_layout_is_finite_and_distinct():
    """Without positions a small network gets distinct finite coordinates (Kamada-Kawai, networkx)."""
    xyz = computed_layout(tree_network(3), dims=3)
    assert xyz.shape == (15, 3) and np.isfinite(xyz).all()
    assert len({tuple(p) for p in np.round(xyz, 6)}) == 15


def test_partial_colour_classes():
    """Class edges split the range evenly; NaN has no class; a flat range still gets one class."""
    scale = bins.colour_scale(np.array([1.0, 2.0, 3.0, np.nan]))
    assert scale.classes(np.array([1.0, 3.0, np.nan])).tolist() == [0, scale.count - 1, -1]
    np.testing.assert_allclose(scale.edges[[0, -1]], [1.0, 3.0])
    flat = bins.colour_scale(np.array([5.0, 5.0]))
    assert flat.lo < 5.0 < flat.hi
    log = bins.colour_scale(np.array([0.01, 10.0]), log=True)
    assert log.log and log.axis == pytest.approx((-2.0, 1.0))
    neutral = "rgb({}, {}, {})".format(*hex_to_rgb(palette.DIVERGING[2][1]))
    assert bins.colour_scale(np.array([-1.0, 1.0]), diverging=True).colours[5] == neutral


def test_split_vessels_follow_their_origin():
    """With the comparison's vessel origins, the pieces of a split vessel are matched (changed,
    not added) and only the graft counts as added; nothing is removed."""
    from vesselnet.compare import compare_file

    comparison = compare_file(demo_path("collateral_steal"))
    outcome = next(o for o in comparison.scenarios if "bypass" in o.name)
    origin = outcome.vessel_origin
    assert (origin < 0).sum() >= 1 and len(origin) > len(comparison.baseline.network.vessels)
    fig = network_figure(outcome.result, color="flow", baseline=comparison.baseline, vessel_origin=origin)
    assert traces(fig, "added")[0].meta["count"] == int((origin < 0).sum())
    assert traces(fig, "removed") == []
    pieces = np.bincount(origin[origin >= 0], minlength=len(comparison.baseline.network.vessels))
    assert traces(fig, "changed")[0].meta["count"] >= int((pieces > 1).sum()) * 2
