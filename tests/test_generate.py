"""The synthetic microvascular network generator and its command.

Checks and their sources:

* Murray's law r0^3 = sum r_i^3 at every branch point of both trees
  (Murray 1926, REFERENCES 7; exponent about 3 in vessels of 4-100 um,
  Nakamura & Awa 2014, [V abstract]).
* Sizes of the trade (common practice, no source): capillaries about 2-4 um
  in radius and 50-200 um long, arterioles and venules up to some tens of um.
* Graph facts checked with scipy.sparse.csgraph and networkx, independent of
  the generator: one connected part, no capillary dead ends, a tree of
  arterioles (each branch point has one parent).
* The written files read back (vesselnet.reader) to the same network, and
  ``vesselnet solve`` solves them with the invariants holding.
"""

import numpy as np
import pytest
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from vesselnet.cli import main
from vesselnet.demos import demo_path
from vesselnet.errors import NetworkSpecError
from vesselnet.generate import microvascular_network
from vesselnet.reader import load_network
from vesselnet.solve import solve
from vesselnet.testing import assert_invariants

UM = 1e-6


@pytest.mark.parametrize("n", [100, 137, 1000, 4321, 20000])
def test_exact_segment_count_and_one_connected_part(n):
    net = microvascular_network(n, seed=31337 + n)
    assert len(net.vessels) == n
    v = net.vessels
    m = len(net.nodes)
    graph = coo_matrix((np.ones(n), (v.from_node, v.to_node)), shape=(m, m))
    count, _ = connected_components(graph, directed=False)
    assert count == 1
    degree = np.bincount(v.from_node, minlength=m) + np.bincount(v.to_node, minlength=m)
    boundary = [net.nodes.index["inlet"], net.nodes.index["outlet"]]
    assert np.delete(degree, boundary).min() >= 2          # no dead ends
    assert set(v.tags) == {"arteriole", "capillary", "venule"}
    assert 0.8 < v.tags["capillary"].size / n < 0.92


@pytest.mark.parametrize("tree", ["arteriole", "venule"])
@pytest.mark.parametrize("seed", [20240917, 5])
def test_murray_law_at_every_branch_point(tree, seed):
    """Parent radius cubed equals the sum of the daughters' (Murray 1926) to 1e-12."""
    net = microvascular_network(3000, seed=seed)
    v = net.vessels
    rows = v.tags[tree]
    r = np.asarray(v.radius_in_m)
    # arterioles run parent -> child, venules child -> parent (the direction of flow)
    parent_end = v.from_node if tree == "arteriole" else v.to_node
    child_end = v.to_node if tree == "arteriole" else v.from_node
    checked = 0
    for row in rows:
        node = child_end[row]
        daughters = rows[(parent_end[rows] == node)]
        if daughters.size:
            assert daughters.size == 2
            assert abs(r[row] ** 3 - (r[daughters] ** 3).sum()) <= 1e-12 * r[row] ** 3
            checked += 1
    assert checked == rows.size // 2      # a binary tree with a root segment: (2T-1-1)/2 joints


def test_sizes_are_those_of_microvessels():
    """Capillary radii 2-4 um and lengths 50-200 um; the largest vessels tens of um in
    radius; terminal arterioles 3-4 um (trade facts, no source)."""
    net = microvascular_network(20000, seed=8086)
    v = net.vessels
    r_um = np.asarray(v.radius_in_m) / UM
    length_um = np.asarray(v.length_m) / UM
    cap = v.tags["capillary"]
    assert 2.0 <= r_um[cap].min() and r_um[cap].max() <= 4.0
    assert 50 <= length_um[cap].min() and length_um[cap].max() <= 200
    art = v.tags["arteriole"]
    assert 20 <= r_um[art].max() <= 50 and 2.9 <= r_um[art].min() <= 4.2
    assert r_um[v.tags["venule"]].max() <= 70
    assert np.all(np.isfinite(net.nodes.position_m))


def test_same_seed_same_network_other_seed_other():
    a, b, c = (microvascular_network(800, seed=s) for s in (404, 404, 405))
    np.testing.assert_array_equal(a.vessels.radius_in_m, b.vessels.radius_in_m)
    np.testing.assert_array_equal(a.vessels.length_m, b.vessels.length_m)
    assert a.vessels.ids == b.vessels.ids
    assert not np.array_equal(a.vessels.length_m, c.vessels.length_m)


@pytest.mark.parametrize("n", [99, 0, 150.5])
def test_too_few_segments_is_refused(n):
    with pytest.raises(NetworkSpecError, match="n_segments"):
        microvascular_network(n, seed=1)


def test_generated_network_solves_with_invariants():
    result = solve(microvascular_network(1500, seed=777))
    assert_invariants(result)
    assert result.extra_checks["rheology"]["iterations"] >= 2
    q = result.vessel_flow_m3_s
    arterioles = result.network.vessels.tags["arteriole"]
    assert np.all(q[arterioles] > 0)      # supply runs from the inlet down the tree


def test_command_writes_files_that_read_back_and_solve(tmp_path, capsys):
    """`vesselnet generate` then `vesselnet solve`: same columns as the in-memory network
    (15 significant digits in the tables), and the solve succeeds (the issue's 'done when')."""
    out = tmp_path / "tissue"
    assert main(["generate", str(out), "--segments", "900", "--seed", "2024"]) == 0
    assert "wrote" in capsys.readouterr().out
    files = {p.name for p in tmp_path.iterdir()}
    assert files == {"tissue.yaml", "tissue_vessels.csv", "tissue_nodes.csv", "tissue_beds.csv"}
    read = load_network(tmp_path / "tissue.yaml")
    made = microvascular_network(900, seed=2024)
    assert read.vessels.ids == made.vessels.ids and read.nodes.ids == made.nodes.ids
    np.testing.assert_allclose(read.vessels.radius_in_m, made.vessels.radius_in_m, rtol=1e-14)
    np.testing.assert_allclose(read.vessels.length_m, made.vessels.length_m, rtol=1e-14)
    np.testing.assert_allclose(read.nodes.position_m, made.nodes.position_m, rtol=1e-14, atol=1e-15)
    np.testing.assert_allclose(read.beds.resistance_pa_s_m3, made.beds.resistance_pa_s_m3, rtol=1e-14)
    assert read.blood == made.blood
    np.testing.assert_array_equal(read.nodes.hematocrit, made.nodes.hematocrit)   # NaN = NaN
    np.testing.assert_array_equal(read.nodes.pressure_pa, made.nodes.pressure_pa)
    assert {t: r.tolist() for t, r in read.vessels.tags.items()} == \
        {t: r.tolist() for t, r in made.vessels.tags.items()}
    assert main(["solve", str(tmp_path / "tissue.yaml"), "--json"]) == 0


def test_command_rejects_bad_input(tmp_path, capsys):
    assert main(["generate", str(tmp_path / "x"), "--segments", "10"]) == 2
    assert "n_segments" in capsys.readouterr().err
    assert main(["generate", str(tmp_path / "x"), "--hematocrit", "45"]) == 2


def test_bundled_microvascular_demo_is_the_generated_network():
    """networks/microvascular.yaml is what its header's command generates."""
    path = demo_path("microvascular")
    header = path.read_text().splitlines()[0]
    assert "--segments 2000 --seed 20250611" in header
    made = microvascular_network(2000, seed=20250611)
    read = load_network(path)
    np.testing.assert_allclose(read.vessels.radius_in_m, made.vessels.radius_in_m, rtol=1e-9)
    assert read.vessels.ids == made.vessels.ids
