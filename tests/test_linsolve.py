"""Linear solver dispatch: every method gives the answer of a dense LAPACK solve.

Reference: ``numpy.linalg.solve`` (LAPACK ``gesv``, a general-purpose
reference tool) on the dense form of the same nodal matrix.  Networks are
the seeded synthetic ones (a tree, local loops, long-range loops).
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
import scipy.sparse as sp

from vesselnet.assembly import NodalPattern, solve_sparse
from vesselnet.errors import SolveError
from vesselnet.linsolve import MAX_TREE_LEVELS, Factorization, amg_available, cholmod_available
from vesselnet.model import Network
from vesselnet.solve import element_groups, solve
from vesselnet.synthetic import synthetic_network
from vesselnet.testing import assert_invariants

TOPOLOGIES = ("tree", "local", "long")
SEEDS = (314, 2718)


def _method_params():
    out = []
    for m in ("superlu", "tree", "cholmod", "amg"):
        marks = []
        if m == "cholmod":
            marks = [pytest.mark.skipif(not cholmod_available(), reason="scikit-sparse not installed")]
        if m == "amg":
            marks = [pytest.mark.skipif(not amg_available(), reason="pyamg not installed")]
        out.append(pytest.param(m, marks=marks))
    return out


METHODS = _method_params()


def nodal_system(net: Network, seed: int):
    """The conductance matrix of ``net``'s free nodes and a random right-hand side."""
    groups = element_groups(net, np.full(len(net.vessels), net.blood.viscosity_pa_s))
    a = np.concatenate([g.a for g in groups])
    b = np.concatenate([g.b for g in groups])
    g = np.concatenate([grp.law.conductance for grp in groups])
    pattern = NodalPattern(len(net.nodes), a, b, np.isnan(net.nodes.pressure_pa))
    A = pattern.linear_matrix(g)
    rhs = np.random.default_rng(seed).normal(size=A.shape[0]) * float(np.abs(A.diagonal()).max())
    return A, rhs


def dense_reference(A, rhs):
    return np.linalg.solve(A.toarray(), rhs)


@pytest.mark.parametrize("seed", SEEDS)
@pytest.mark.parametrize("topology", TOPOLOGIES)
@pytest.mark.parametrize("method", METHODS)
def test_every_method_matches_dense_lapack(method, topology, seed):
    """Each solver path solves the nodal system to 1e-9 relative (LAPACK reference)."""
    net = synthetic_network(400, topology, seed=seed)
    A, rhs = nodal_system(net, seed)
    ref = dense_reference(A, rhs)
    f = Factorization(method)
    if method == "tree" and topology != "tree":
        with pytest.raises(SolveError, match="without loops"):
            f.solve(A, rhs)
        return
    x = f.solve(A, rhs)
    assert f.method == method
    assert np.abs(x - ref).max() <= 1e-9 * np.abs(ref).max()


@pytest.mark.parametrize("topology, expected", [("tree", True), ("local", False), ("long", False)])
def test_tree_path_is_chosen_for_trees_only(topology, expected):
    """auto picks the O(n) elimination exactly when the free-node graph is a forest."""
    net = synthetic_network(1500, topology, seed=1618)
    A, rhs = nodal_system(net, 7)
    f = Factorization()
    f.solve(A, rhs)
    assert (f.method == "tree") is expected
    assert ("forest" in f.reason) is expected
    assert f.reason


def test_parallel_vessels_merge_and_keep_the_tree_path():
    """Two vessels between the same nodes are one edge: still a tree; conductances add.

    Two parallel tubes of conductance g1, g2 from a 100 Pa node to a node draining
    through a bed of conductance g3 to 0 Pa: p = 100 (g1 + g2) / (g1 + g2 + g3)
    (series-parallel circuit rule, common practice).
    """
    net = Network.build(nodes={"in": {"pressure_pa": 100.0}},
                        vessels=[{"id": "a", "from": "in", "to": "j", "length_m": 0.1, "radius_m": 1e-3},
                                 {"id": "b", "from": "in", "to": "j", "length_m": 0.2, "radius_m": 2e-3},
                                 {"id": "c", "from": "j", "to": "k", "length_m": 0.1, "radius_m": 1e-3},
                                 {"id": "d", "from": "k", "to": "j", "length_m": 0.3, "radius_m": 1e-3}],
                        beds=[{"id": "bed", "node": "k", "resistance_pa_s_m3": 1e8,
                               "outflow_pressure_pa": 0.0}])
    result = solve(net, method="tree")       # refused unless the merged graph is a tree
    assert result.solver.startswith("tree")
    mu = net.blood.viscosity_pa_s
    g = np.pi * net.vessels.radius_in_m ** 4 / (8 * mu * net.vessels.length_m)
    g_in, g_jk, g_bed = g[0] + g[1], g[2] + g[3], 1e-8
    # node k sees j through g_jk and ground through g_bed; j sees 100 Pa through g_in
    g_k = g_jk * g_bed / (g_jk + g_bed)
    p_j = 100 * g_in / (g_in + g_k)
    p_k = p_j * g_jk / (g_jk + g_bed)
    rows = {n: i for i, n in enumerate(net.nodes.ids)}
    assert result.pressure_pa[rows["j"]] == pytest.approx(p_j, rel=1e-12)
    assert result.pressure_pa[rows["k"]] == pytest.approx(p_k, rel=1e-12)


def test_forest_of_several_parts():
    """Fixed pressures that cut the tree into parts: each part is eliminated on its own."""
    net = synthetic_network(1500, "tree", seed=4242)
    pressure = net.nodes.pressure_pa.copy()
    pressure[[37, 111, 250]] = [9000.0, 8000.0, 7000.0]
    net = dataclasses.replace(net, nodes=dataclasses.replace(net.nodes, pressure_pa=pressure))
    A, rhs = nodal_system(net, 3)
    f = Factorization()
    x = f.solve(A, rhs)
    assert f.method == "tree" and f.structure.n_parts > 1
    ref = dense_reference(A, rhs)
    assert np.abs(x - ref).max() <= 1e-9 * np.abs(ref).max()


def test_deep_chain_uses_the_tree_order_without_a_pass_per_generation():
    """A chain deeper than MAX_TREE_LEVELS: still the tree method, in the tree's own order.

    Reference: a uniform resistor chain from 100 Pa to 0 Pa has a linear pressure
    profile (Ohm's law in series, common practice).
    """
    n = MAX_TREE_LEVELS + 500
    vessels = [{"id": f"v{i}", "from": f"n{i}", "to": f"n{i + 1}", "length_m": 0.01,
                "radius_m": 1e-3} for i in range(n)]
    net = Network.build(nodes={"n0": {"pressure_pa": 100.0}, f"n{n}": {"pressure_pa": 0.0}},
                        vessels=vessels)
    result = solve(net)
    assert result.solver.startswith("tree (tree order by SuperLU")
    expected = 100.0 * (1 - np.arange(n + 1) / n)
    assert np.abs(result.pressure_pa - expected).max() <= 1e-9 * 100


@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_complex_matrices(topology):
    """Complex symmetric (pulsatile-like) systems: tree elimination or SuperLU, never CHOLMOD."""
    net = synthetic_network(1500, topology, seed=5772)
    A, rhs = nodal_system(net, 11)
    rng = np.random.default_rng(99)
    A = A + sp.diags(1j * rng.uniform(0.01, 0.1, A.shape[0]) * np.abs(A.diagonal()))
    f = Factorization()
    x = f.solve(A, rhs.astype(complex))
    assert f.method == ("tree" if topology == "tree" else "superlu")
    ref = dense_reference(A, rhs)
    assert np.abs(x - ref).max() <= 1e-9 * np.abs(ref).max()


def test_unsymmetric_matrix_goes_to_superlu_and_cholmod_refuses():
    """A Jacobian with dq/dp_a != -dq/dp_b is unsymmetric: LU with pivoting (LAPACK reference)."""
    net = synthetic_network(1500, "local", seed=8128)
    A, rhs = nodal_system(net, 5)
    A = sp.csc_matrix(A)
    A.data = A.data * np.random.default_rng(17).uniform(0.9, 1.1, len(A.data))
    f = Factorization()
    x = f.solve(A, rhs)
    assert f.method == "superlu" and "unsymmetric" in f.reason
    ref = dense_reference(A, rhs)
    assert np.abs(x - ref).max() <= 1e-9 * np.abs(ref).max()
    if cholmod_available():
        with pytest.raises(SolveError, match="real symmetric"):
            Factorization("cholmod").solve(A, rhs)


@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_analysis_is_reused_for_new_values(topology):
    """A second matrix of the same pattern reuses the analysis and still solves exactly."""
    net = synthetic_network(300, topology, seed=1729)
    A, rhs = nodal_system(net, 2)
    f = Factorization()
    f.solve(A, rhs)
    structure = f.structure
    B = sp.csc_matrix(A)
    B.data = B.data * 1.0
    scale = np.random.default_rng(23).uniform(0.5, 2.0, B.shape[0])
    B = sp.csc_matrix(sp.diags(scale) @ B @ sp.diags(scale))
    x = f.solve(B, rhs)
    assert f.structure is structure and f.factorizations == 2
    ref = dense_reference(B, rhs)
    assert np.abs(x - ref).max() <= 1e-9 * np.abs(ref).max()


def test_new_pattern_is_analysed_again():
    f = Factorization()
    for topology in ("tree", "local"):
        A, rhs = nodal_system(synthetic_network(200, topology, seed=6174), 1)
        x = f.solve(A, rhs)
        ref = dense_reference(A, rhs)
        assert np.abs(x - ref).max() <= 1e-9 * np.abs(ref).max()
    assert f.method != "tree"


def _with_lesions(net: Network, seed: int) -> Network:
    rng = np.random.default_rng(seed)
    v = net.vessels
    reduction = np.full(len(v), np.nan)
    lesion_length = np.full(len(v), np.nan)
    rows = rng.choice(len(v), size=len(v) // 20, replace=False)
    reduction[rows] = rng.uniform(0.3, 0.8, len(rows))
    lesion_length[rows] = 0.3 * v.length_m[rows]
    return dataclasses.replace(net, vessels=dataclasses.replace(
        v, stenosis_reduction=reduction, stenosis_length_m=lesion_length))


@pytest.mark.parametrize("topology", TOPOLOGIES)
@pytest.mark.parametrize("method", METHODS)
def test_solve_agrees_across_methods_with_lesions(method, topology):
    """Newton with Young-Tsai lesions: every method reaches the same state (1e-9) and invariants hold."""
    net = _with_lesions(synthetic_network(600, topology, seed=1123), 58)
    reference = solve(net, method="superlu")
    if method == "tree" and topology != "tree":
        with pytest.raises(SolveError):
            solve(net, method=method)
        return
    result = solve(net, method=method)
    assert result.solver.startswith(method) and result.solver_reason
    assert reference.iterations > 1
    scale = np.abs(reference.pressure_pa).max()
    assert np.abs(result.pressure_pa - reference.pressure_pa).max() <= 1e-9 * scale
    assert_invariants(result)


def test_factorization_reused_across_samples():
    """Samples of one topology share the analysis; each equals a fresh solve (to 1e-9)."""
    net = synthetic_network(500, "local", seed=9001)
    shared = Factorization()
    rng = np.random.default_rng(31337)
    for _ in range(3):
        radius = net.vessels.radius_in_m * rng.uniform(0.8, 1.2, len(net.vessels))
        sample = dataclasses.replace(net, vessels=dataclasses.replace(
            net.vessels, radius_in_m=radius, radius_out_m=radius))
        reused = solve(sample, factorization=shared)
        fresh = solve(sample)
        scale = np.abs(fresh.pressure_pa).max()
        assert np.abs(reused.pressure_pa - fresh.pressure_pa).max() <= 1e-9 * scale
    assert shared.factorizations == 3


def test_solve_sparse_keeps_its_contract():
    """solve_sparse (used by other physics) still solves real and complex systems once."""
    A, rhs = nodal_system(synthetic_network(200, "long", seed=2020), 4)
    ref = dense_reference(A, rhs)
    assert np.abs(solve_sparse(A, rhs) - ref).max() <= 1e-9 * np.abs(ref).max()
    C = A + sp.diags(0.05j * np.abs(A.diagonal()))
    ref = dense_reference(C, rhs)
    assert np.abs(solve_sparse(C, rhs.astype(complex)) - ref).max() <= 1e-9 * np.abs(ref).max()


def test_unknown_method_is_refused():
    with pytest.raises(SolveError, match="unknown method"):
        Factorization("gauss")


@pytest.mark.parametrize("cholmod", [False, True])
@pytest.mark.parametrize("topology, expected", [("long", "amg"), ("local", "superlu"),
                                                ("tree", "tree")])
def test_auto_for_large_networks(monkeypatch, topology, expected, cholmod):
    """auto takes AMG only for large networks with long-range loops; local loops go to a
    direct solver (CHOLMOD when it imports)."""
    import vesselnet.linsolve as linsolve

    if expected == "amg" and not amg_available():
        pytest.skip("pyamg not installed")
    if cholmod and not cholmod_available():
        pytest.skip("scikit-sparse not installed")
    if cholmod and expected == "superlu":
        expected = "cholmod"
    monkeypatch.setattr(linsolve, "cholmod_available", lambda: cholmod)
    monkeypatch.setattr(linsolve, "AMG_AUTO_SIZE", 100)
    net = synthetic_network(3000, topology, seed=4711)
    A, rhs = nodal_system(net, 8)
    f = Factorization()
    x = f.solve(A, rhs)
    assert f.method == expected
    if expected == "superlu":
        assert "scikit-sparse is not installed" in f.reason
    ref = dense_reference(A, rhs)
    assert np.abs(x - ref).max() <= 1e-9 * np.abs(ref).max()


def test_tree_elimination_of_unsymmetric_values():
    """The elimination reads A[p, c] and A[c, p] separately: unsymmetric trees solve too."""
    A, rhs = nodal_system(synthetic_network(1500, "tree", seed=5150), 9)
    A = sp.csc_matrix(A)
    A.data = A.data * np.random.default_rng(21).uniform(0.8, 1.2, len(A.data))
    f = Factorization()
    x = f.solve(A, rhs)
    assert f.method == "tree"
    ref = dense_reference(A, rhs)
    assert np.abs(x - ref).max() <= 1e-9 * np.abs(ref).max()


def test_superlu_ordering_found_once_then_reused():
    """Long-range loops: the first SuperLU call finds an MMD ordering, the second reuses it."""
    A, rhs = nodal_system(synthetic_network(1500, "long", seed=6502), 10)
    f = Factorization("superlu")
    first = f.solve(A, rhs)
    assert f.ordering == "MMD_AT_PLUS_A, computed once"
    second = f.solve(A, rhs)
    ref = dense_reference(A, rhs)
    for x in (first, second):
        assert np.abs(x - ref).max() <= 1e-9 * np.abs(ref).max()


def test_small_systems_take_the_reference_path():
    """Below SMALL_SYSTEM unknowns auto is SuperLU with partial pivoting, bit for bit the
    one-off solve_sparse (the path every earlier result was computed with)."""
    from vesselnet.linsolve import SMALL_SYSTEM

    A, rhs = nodal_system(synthetic_network(300, "local", seed=1234), 6)
    assert A.shape[0] < SMALL_SYSTEM
    f = Factorization()
    x = f.solve(A, rhs)
    assert f.method == "superlu" and "small system" in f.reason
    assert f.ordering == "MMD_AT_PLUS_A, partial pivoting"
    ref = dense_reference(A, rhs)
    assert np.abs(x - ref).max() <= 1e-9 * np.abs(ref).max()


@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_pattern_structure_equals_the_derived_one(topology):
    """The assembly's transpose and diagonal maps (handed to the solver to skip one
    analysis) equal those the solver derives from the matrix alone; the reference is
    the definition, checked on the dense form: entry k of the CSC order sits at
    (row, col), its transpose at (col, row)."""
    from vesselnet.linsolve import Structure

    net = synthetic_network(3000, topology, seed=4242)
    groups = element_groups(net, np.full(len(net.vessels), net.blood.viscosity_pa_s))
    a = np.concatenate([g.a for g in groups])
    b = np.concatenate([g.b for g in groups])
    pattern = NodalPattern(len(net.nodes), a, b, np.isnan(net.nodes.pressure_pa))
    known, derived = pattern.structure, Structure(pattern.linear_matrix(np.ones(len(a))))
    np.testing.assert_array_equal(known.transpose, derived.transpose)
    np.testing.assert_array_equal(known.diag, derived.diag)
    assert (known.rows[known.transpose] == known.cols).all()
    assert (known.cols[known.transpose] == known.rows).all()
    assert (known.n_parts, known.is_forest) == (derived.n_parts, derived.is_forest)
    g = np.random.default_rng(77).uniform(0.5, 2.0, len(a))
    A = pattern.linear_matrix(g)
    rhs = np.random.default_rng(78).normal(size=A.shape[0])
    x = Factorization().solve(A, rhs, structure=pattern.structure)
    np.testing.assert_allclose(x, dense_reference(A, rhs), rtol=1e-9, atol=0)
