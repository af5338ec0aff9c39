"""Prepared steady solves of one topology: every linear solver path gives the dense answer.

Reference: ``numpy.linalg.solve`` (LAPACK ``gesv``, a general-purpose reference
tool) on the nodal system of the network assembled densely, element by element,
from the Hagen-Poiseuille conductance g = pi r^4 / (8 mu L) (Poiseuille 1840;
common practice) and each bed's 1/R to its outflow pressure, with the
fixed-pressure nodes moved to the right-hand side (Kirchhoff's current law).
Networks are the seeded synthetic ones of :mod:`vesselnet.synthetic`.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from vesselnet.linsolve import SMALL_SYSTEM, amg_available, cholmod_available
from vesselnet.model import Network
from vesselnet.sampling import PreparedSolver
from vesselnet.solve import solve
from vesselnet.synthetic import synthetic_network
from vesselnet.testing import assert_invariants

LOOPED_AUTO = "cholmod" if cholmod_available() else "superlu"
"""What ``auto`` takes for a looped network of 10^3 - 10^5 nodes (see :mod:`vesselnet.linsolve`)."""


def dense_pressures(net: Network) -> np.ndarray:
    """Nodal pressures of a linear network (no lesions, rigid walls) by a dense LAPACK solve."""
    v, beds, nodes = net.vessels, net.beds, net.nodes
    n = len(nodes)
    assert np.array_equal(v.radius_in_m, v.radius_out_m) and np.isnan(v.stenosis_reduction).all()
    g = np.pi * v.radius_in_m ** 4 / (8.0 * net.blood.viscosity_pa_s * v.length_m)
    Y = np.zeros((n, n))
    rhs = np.zeros(n)
    for a, b, ge in zip(v.from_node, v.to_node, g):
        Y[a, a] += ge
        Y[b, b] += ge
        Y[a, b] -= ge
        Y[b, a] -= ge
    for node, resistance, outflow in zip(beds.node, beds.resistance_pa_s_m3, beds.outflow_pressure_pa):
        Y[node, node] += 1.0 / resistance
        rhs[node] += outflow / resistance
    fixed = ~np.isnan(nodes.pressure_pa)
    free = ~fixed
    pressure = np.where(fixed, nodes.pressure_pa, 0.0)
    rhs = rhs - Y[:, fixed] @ pressure[fixed]
    pressure[free] = np.linalg.solve(Y[np.ix_(free, free)], rhs[free])
    return pressure


def scaled_radii(net: Network, seed: int) -> Network:
    """A Monte Carlo-like sample: every radius scaled by a random factor in [0.8, 1.2]."""
    radius = net.vessels.radius_in_m * np.random.default_rng(seed).uniform(0.8, 1.2, len(net.vessels))
    return dataclasses.replace(net, vessels=dataclasses.replace(
        net.vessels, radius_in_m=radius, radius_out_m=radius))


def _optional(method):
    if method == "cholmod":
        return [pytest.mark.skipif(not cholmod_available(), reason="scikit-sparse not installed")]
    if method == "amg":
        return [pytest.mark.skipif(not amg_available(), reason="pyamg not installed")]
    return []


PATHS = [
    # (segments, topology, requested method, method that must run, part of its ordering)
    pytest.param(1500, "tree", "auto", "tree", "generations", id="tree-auto"),
    pytest.param(1500, "local", "auto", LOOPED_AUTO, "", id="local-auto"),
    pytest.param(1500, "long", "auto", LOOPED_AUTO, "", id="long-auto"),
    pytest.param(1500, "local", "superlu", "superlu", "deepest-first", id="local-superlu"),
    pytest.param(1500, "long", "superlu", "superlu", "MMD_AT_PLUS_A, computed once", id="long-superlu"),
    pytest.param(1500, "long", "cholmod", "cholmod", "amd", id="long-cholmod", marks=_optional("cholmod")),
    pytest.param(1500, "long", "amg", "amg", "smoothed aggregation", id="long-amg", marks=_optional("amg")),
    pytest.param(400, "local", "auto", "superlu", "partial pivoting", id="small-superlu"),
]


@pytest.mark.parametrize("segments, topology, method, expected, ordering", PATHS)
def test_every_path_matches_a_dense_lapack_solve(segments, topology, method, expected, ordering):
    """Samples through one prepared solver: the method that ran is reported, and each
    sample's pressures equal the dense LAPACK solution of its own system to 1e-9."""
    net = synthetic_network(segments, topology, seed=2357)
    prepared = PreparedSolver(net, method=method)
    structure = prepared.factorization.structure
    for k in range(3):
        sample = scaled_radii(net, 610 + k)
        result = prepared.solve(sample)
        assert result.solver.startswith(expected) and ordering in result.solver
        assert result.solver_reason
        reference = dense_pressures(sample)
        scale = np.abs(reference).max()
        assert np.abs(result.pressure_pa - reference).max() <= 1e-9 * scale
        assert_invariants(result)
    assert prepared.factorization.structure is structure     # analysed once, at preparation
    assert prepared.factorization.factorizations == 1 + 3


def test_tree_auto_path_needs_a_large_enough_system():
    """The test networks above are on the intended side of SMALL_SYSTEM."""
    assert len(synthetic_network(1500, "tree", seed=2357).nodes) > SMALL_SYSTEM
    assert len(synthetic_network(400, "local", seed=2357).nodes) < SMALL_SYSTEM


def _with_lesions(net: Network, seed: int) -> Network:
    """Lesions of 40-80 % diameter reduction over 30 % of the length on every 25th vessel."""
    v = net.vessels
    every = np.arange(len(v)) % 25 == 7
    reduction = np.where(every, np.random.default_rng(seed).uniform(0.4, 0.8, len(v)), np.nan)
    return dataclasses.replace(net, vessels=dataclasses.replace(
        v, stenosis_reduction=reduction, stenosis_length_m=np.where(every, 0.3 * v.length_m, np.nan)))


@pytest.mark.parametrize("topology, expected", [("tree", "tree"), ("long", LOOPED_AUTO)])
def test_newton_with_lesions_through_each_path(topology, expected):
    """Young-Tsai lesions make Newton take several steps on the shared factorization:
    mass balance and every element law hold (vesselnet.testing invariants), and the
    pressures agree with an independent solve() to 1e-9."""
    net = _with_lesions(synthetic_network(1500, topology, seed=4711), 1299)
    prepared = PreparedSolver(net)
    for k in range(2):
        sample = scaled_radii(net, 88 + k)
        result = prepared.solve(sample)
        assert result.iterations > 1 and result.solver.startswith(expected)
        assert_invariants(result)
        fresh = solve(sample)
        scale = np.abs(fresh.pressure_pa).max()
        assert np.abs(result.pressure_pa - fresh.pressure_pa).max() <= 1e-9 * scale


@pytest.mark.parametrize("method", ["auto", "superlu"])
def test_a_sample_does_not_depend_on_the_samples_before_it(method):
    """Processes solve different samples first: the numbers must still be identical.

    A sample solved by a freshly prepared solver equals, bit for bit, the same sample
    solved after others (the long-range loops take the SuperLU path whose ordering
    comes from a first factorisation)."""
    net = synthetic_network(1500, "long", seed=1009)
    target = scaled_radii(net, 5)
    first = PreparedSolver(net, method=method).solve(target)
    busy = PreparedSolver(net, method=method)
    for k in range(2):
        busy.solve(scaled_radii(net, 70 + k))
    later = busy.solve(target)
    np.testing.assert_array_equal(first.pressure_pa, later.pressure_pa)
    np.testing.assert_array_equal(first.vessel_flow_m3_s, later.vessel_flow_m3_s)


def test_distensible_samples_share_the_factorization():
    """Distensible networks go through solve() with the prepared factorization: each sample
    satisfies the invariants and equals a fresh solve() to 1e-9."""
    net = synthetic_network(1200, "local", seed=3571)
    v = net.vessels
    net = dataclasses.replace(net, vessels=dataclasses.replace(
        v, wall_thickness_m=0.15 * v.radius_in_m, wall_modulus_pa=np.full(len(v), 2e5),
        distensible=np.ones(len(v), dtype=bool)))
    prepared = PreparedSolver(net)
    before = prepared.factorization.factorizations
    sample = scaled_radii(net, 17)
    result = prepared.solve(sample)
    assert prepared.factorization.factorizations > before
    assert "from the rigid-wall solution" in result.solver
    assert_invariants(result)
    fresh = solve(sample)
    scale = np.abs(fresh.pressure_pa).max()
    assert np.abs(result.pressure_pa - fresh.pressure_pa).max() <= 1e-9 * scale
