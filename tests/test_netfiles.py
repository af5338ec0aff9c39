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
        assert tuple(data["vessel_id"].astype(str).tolist()) == result.network.vessels.ids
        assert data["vessel_id"].dtype.kind == "S"      # ASCII ids as bytes
        ids = data["node_id"].astype(str)
        assert ids[data["vessel_from_node"]].tolist() == result.vessel_table()["from"].tolist()
        assert json.loads(str(data["checks"]))["solver"] == result.solver


def test_npz_stores_constant_columns_once_and_ascii_ids_as_bytes(forms):
    """Version 2: a column of one repeated value is stored as that value (one dimension
    fewer), ids as bytes; reading gives the full columns back (checked against the CSV
    form of the same network, an independent reader)."""
    with np.load(forms["npz"]) as data:
        assert data["vessel_wall_thickness_m"].shape == ()          # NaN in every row
        assert data["node_position_m"].shape == (3,)                 # one NaN row for all
        assert data["vessel_length_m"].shape == (len(data["vessel_id"]),)
        assert data["vessel_id"].dtype.kind == "S"
        assert json.loads(str(data["header"]))["version"] == 2
    _same_network(load_network(forms["csv"]), load_network(forms["npz"]))


def test_version_1_npz_still_reads(forms, tmp_path):
    """A file in the first layout (every column full, ids as numpy text) reads as before."""
    net = load_network(forms["csv"])
    arrays = {}
    for key, value in network_arrays(net).items():
        section = key.split("_")[0]
        size = {"node": len(net.nodes), "vessel": len(net.vessels), "bed": len(net.beds)}.get(section)
        if key.endswith("_id"):
            value = value.astype(str)
        elif size is not None and value.ndim == (2 if key == "node_position_m" else 1) - 1:
            value = np.array(np.broadcast_to(value, (size,) + value.shape))
        arrays[key] = value
    header = json.loads(str(arrays["header"]))
    arrays["header"] = np.array(json.dumps({**header, "version": 1}))
    np.savez(tmp_path / "old.npz", **arrays)
    _same_network(net, load_network(tmp_path / "old.npz"))


def test_npz_keeps_non_ascii_ids(tmp_path):
    """Ids outside ASCII stay numpy text in the file and read back unchanged."""
    net = Network.build(nodes={"aorta": {"pressure_pa": 12000.0}},
                        vessels=[{"id": "äste-1", "from": "aorta", "to": "knoten-ß", "length_m": 0.1,
                                  "radius_m": 0.002},
                                 {"id": "b", "from": "knoten-ß", "to": "t", "length_m": 0.1,
                                  "radius_m": 0.001}],
                        beds=[{"id": "organ", "node": "t", "resistance_pa_s_m3": 1e9}])
    path = write_network(net, tmp_path / "u.npz")
    with np.load(path) as data:
        assert data["vessel_id"].dtype.kind == "U" and data["bed_id"].dtype.kind == "S"
    back = load_network(path)
    assert back.vessels.ids == ("äste-1", "b") and back.nodes.ids == net.nodes.ids


@pytest.mark.parametrize("ids, expected", [
    (["a", "b", "a"], ["a"]),
    (["x", "yy", "x", "yy", "z"], ["x", "yy"]),
    ([f"vessel-{i:09d}" for i in range(3000)] + ["vessel-000000007"], ["vessel-000000007"]),
    ([f"v{i}" for i in range(5000)], []),
])
@pytest.mark.parametrize("as_bytes", [False, True])
def test_duplicate_ids_are_found_exactly(ids, expected, as_bytes):
    """The vectorised duplicate search against Python's own count (collections.Counter)."""
    from collections import Counter

    from vesselnet.netfiles import duplicated

    array = np.array(ids, dtype="S" if as_bytes else str)
    assert duplicated(array) == expected
    assert sorted(expected) == sorted(k for k, c in Counter(ids).items() if c > 1)


def test_binary_path_makes_no_python_strings(forms, tmp_path):
    """npz in, solve, npz out: the ids stay numpy arrays throughout (no tuple of 10^6
    Python strings is built); asking for them as a tuple still works."""
    from vesselnet.model import Ids
    from vesselnet.writers import write_arrays

    net = load_network(forms["npz"])
    write_arrays(solve(net), tmp_path / "r.npz")
    for section in (net.nodes, net.vessels, net.beds):
        assert isinstance(section.ids, Ids) and section.ids._tuple is None
    assert net.vessels.ids == load_network(forms["csv"]).vessels.ids


def test_npz_with_stray_bytes_in_ids_reads_without_error(tmp_path):
    """Byte ids that are not UTF-8 (a hand-made file) are decoded with U+FFFD, never a crash."""
    def change(arrays):
        arrays["vessel_id"] = np.array([b"a\xff", b"b"])

    back = load_network(_broken_npz(tmp_path, change))
    assert back.vessels.ids == ("a\ufffd", "b")
