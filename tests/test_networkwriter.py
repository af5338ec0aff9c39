"""The network file writer (vesselnet.networkwriter): inline YAML, and YAML with CSV tables.

Checks and their sources:

* A writer's output reads back to what was written (common practice, no
  source), judged by the network reader (vesselnet.reader.load_network):
  ids, tags, waveforms and every column to the 15 significant digits
  written (rtol 1e-14), and the steady solve of the read-back network equal
  to the solve of the original to 1e-12 relative (pressures, vessel and bed
  flows; flows relative to the largest).
* Both forms state each quantity in the same unit with the same digits, so
  they read back to the same columns bit for bit.
* The units named in the table headers are those of the numbers below them:
  pint (the general-purpose units library) converts the cells to SI.
* What tables cannot hold is refused with a NetworkSpecError that names it,
  and then nothing is written.
"""

import dataclasses

import numpy as np
import pint
import pytest

from vesselnet import networkwriter
from vesselnet.demos import demo_names, demo_path
from vesselnet.errors import NetworkSpecError, VesselnetError
from vesselnet.model import Blood, Network
from vesselnet.networkwriter import network_yaml, write_network_yaml
from vesselnet.pulsesetup import setup_windkessels, shape_constant_inflows
from vesselnet.reader import load_network, read_network_text
from vesselnet.solve import solve
from vesselnet.units import MMHG_PA

MMHG_S_ML = MMHG_PA / 1e-6
NETWORKS = demo_names("network")


def assert_same_network(back: Network, net: Network, rtol: float = 1e-14) -> None:
    """Ids, tags, waveforms, blood and every column (but source lines) of ``back`` are ``net``'s."""
    assert back.name == net.name
    assert back.venous_pressure_pa == pytest.approx(net.venous_pressure_pa, rel=rtol)
    for f in dataclasses.fields(Blood):
        x, y = getattr(back.blood, f.name), getattr(net.blood, f.name)
        assert x == (pytest.approx(y, rel=rtol) if isinstance(y, float) else y), f.name
    for section in ("vessels", "nodes", "beds"):
        a, b = getattr(net, section), getattr(back, section)
        assert b.ids == a.ids, section
        for f in dataclasses.fields(a):
            x, y = getattr(a, f.name), getattr(b, f.name)
            if isinstance(x, np.ndarray) and f.name != "line":
                if x.dtype.kind == "f":
                    np.testing.assert_allclose(y, x, rtol=rtol, equal_nan=True, err_msg=f.name)
                else:
                    assert np.array_equal(x, y), f.name
    assert {t: r.tolist() for t, r in back.vessels.tags.items()} == \
        {t: r.tolist() for t, r in net.vessels.tags.items()}
    waves, back_waves = net.nodes.inflow_waveforms, back.nodes.inflow_waveforms
    assert back_waves.keys() == waves.keys()
    for row, wave in waves.items():
        assert {k: v for k, v in back_waves[row].items() if k != "csv"} == \
            {k: pytest.approx(v, rel=rtol) for k, v in wave.items() if k != "csv"}


def assert_same_solution(back: Network, net: Network, rtol: float = 1e-12) -> None:
    """The steady solves of the two networks agree to ``rtol`` (flows relative to the largest)."""
    a, b = solve(net), solve(back)
    np.testing.assert_allclose(b.pressure_pa, a.pressure_pa, rtol=rtol)
    for name in ("vessel_flow_m3_s", "bed_flow_m3_s"):
        x, y = getattr(a, name), getattr(b, name)
        np.testing.assert_allclose(y, x, rtol=rtol, atol=rtol * np.abs(x).max(initial=0), err_msg=name)


def assert_same_columns(a: Network, b: Network) -> None:
    """Every column of the two networks equal bit for bit (NaN equal to NaN)."""
    for section in ("vessels", "nodes", "beds"):
        for f in dataclasses.fields(getattr(a, section)):
            x, y = getattr(getattr(a, section), f.name), getattr(getattr(b, section), f.name)
            if isinstance(x, np.ndarray) and f.name != "line":
                assert np.array_equal(x, y, equal_nan=x.dtype.kind == "f"), f"{section}.{f.name}"
    assert a.blood == b.blood and a.venous_pressure_pa == b.venous_pressure_pa


def within_tables(net: Network) -> Network:
    """``net`` without what tables cannot hold: partial walls, wall Poisson ratios, distensible
    walls, external pressures, lesions, pulsatile inflows, Windkessel and autoregulating beds."""
    v, b = net.vessels, net.beds
    n, m = len(v), len(b)
    walls = np.isfinite(v.wall_thickness_m).all() and np.isfinite(v.wall_modulus_pa).all()
    vessels = dataclasses.replace(
        v, wall_thickness_m=v.wall_thickness_m if walls else np.full(n, np.nan),
        wall_modulus_pa=v.wall_modulus_pa if walls else np.full(n, np.nan),
        wall_poisson=np.full(n, 0.5), distensible=np.zeros(n, dtype=bool),
        external_pressure_pa=np.zeros(n), stenosis_reduction=np.full(n, np.nan),
        stenosis_length_m=np.full(n, np.nan), stenosis_at=np.full(n, 0.5))
    beds = dataclasses.replace(b, windkessel_proximal_pa_s_m3=np.full(m, np.nan),
                               windkessel_compliance_m3_pa=np.full(m, np.nan),
                               min_resistance_pa_s_m3=np.full(m, np.nan),
                               target_flow_m3_s=np.full(m, np.nan))
    nodes = dataclasses.replace(net.nodes, inflow_waveforms={})
    return dataclasses.replace(net, vessels=vessels, beds=beds, nodes=nodes)


# --------------------------------------------------------------------------- the bundled networks

def test_every_bundled_network_is_covered():
    """The parametrised round trips below run over every network file in networks/."""
    assert {"whole_body", "leg", "collateral", "venous_return", "microvascular"} <= set(NETWORKS)


@pytest.mark.parametrize("name", NETWORKS)
def test_inline_round_trip_of_bundled_networks(name, tmp_path):
    net = load_network(demo_path(name))
    paths = write_network_yaml(net, tmp_path / "out.yaml", tables=False)
    assert paths == [tmp_path / "out.yaml"]
    back = load_network(paths[0])
    assert_same_network(back, net)
    assert_same_solution(back, net)


@pytest.mark.parametrize("name", NETWORKS)
def test_both_forms_agree_on_bundled_networks(name, tmp_path):
    """Tables hold each network less what they cannot; inline and tables read back to the same
    columns bit for bit and to the solution of the network written."""
    net = within_tables(load_network(demo_path(name)))
    paths = write_network_yaml(net, tmp_path / "t.yaml", tables=True)
    assert [p.name for p in paths][:2] == ["t.yaml", "t_vessels.csv"]
    tables = load_network(paths[0])
    inline = load_network(write_network_yaml(net, tmp_path / "i.yaml", tables=False)[0])
    assert_same_network(tables, net)
    assert_same_columns(tables, inline)
    assert_same_solution(tables, net)
    assert_same_solution(inline, tables, rtol=0)


@pytest.mark.parametrize("name, shaped", [("whole_body", False), ("leg", False),
                                          ("collateral", False), ("whole_body", True)])
def test_pulsatile_setup_round_trip(name, shaped, tmp_path):
    """`setup_windkessels` (and `shape_constant_inflows`) output written by default: beds with
    Windkessels keep the file inline, and it reads back with its Windkessel blocks, inflow
    waveforms and the same steady solution."""
    net = setup_windkessels(load_network(demo_path(name))).network
    if shaped:
        net = shape_constant_inflows(net, heart_rate_hz=1.25)
        assert net.nodes.inflow_waveforms
    assert np.isfinite(net.beds.windkessel_proximal_pa_s_m3).any()
    paths = write_network_yaml(net, tmp_path / "out.yaml")
    assert paths == [tmp_path / "out.yaml"]
    back = load_network(paths[0])
    assert_same_network(back, net)
    assert_same_solution(back, net)


# --------------------------------------------------------------------------- every feature

def small_network(**changes) -> Network:
    """Heart -> junction -> arm and rest beds (about 100 mmHg at 100 mL/s); ``changes`` maps
    ``vessels``/``nodes``/``beds`` to per-item updates and ``options`` to Network options."""
    nodes = {"heart": {"inflow_m3_s": 1e-4}}
    vessels = [{"id": "a", "from": "heart", "to": "j", "length_m": 0.1, "radius_m": 0.01},
               {"id": "b", "from": "j", "to": "arm", "length_m": 0.2, "radius_m": 0.003},
               {"id": "c", "from": "j", "to": "rest", "length_m": 0.15, "radius_m": 0.008}]
    beds = [{"id": "arm", "node": "arm", "resistance_pa_s_m3": 10 * MMHG_S_ML},
            {"id": "rest", "node": "rest", "resistance_pa_s_m3": 1.2 * MMHG_S_ML}]
    for node, update in changes.get("nodes", {}).items():
        nodes.setdefault(node, {}).update(update)
    for items, updates in ((vessels, changes.get("vessels", {})), (beds, changes.get("beds", {}))):
        for item in items:
            item.update(updates.get(item["id"], {}))
    return Network.build(nodes=nodes, vessels=vessels, beds=beds, **changes.get("options", {}))


WALL = {"wall_thickness_m": 1e-3, "wall_modulus_pa": 0.5e6}
SAMPLES = {"period_s": 0.8, "samples_m3_s": (0.0, 3e-4, 1.2e-4, 0.0), "mean_m3_s": 1.05e-4}
STROKE = {"stroke_volume_m3": 7e-5, "heart_rate_hz": 1.2, "ejection_time_s": 0.3,
          "mean_m3_s": 7e-5 * 1.2}

# name -> (network changes, what a tables=True refusal says, or None: tables hold it)
FEATURES = {
    "plain": ({}, None),
    "taper": ({"vessels": {"b": {"radius_in_m": 0.004, "radius_out_m": 0.0025}}}, None),
    "tags": ({"vessels": {"a": {"tags": ["arterial", "left leg"]}, "c": {"tags": ["a,b", 'q"t', "é"]}}},
             None),
    "odd ids": ({"vessels": {"a": {"id": "aorta, ascending"}, "b": {"id": 'the "b"', "to": "arm é"}},
                 "beds": {"arm": {"node": "arm é"}}}, None),
    "positions": ({"nodes": {"heart": {"position_m": (0.0, 0.0, 0.0)},
                             "j": {"position_m": (0.1, 0.02, -0.013)}}}, None),
    "target pressure and hematocrit": ({"nodes": {"j": {"target_pressure_pa": 90 * MMHG_PA,
                                                        "hematocrit": 0.4}}}, None),
    "pressure inlet": ({"nodes": {"heart": {"inflow_m3_s": np.nan, "pressure_pa": 100 * MMHG_PA}}}, None),
    "shares and outflow pressure": ({"beds": {"arm": {"share": 0.1}, "rest": {
        "share": 0.9, "outflow_pressure_pa": 10 * MMHG_PA}}}, None),
    "bed into a node": ({"beds": {"arm": {"outflow_node": "rest"}}}, None),
    "walls everywhere": ({"vessels": {v: WALL for v in "abc"}}, None),
    "blood law": ({"options": {"blood": Blood(viscosity_law="pries-vivo", separation="pries-1990",
                                              density_kg_m3=1050.0, hematocrit=0.42),
                               "venous_pressure_pa": 7 * MMHG_PA}}, None),
    "walls on some": ({"vessels": {"a": WALL}}, "wall thickness on some vessels only"),
    "poisson": ({"vessels": {v: {**WALL, "wall_poisson": 0.45} for v in "abc"}}, "wall poisson"),
    "distensible": ({"vessels": {v: {**WALL, "distensible": v == "c"} for v in "abc"}},
                    "distensible walls"),
    "external pressure": ({"vessels": {"c": {"external_pressure_pa": 8 * MMHG_PA}}},
                          "wall external_pressure"),
    "lesion": ({"vessels": {"c": {"stenosis_reduction": 0.6, "stenosis_length_m": 0.01,
                                  "stenosis_at": 0.3}}}, "stenosis"),
    "windkessel": ({"beds": {"arm": {"windkessel_proximal_pa_s_m3": 0.5 * MMHG_S_ML,
                                     "windkessel_compliance_m3_pa": 0.1e-6 / MMHG_PA}}}, "windkessel"),
    "autoregulation": ({"beds": {"arm": {"min_resistance_pa_s_m3": 2.5 * MMHG_S_ML,
                                         "target_flow_m3_s": 8e-6},
                                 "rest": {"min_resistance_pa_s_m3": 0.4 * MMHG_S_ML}}}, "autoregulation"),
    "sampled inflow": ({"nodes": {"heart": {"inflow_m3_s": SAMPLES["mean_m3_s"]}},
                        "options": {"inflow_waveforms": {"heart": SAMPLES}}}, "pulsatile inflow"),
    "stroke volume inflow": ({"nodes": {"heart": {"inflow_m3_s": STROKE["mean_m3_s"]}},
                              "options": {"inflow_waveforms": {"heart": STROKE}}}, "pulsatile inflow"),
    "tag with a semicolon": ({"vessels": {"a": {"tags": ["x;y"]}}}, "the tag 'x;y'"),
}


@pytest.mark.parametrize("feature", FEATURES)
def test_inline_form_carries_every_feature(feature, tmp_path):
    net = small_network(**FEATURES[feature][0])
    back = load_network(write_network_yaml(net, tmp_path / "n.yaml", tables=False)[0])
    assert_same_network(back, net)
    assert_same_solution(back, net)
    assert_same_columns(read_network_text(network_yaml(net)), back)


@pytest.mark.parametrize("feature", FEATURES)
def test_table_form_carries_or_refuses_each_feature(feature, tmp_path):
    changes, refusal = FEATURES[feature]
    net = small_network(**changes)
    if refusal is not None:
        with pytest.raises(NetworkSpecError, match="CSV tables cannot hold " + refusal):
            write_network_yaml(net, tmp_path / "n.yaml", tables=True)
        assert list(tmp_path.iterdir()) == []      # nothing written
        return
    paths = write_network_yaml(net, tmp_path / "n.yaml", tables=True)
    assert len(paths) > 1
    back = load_network(paths[0])
    assert_same_network(back, net)
    assert_same_solution(back, net)
    assert_same_columns(back, load_network(write_network_yaml(net, tmp_path / "i.yaml", tables=False)[0]))


def test_network_without_beds_or_node_properties(tmp_path):
    """Pressure at both ends, no beds: no beds table; a nodes table only for the two ends."""
    net = Network.build(nodes={"in": {"pressure_pa": 8000.0}, "out": {"pressure_pa": 2000.0}},
                        vessels=[{"id": "c", "from": "in", "to": "mid", "length_m": 1e-4, "radius_m": 3e-6},
                                 {"id": "d", "from": "mid", "to": "out", "length_m": 2e-4, "radius_m": 4e-6}])
    paths = write_network_yaml(net, tmp_path / "tiny.yaml", tables=True)
    assert [p.name for p in paths] == ["tiny.yaml", "tiny_vessels.csv", "tiny_nodes.csv"]
    lines = paths[2].read_text().splitlines()
    assert lines[0] == "id,pressure[mmHg]" and [x.split(",")[0] for x in lines[1:]] == ["in", "out"]
    back = load_network(paths[0])
    assert_same_network(back, net)
    assert_same_solution(back, net)


# --------------------------------------------------------------------------- choosing the form

@pytest.mark.parametrize("threshold_offset, tables, files", [
    (-1, None, 4), (0, None, 1), (-1, False, 1), (0, True, 4)])
def test_size_threshold_and_forcing(threshold_offset, tables, files, tmp_path, monkeypatch):
    """By default tables above TABLE_THRESHOLD vessels; ``tables=`` forces either form."""
    net = load_network(demo_path("collateral"))
    monkeypatch.setattr(networkwriter, "TABLE_THRESHOLD", len(net.vessels) + threshold_offset)
    paths = write_network_yaml(net, tmp_path / "c.yaml", tables=tables)
    assert len(paths) == files
    assert_same_network(load_network(paths[0]), net)


def test_default_threshold():
    """The documented size: tables above 2000 vessels."""
    assert networkwriter.TABLE_THRESHOLD == 2000


def test_large_network_tables_cannot_hold_is_written_inline(tmp_path, monkeypatch):
    """Above the threshold, a network with distensible walls still gets a file: inline."""
    net = load_network(demo_path("venous_return"))
    monkeypatch.setattr(networkwriter, "TABLE_THRESHOLD", 0)
    paths = write_network_yaml(net, tmp_path / "v.yaml")
    assert paths == [tmp_path / "v.yaml"]
    assert_same_network(load_network(paths[0]), net)
    with pytest.raises(NetworkSpecError, match="distensible walls"):
        write_network_yaml(net, tmp_path / "w.yaml", tables=True)


def occluded(net: Network) -> Network:
    return dataclasses.replace(net, vessels=dataclasses.replace(
        net.vessels, occluded=np.array([False, True, False])))


UNWRITABLE = {   # name -> (network, what the refusal says)
    "occlusion": (occluded(small_network()), "vessels 'b': 1 vessel.s. occluded"),
    "padded vessel id": (small_network(vessels={"b": {"id": " b"}}), "vessels ' b': 1 id.s. empty or"),
    "padded node id": (small_network(vessels={"b": {"to": "arm "}}, beds={"arm": {"node": "arm "}}),
                       "nodes 'arm ': 1 id"),
    "empty bed id": (small_network(beds={"rest": {"id": ""}}), "beds '': 1 id"),
}


@pytest.mark.parametrize("tables", [False, True])
@pytest.mark.parametrize("case", UNWRITABLE)
def test_what_no_file_can_say_is_refused_in_both_forms(case, tables, tmp_path):
    """Occlusions are scenario changes; ids are stripped by the reader (leading or trailing
    spaces would not read back)."""
    net, message = UNWRITABLE[case]
    with pytest.raises(VesselnetError, match=message):
        write_network_yaml(net, tmp_path / "n.yaml", tables=tables)
    with pytest.raises(NetworkSpecError, match=message):
        network_yaml(net)
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("suffix", [".json", ".npz"])
def test_names_read_as_other_formats_are_refused(suffix, tmp_path):
    """The reader takes .json and .npz names as other formats (vesselnet.netfiles)."""
    with pytest.raises(NetworkSpecError, match="netfiles"):
        write_network_yaml(small_network(), tmp_path / f"n{suffix}")


def test_comment_lines_lead_the_file(tmp_path):
    path = write_network_yaml(small_network(), tmp_path / "n.yaml", comment="made by a test\n\nline 3")[0]
    assert path.read_text().splitlines()[:4] == ["# made by a test", "#", "# line 3", "vesselnet: 1"]
    assert load_network(path).vessels.ids == ("a", "b", "c")


# --------------------------------------------------------------------------- table units

REGISTRY = pint.UnitRegistry()
SI_COLUMNS = {"vessels": {"length": "length_m", "radius": "radius_in_m"},
              "nodes": {"pressure": "pressure_pa", "x": "x", "y": "y", "z": "z"},
              "beds": {"resistance": "resistance_pa_s_m3", "outflow_pressure": "outflow_pressure_pa"}}


@pytest.mark.parametrize("section", SI_COLUMNS)
def test_table_header_units_are_those_written(section, tmp_path):
    """pint reads each cell with the unit of its column's header; the SI values are the
    network's (collateral demo; bed outflow pressure blank where it is the venous pressure)."""
    import csv

    net = load_network(demo_path("collateral"))
    paths = write_network_yaml(net, tmp_path / "c.yaml", tables=True)
    with open(tmp_path / f"c_{section}.csv", newline="") as handle:
        rows = list(csv.reader(handle))
    assert tmp_path / f"c_{section}.csv" in paths
    ids = [r[0] for r in rows[1:]]
    items = getattr(net, section)
    rows_in_net = [items.index[i] for i in ids]
    checked = 0
    for k, head in enumerate(rows[0]):
        name, _, unit = head.partition("[")
        if name not in SI_COLUMNS[section]:
            continue
        column = SI_COLUMNS[section][name]
        expected = (net.nodes.position_m[:, "xyz".index(column)] if column in "xyz"
                    else getattr(items, column))[rows_in_net]
        for cell, value in zip((r[k] for r in rows[1:]), expected):
            if cell:
                si = REGISTRY.Quantity(float(cell), unit.rstrip("]")).to_base_units().magnitude
                assert si == pytest.approx(value, rel=1e-12, abs=1e-15)
                checked += 1
    assert checked >= 2
