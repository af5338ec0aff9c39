"""The sparse nodal assembly against a slow, obvious dense one (an oracle written here)."""

import numpy as np
import pytest

from vesselnet.assembly import NodalPattern, solve_sparse
from vesselnet.elements import QuadraticLaw


def dense_matrix(n, a, b, g, free):
    """Stamp each element into a dense matrix one by one, then keep the free rows/columns."""
    G = np.zeros((n, n))
    for i, j, x in zip(a, b, g):
        G[i, i] += x
        if j >= 0:
            G[j, j] += x
            G[i, j] -= x
            G[j, i] -= x
    idx = np.flatnonzero(free)
    return G[np.ix_(idx, idx)]


@pytest.mark.parametrize("seed", [314159, 2718, 16180])
def test_sparse_pattern_equals_dense_stamping(seed):
    rng = np.random.default_rng(seed)
    n, m = 40, 90
    a = rng.integers(0, n, m)
    b = rng.integers(-1, n, m)          # -1: to ground
    b = np.where(b == a, -1, b)
    g = rng.uniform(1e-12, 1e-8, m)
    free = rng.random(n) < 0.8
    pattern = NodalPattern(n, a, b, free)
    np.testing.assert_allclose(pattern.linear_matrix(g).toarray(), dense_matrix(n, a, b, g, free),
                               rtol=1e-13, atol=0)


@pytest.mark.parametrize("parallel", [False, True])
def test_pattern_with_and_without_parallel_elements(parallel):
    """Both ways to the structure (distinct edges found by scipy alone, or parallel
    elements merged by a sort) against the dense stamping; elements from a node to
    itself stamp nothing off the diagonal, nor anything at all."""
    rng = np.random.default_rng(60221 + parallel)
    n = 300
    a = np.arange(1, n)
    b = rng.integers(0, a)                          # a tree: each node joined to an earlier one
    if parallel:
        a, b = np.concatenate([a, a[:50]]), np.concatenate([b, b[:50]])
    a, b = np.concatenate([a, [7, 9], a[:20]]), np.concatenate([b, [7, 9], np.full(20, -1)])
    g = rng.uniform(1e-12, 1e-8, len(a))
    free = rng.random(n) < 0.9
    pattern = NodalPattern(n, a, b, free)
    A = pattern.linear_matrix(g)
    np.testing.assert_allclose(A.toarray(), dense_matrix(n, a, b, g, free), rtol=1e-13, atol=1e-30)
    assert A.nnz == len(pattern.structure.rows)


def test_complex_stamps_fill_the_same_pattern():
    """Complex values (one harmonic of pulsatile work) stamp real and imaginary parts alike."""
    rng = np.random.default_rng(8080)
    n, m = 12, 30
    a, b = rng.integers(0, n, m), rng.integers(0, n, m)
    b = np.where(b == a, -1, b)
    g = rng.uniform(1, 2, m) + 1j * rng.uniform(-1, 1, m)
    free = np.ones(n, bool)
    pattern = NodalPattern(n, a, b, free)
    dense_re = dense_matrix(n, a, b, g.real, free)
    dense_im = dense_matrix(n, a, b, g.imag, free)
    np.testing.assert_allclose(pattern.linear_matrix(g).toarray(), dense_re + 1j * dense_im, rtol=1e-13)


def test_scaled_solve_handles_conductances_over_many_decades():
    """A chain whose conductances span 1e-16..1e-4 (SI, capillary to aorta) solves exactly."""
    g = np.logspace(-16, -4, 13)
    n = len(g) + 1
    a, b = np.arange(n - 1), np.arange(1, n)
    free = np.ones(n, bool)
    free[[0, -1]] = False
    pattern = NodalPattern(n, a, b, free)
    p0, p1 = 1.0e4, 0.0
    rhs = np.zeros(n - 2)
    rhs[0] += g[0] * p0
    rhs[-1] += g[-1] * p1
    p = solve_sparse(pattern.linear_matrix(g), rhs)
    q = (p0 - p1) / np.sum(1 / g)                       # series chain: one flow everywhere
    full = np.concatenate([[p0], p, [p1]])
    np.testing.assert_allclose(g * (full[:-1] - full[1:]), q, rtol=1e-9)


@pytest.mark.parametrize("dp", [-5e3, -1.0, 0.0, 1e-3, 2.0, 7e4])
def test_quadratic_law_inverts_its_pressure_drop(dp):
    """q(dP) solves r q + k q|q| = dP, reversed flow included (Q|Q|, never Q^2)."""
    law = QuadraticLaw(np.array([3e7]), np.array([4e12]))
    q, dqa, dqb = law.evaluate(np.array([dp]), np.array([0.0]))
    assert law.pressure_drop(q)[0] == pytest.approx(dp, rel=1e-12, abs=1e-12)
    eps = 1e-6 * max(abs(dp), 1.0)
    numeric = (law.evaluate(np.array([dp + eps]), np.array([0.0]))[0]
               - law.evaluate(np.array([dp - eps]), np.array([0.0]))[0]) / (2 * eps)
    assert dqa[0] == pytest.approx(numeric[0], rel=1e-6) and dqb[0] == -dqa[0]
