"""Harmonic nodal solves: every linear solver path gives the dense answer of the same system.

Reference: ``numpy.linalg.solve`` (LAPACK ``zgesv``, a general-purpose reference
tool) on the complex nodal system assembled densely, element by element, from the
same two-port stamps (Kirchhoff's current law: at every free node the flows
leaving it into its elements, d_aa P_a + d_ab P_b, sum to the injected flow;
fixed pressures and grounded ends move to the right-hand side).  The solver
under test is the sparse route: tree elimination, SuperLU with partial pivoting,
the refinement step, several source columns at once, the analysis kept across
frequencies.  Networks are the seeded synthetic ones of :mod:`vesselnet.synthetic`
with a wall on every vessel (lossy transmission lines).
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from vesselnet.harmonic import HarmonicNetwork, solve_harmonic
from vesselnet.linsolve import SMALL_SYSTEM
from vesselnet.model import Network
from vesselnet.solve import solve
from vesselnet.synthetic import synthetic_network

OMEGA1 = 2 * np.pi * 70 / 60
"""First harmonic of a 70 bpm heart rate (rad/s)."""


def walled(segments: int, topology: str, seed: int) -> Network:
    """A synthetic network with thin elastic walls (h = 0.1 r, E = 0.5 MPa) on every vessel."""
    net = synthetic_network(segments, topology, seed=seed)
    v = net.vessels
    return dataclasses.replace(net, vessels=dataclasses.replace(
        v, wall_thickness_m=0.1 * v.radius_in_m, wall_modulus_pa=np.full(len(v), 0.5e6)))


def dense_solution(system: HarmonicNetwork, omega: float, injection, pressure, ground):
    """Pressures of the free nodes for each source column, by a dense LAPACK solve."""
    d_aa, d_ab, d_ba, d_bb = system.stamps(omega)
    n = len(system.network.nodes)
    Y = np.zeros((n, n), dtype=complex)
    rhs = injection.astype(complex)
    for e, (a, b) in enumerate(zip(system.a, system.b)):
        Y[a, a] += d_aa[e]
        if b >= 0:
            Y[a, b] += d_ab[e]
            Y[b, a] += d_ba[e]
            Y[b, b] += d_bb[e]
        else:                                  # grounded end: its pressure is known
            rhs[a] -= d_ab[e] * ground[e]
    fixed, free = system.fixed, system.free
    known = np.where(fixed[:, None], pressure, 0.0)
    rhs = rhs - Y[:, fixed] @ known[fixed]
    return np.linalg.solve(Y[np.ix_(free, free)], rhs[free])


def sources(system: HarmonicNetwork, seed: int):
    """Two columns: a pressure phasor at the fixed inlet; a flow injected at a random free node."""
    rng = np.random.default_rng(seed)
    n, n_el = len(system.network.nodes), len(system.a)
    injection = np.zeros((n, 2), dtype=complex)
    pressure = np.zeros((n, 2), dtype=complex)
    ground = np.zeros((n_el, 2), dtype=complex)
    pressure[system.fixed, 0] = 1.3e3 + 4.0e2j
    injection[rng.choice(np.flatnonzero(system.free)), 1] = 1e-6 - 2e-7j
    ground[system.n_vessel_elements:, 1] = rng.normal(size=n_el - system.n_vessel_elements) * 50.0
    return injection, pressure, ground


PATHS = [
    # (segments, topology, requested method, method that must run)
    pytest.param(1500, "tree", "auto", "tree", id="tree-auto"),
    pytest.param(1500, "local", "auto", "superlu", id="local-auto"),
    pytest.param(1500, "long", "auto", "superlu", id="long-auto"),
    pytest.param(400, "tree", "auto", "superlu", id="small-tree-superlu"),
    pytest.param(400, "tree", "tree", "tree", id="small-tree-requested"),
    pytest.param(400, "long", "superlu", "superlu", id="small-long-superlu"),
]


@pytest.mark.parametrize("segments, topology, method, expected", PATHS)
def test_every_path_matches_a_dense_lapack_solve(segments, topology, method, expected):
    """At several harmonics, both source columns equal the dense solution to 1e-9, the
    method that ran is reported, and the analysis made at the first frequency is kept."""
    net = walled(segments, topology, seed=8191)
    system = HarmonicNetwork(net, solve(net), method=method)
    injection, pressure, ground = sources(system, 131)
    structure = None
    for harmonic in (1, 4, 15):
        omega = harmonic * OMEGA1
        p, q_from, q_to, imbalance = system.solve(omega, injection, pressure, ground)
        assert system.solver.startswith(expected) and system.factorization.reason
        structure = structure or system.factorization.structure
        assert system.factorization.structure is structure
        reference = dense_solution(system, omega, injection, pressure, ground)
        for j in range(2):
            scale = np.abs(reference[:, j]).max()
            assert np.abs(p[system.free, j] - reference[:, j]).max() <= 1e-9 * scale
        assert (imbalance <= 1e-9 * np.abs(q_from).max(axis=0)).all()


def test_the_networks_sit_on_the_intended_side_of_small_system():
    assert len(walled(1500, "tree", 8191).nodes) > SMALL_SYSTEM > len(walled(400, "tree", 8191).nodes)


def test_zero_hertz_on_the_tree_path_is_the_steady_solution():
    """At 0 Hz with the network's own sources the harmonic system is the steady linear one,
    here eliminated as a tree: pressures and flows equal the steady solve (to 1e-9)."""
    net = walled(1500, "tree", seed=127)
    steady = solve(net)
    p, q_in, _, q_bed = solve_harmonic(net, 0.0, steady=steady)
    assert np.abs(p - steady.pressure_pa).max() <= 1e-9 * np.abs(steady.pressure_pa).max()
    flow_scale = np.abs(steady.vessel_flow_m3_s).max()
    assert np.abs(q_in - steady.vessel_flow_m3_s).max() <= 1e-9 * flow_scale
    assert np.abs(q_bed - steady.bed_flow_m3_s).max() <= 1e-9 * flow_scale
