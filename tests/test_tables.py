"""CSV tables: the same network as YAML and as tables gives the same solution."""

import numpy as np
import pytest

from vesselnet.errors import NetworkSpecError
from vesselnet.reader import load_network
from vesselnet.solve import solve
from vesselnet.testing import assert_invariants


def write_tree(folder, n_vessels, seed=5150):
    """A random binary-ish tree as CSV tables plus the YAML that names them."""
    rng = np.random.default_rng(seed)
    parent = [int(rng.integers(max(0, i // 2 - 3), i)) for i in range(1, n_vessels + 1)]
    leaves = sorted(set(range(n_vessels + 1)) - set(parent))
    lines = ["id,from,to,length[mm],radius[um],tags"]
    for i, p in enumerate(parent, start=1):
        lines.append(f"v{i},n{p},n{i},{rng.uniform(0.5, 5):.6f},{rng.uniform(20, 400):.6f},{'micro' if i % 2 else ''}")
    (folder / "vessels.csv").write_text("\n".join(lines) + "\n")
    beds = ["id,node,resistance[mmHg*s/mL]"] + [f"b{k},n{leaf},{rng.uniform(1e3, 1e4):.4f}"
                                                 for k, leaf in enumerate(leaves)]
    (folder / "beds.csv").write_text("\n".join(beds) + "\n")
    (folder / "net.yaml").write_text("vesselnet: 1\nnodes: {n0: {pressure: 90}}\n"
                                     "vessels_table: vessels.csv\nbeds_table: beds.csv\n")
    yaml = ["vesselnet: 1", "nodes: {n0: {pressure: 90}}", "vessels:"]
    for row in lines[1:]:
        vid, a, b, length, radius, tag = row.split(",")
        tags = f", tags: [{tag}]" if tag else ""
        yaml.append(f"  - {{id: {vid}, from: {a}, to: {b}, length: {length} mm, radius: {radius} um{tags}}}")
    yaml.append("beds:")
    for row in beds[1:]:
        bid, node, res = row.split(",")
        yaml.append(f"  - {{id: {bid}, node: {node}, resistance: {res}}}")
    (folder / "same.yaml").write_text("\n".join(yaml) + "\n")
    return folder / "net.yaml", folder / "same.yaml"


def test_table_and_yaml_forms_agree(tmp_path):
    tables, yaml = write_tree(tmp_path, 300)
    a, b = solve(load_network(tables)), solve(load_network(yaml))
    assert a.network.vessels.ids == b.network.vessels.ids
    np.testing.assert_array_equal(a.network.vessels.tags["micro"], b.network.vessels.tags["micro"])
    np.testing.assert_allclose(a.pressure_pa, b.pressure_pa, rtol=1e-12)
    np.testing.assert_allclose(a.vessel_flow_m3_s, b.vessel_flow_m3_s, rtol=1e-10)
    assert_invariants(a)


def test_ten_thousand_vessel_table_solves(tmp_path):
    tables, _ = write_tree(tmp_path, 10_000)
    result = solve(load_network(tables))
    assert_invariants(result)
    assert len(result.vessel_flow_m3_s) == 10_000


@pytest.mark.parametrize(("row", "message"), [
    ("v9,n0,n9,abc,30,", r"vessels.csv:3 row 2 length: not a number: 'abc'"),
    ("v9,n0,n9,-1,30,", r"vessels.csv:3 row 2 length: must be > 0"),
    ("v9,n0,n9,1,30", r"vessels.csv:3 row 2: has 5 cells, the header has 6"),
])
def test_bad_rows_are_located(tmp_path, row, message):
    tables, _ = write_tree(tmp_path, 3)
    lines = (tmp_path / "vessels.csv").read_text().splitlines()
    lines.insert(2, row)
    (tmp_path / "vessels.csv").write_text("\n".join(lines) + "\n")
    with pytest.raises(NetworkSpecError, match=message):
        load_network(tables)


def test_unknown_column_suggests(tmp_path):
    tables, _ = write_tree(tmp_path, 3)
    text = (tmp_path / "vessels.csv").read_text().replace("length[mm]", "lenght[mm]")
    (tmp_path / "vessels.csv").write_text(text)
    with pytest.raises(NetworkSpecError, match=r"unknown column 'lenght\[mm\]'; did you mean 'length'"):
        load_network(tables)


def test_networkx_graph_keeps_parallel_vessels():
    """Parallel vessels between the same two nodes are allowed and kept as separate edges."""
    from vesselnet.model import Network
    net = Network.build(nodes={"a": {"pressure_pa": 1e4}, "b": {"pressure_pa": 0.0}},
                        vessels=[{"id": "x", "from": "a", "to": "b", "length_m": 0.1, "radius_m": 1e-3, "tags": ["t"]},
                                 {"id": "y", "from": "a", "to": "b", "length_m": 0.1, "radius_m": 2e-3}])
    graph = net.to_networkx()
    assert graph.number_of_edges() == 2
    assert graph.edges["a", "b", "x"]["radius_in_m"] == 1e-3 and graph.edges["a", "b", "x"]["tags"] == ("t",)
    assert graph.nodes["a"]["pressure_pa"] == 1e4
