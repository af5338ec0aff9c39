"""Large-network input forms: CSV tables, .npz, JSON and YAML of one network agree exactly.

The four forms carry the same SI values (floats written with ``repr``,
which round-trips exactly: Python's float formatting, common practice), so
the checked networks and their solutions must be identical, not just close.
Bad binary and JSON input is reported like bad YAML.
"""

from __future__ import annotations

import dataclasses
import json
import subprocess
import sys

import numpy as np
import pytest

from vesselnet.errors import NetworkSpecError
from vesselnet.model import Network
from vesselnet.netfiles import network_arrays, write_network
from vesselnet.reader import load_network
from vesselnet.solve import solve
from vesselnet.synthetic import VISCOSITY_PA_S, synthetic_columns

SI_UNITS = "{length: m, radius: m, pressure: Pa, resistance: Pa*s/m3, viscosity: Pa*s}"


def _write_forms(folder, n=300, topology="local", seed=8675309):
    """The same network as YAML items, YAML + CSV tables, .npz and .json."""
    cols = synthetic_columns(n, topology, seed=seed)
    v, b = cols["vessels"], cols["beds"]
    rng = np.random.default_rng(seed)
    tagged = rng.choice(len(v["id"]), size=20, replace=False)
    head = (f"vesselnet: 1\nname: forms\nunits: {SI_UNITS}\n"
            f"blood: {{viscosity: {VISCOSITY_PA_S!r}}}\n"
            f"nodes: {{n0: {{pressure: {float(cols['nodes']['pressure_pa'][0])!r}}}}}\n")
    tags = {int(i): "[distal, left]" for i in tagged}
    lines = [head, "vessels:\n"]
    for i, (vid, a, c, length, r) in enumerate(zip(v["id"], v["from"], v["to"],
                                                   v["length_m"].tolist(), v["radius_m"].tolist())):
        extra = f", tags: {tags[i]}" if i in tags else ""
        lines.append(f"  - {{id: {vid}, from: {a}, to: {c}, length: {length!r}, radius: {r!r}{extra}}}\n")
    lines.append("beds:\n")
    for bid, node, res in zip(b["id"], b["node"], b["resistance_pa_s_m3"].tolist()):
        lines.append(f"  - {{id: {bid}, node: {node}, resistance: {res!r}}}\n")
    (folder / "items.yaml").write_text("".join(lines))
    rows = ["id,from,to,length[m],radius[m],tags"]
    for i, (vid, a, c, length, r) in enumerate(zip(v["id"], v["from"], v["to"],
                                                   v["length_m"].tolist(), v["radius_m"].tolist())):
        rows.append(f"{vid},{a},{c},{length!r},{r!r},{'distal;left' if i in tags else ''}")
    (folder / "vessels.csv").write_text("\n".join(rows) + "\n")
    (folder / "beds.csv").write_text("id,node,resistance[Pa*s/m3]\n" + "".join(
        f"{bid},{node},{res!r}\n" for bid, node, res in zip(b["id"], b["node"],
                                                            b["resistance_pa_s_m3"].tolist())))
    (folder / "tables.yaml").write_text(head + "vessels_table: vessels.csv\nbeds_table: beds.csv\n")
    net = load_network(folder / "tables.yaml")
    write_network(net, folder / "net.npz")
    write_network(net, folder / "net.json")
    return {"yaml": folder / "items.yaml", "csv": folder / "tables.yaml",
            "npz": folder / "net.npz", "json": folder / "net.json"}


@pytest.fixture
def forms(tmp_path):
    return _write_forms(tmp_path)


def _same_network(a: Network, b: Network):
    for section in ("nodes", "vessels", "beds"):
        x, y = getattr(a, section), getattr(b, section)
        assert x.ids == y.ids
        for f in dataclasses.fields(x):
            u, w = getattr(x, f.name), getattr(y, f.name)
            if isinstance(u, np.ndarray) and f.name != "line":
                np.testing.assert_array_equal(u, w, err_msg=f"{section}.{f.name}")
    assert {t: r.tolist() for t, r in a.vessels.tags.items()} == \
        {t: r.tolist() for t, r in b.vessels.tags.items()}
    assert a.blood == b.blood and a.venous_pressure_pa == b.venous_pressure_pa


@pytest.mark.parametrize("form", ["csv", "npz", "json"])
def test_forms_give_identical_networks_and_results(forms, form):
    """YAML items, CSV tables, .npz and .json: the same columns, bit for bit the same solution."""
    reference = load_network(forms["yaml"])
    other = load_network(forms[form])
    _same_network(reference, other)
    r0, r1 = solve(reference), solve(other)
    np.testing.assert_array_equal(r0.pressure_pa, r1.pressure_pa)
    np.testing.assert_array_equal(r0.vessel_flow_m3_s, r1.vessel_flow_m3_s)
    np.testing.assert_array_equal(r0.bed_flow_m3_s, r1.bed_flow_m3_s)


def test_npz_keeps_every_column(tmp_path):
    """Walls, lesions, tapers, series beds, waveforms and tags survive the binary form."""
    net = Network.build(
        nodes={"root": {"pressure_pa": 12000.0, "position_m": (0.0, 0.1, 0.2)},
               "j": {"target_pressure_pa": 9000.0},
               "h": {"inflow_m3_s": 1e-6}},
        vessels=[{"id": "a", "from": "root", "to": "j", "length_m": 0.1, "radius_in_m": 0.003,
                  "radius_out_m": 0.002, "wall_thickness_m": 5e-4, "wall_modulus_pa": 8e5,
                  "distensible": True, "external_pressure_pa": 100.0, "tags": ["leg"]},
                 {"id": "b", "from": "j", "to": "t", "length_m": 0.05, "radius_m": 0.001,
                  "stenosis_reduction": 0.6, "stenosis_length_m": 0.01, "stenosis_at": 0.3},
                 {"id": "c", "from": "h", "to": "j", "length_m": 0.05, "radius_m": 0.001,
                  "tags": ["leg", "left"]}],
        beds=[{"id": "gut", "node": "t", "resistance_pa_s_m3": 1e9, "outflow_node": "h"},
              {"id": "foot", "node": "t", "resistance_pa_s_m3": 2e9, "share": 0.1,
               "windkessel_proximal_pa_s_m3": 1e8, "windkessel_compliance_m3_pa": 1e-9}],
        inflow_waveforms={"h": {"period_s": 1.0, "samples_m3_s": (1e-6, 2e-6), "mean_m3_s": 1.5e-6}})
    back = load_network(write_network(net, tmp_path / "all.npz"))
    _same_network(net, back)
    assert back.nodes.inflow_waveforms == net.nodes.inflow_waveforms
    assert back.nodes.inflow_waveforms[back.nodes.index["h"]]["samples_m3_s"] == (1e-6, 2e-6)


def _broken_npz(tmp_path, change):
    net = load_network(write_network(
        Network.build(nodes={"r": {"pressure_pa": 1e4}},
                      vessels=[{"id": "a", "from": "r", "to": "t", "length_m": 0.1, "radius_m": 1e-3},
                               {"id": "b", "from": "t", "to": "u", "length_m": 0.1, "radius_m": 1e-3}],
                      beds=[{"id": "bed", "node": "u", "resistance_pa_s_m3": 1e9}]),
        tmp_path / "ok.npz"))
    arrays = network_arrays(net)
    change(arrays)
    np.savez(tmp_path / "bad.npz", **arrays)
    return tmp_path / "bad.npz"


@pytest.mark.parametrize("change, message", [
    (lambda a: a.update(vessel_id=np.array(["a", "a"])), "duplicate ids 'a'"),
    (lambda a: a.update(vessel_length_m=np.array([0.1, -1.0])), r"vessels\[1\] 'b': length_m must be finite and > 0"),
    (lambda a: a.update(vessel_radius_in_m=np.array([np.nan, 1e-3])), r"vessels\[0\] 'a': radius_in_m"),
    (lambda a: a.update(vessel_to_node=np.array([1, 7])), "to_node is not a node row"),
    (lambda a: a.update(vessel_to_node=np.array([1, 1])), "self-loop"),
    (lambda a: a.update(bed_node=np.array([9])), r"beds\[0\] 'bed': node is not a node row"),
    (lambda a: a.update(bed_resistance_pa_s_m3=np.array([0.0])), "resistance_pa_s_m3 must be"),
    (lambda a: a.pop("vessel_length_m"), "missing arrays vessel_length_m"),
    (lambda a: a.update(vessel_length_m=np.array([0.1])), "has 1 rows, expected 2"),
    (lambda a: a.update(header=np.array(json.dumps({"format": "other"}))), "not a vesselnet .npz"),
    (lambda a: a.update(node_pressure_pa=np.array([np.nan, np.nan, np.nan]),
                        bed_outflow_node=np.array([0])), "no pressure reference"),
])
def test_bad_npz_is_reported(tmp_path, change, message):
    path = _broken_npz(tmp_path, change)
    with pytest.raises(NetworkSpecError, match=message):
        load_network(path)


def test_not_an_npz_file(tmp_path):
    path = tmp_path / "junk.npz"
    path.write_text("not a zip")
    with pytest.raises(NetworkSpecError, match="not a vesselnet .npz network"):
        load_network(path)


@pytest.mark.parametrize("text, message", [
    ('{"vesselnet": 1, "vessels": [', "not valid JSON"),
    ('{"vesselnet": 1, "vesselnet": 1}', "duplicate key 'vesselnet'"),
    ('{"vesselnet": 1, "vessels": [{"id": "a", "from": "p", "to": "q", "length": -1, "radius": 1}]}',
     "length"),
    ('{"vesselnet": 2, "vessels": []}', "format version 2"),
])
def test_bad_json_is_reported(tmp_path, text, message):
    path = tmp_path / "bad.json"
    path.write_text(text)
    with pytest.raises(NetworkSpecError, match=message):
        load_network(path)


def _cli(*args, cwd):
    return subprocess.run([sys.executable, "-m", "vesselnet", *args], capture_output=True,
                          text=True, cwd=cwd)


def test_convert_and_solve_from_the_command_line(forms, tmp_path):
    """``convert`` writes .npz and .json; ``solve`` reads them; ``--solver`` is honoured."""
    out = _cli("convert", str(forms["csv"]), str(tmp_path / "c.npz"), cwd=tmp_path)
    assert out.returncode == 0, out.stderr
    assert "wrote" in out.stdout and (tmp_path / "c.npz").exists()
    done = _cli("solve", str(tmp_path / "c.npz"), "--json", "--solver", "superlu", cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    checks = json.loads(done.stdout)["checks"]
    assert checks["solver"].startswith("superlu") and checks["solver_reason"].startswith("requested")
    failed = _cli("solve", str(tmp_path / "c.npz"), "--solver", "tree", cwd=tmp_path)
    assert failed.returncode == 1 and "without loops" in failed.stderr
    bad = _cli("convert", str(forms["csv"]), str(tmp_path / "c.txt"), cwd=tmp_path)
    assert bad.returncode == 2 and "use an output name ending in .npz or .json" in bad.stderr


def test_result_arrays_hold_the_tables(forms, tmp_path):
    """write_arrays: the same numbers as the result tables, ids and node rows included."""
    from vesselnet.writers import write_arrays

    result = solve(load_network(forms["npz"]))
    with np.load(write_arrays(result, tmp_path / "r.npz")) as data:
        np.testing.assert_array_equal(data["vessel_flow_m3_s"], result.vessel_flow_m3_s)
        np.testing.assert_array_equal(data["node_pressure_pa"], result.pressure_pa)
        np.testing.assert_array_equal(data["bed_share"], result.bed_share)
        assert tuple(data["vessel_id"].tolist()) == result.network.vessels.ids
        ids = data["node_id"]
        assert ids[data["vessel_from_node"]].tolist() == result.vessel_table()["from"].tolist()
        assert json.loads(str(data["checks"]))["solver"] == result.solver
