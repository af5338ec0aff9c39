"""Sparse nodal systems of two-terminal elements, with a structure built once.

Every element (a vessel, a bed, a lesion, a graft; real for steady work,
complex for one harmonic of pulsatile work) joins node ``a`` to node ``b``,
or node ``a`` to ground (``b = -1``, a fixed reference pressure).  Each
contributes a 2x2 stamp to the nodal matrix::

    row a: [ d_aa  d_ab ]        for a linear conductance g:  [ g  -g ]
    row b: [ d_ba  d_bb ]                                      [-g   g ]

Rows and columns of fixed-pressure nodes are dropped: the matrix is that of
the free nodes only.  :class:`NodalPattern` fixes the sparsity structure once
per topology; every later matrix (a Newton step, a new sample, another
frequency) is a single ``bincount`` into it.

Examples
--------
>>> import numpy as np
>>> pattern = NodalPattern(3, np.array([0, 1]), np.array([1, 2]), free=np.array([False, True, False]))
>>> A = pattern.linear_matrix(np.array([2.0, 3.0]))
>>> A.toarray()
array([[5.]])
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp


class NodalPattern:
    """Sparsity structure of the free-node system for a fixed set of elements.

    Parameters
    ----------
    n_nodes : int
        Number of nodes.
    a, b : ndarray of int, shape (m,)
        Element terminals; ``b = -1`` for an element to ground.
    free : ndarray of bool, shape (n_nodes,)
        True for nodes whose pressure is unknown.
    """

    def __init__(self, n_nodes: int, a: np.ndarray, b: np.ndarray, free: np.ndarray):
        self.n_nodes = int(n_nodes)
        self.a = np.asarray(a, dtype=np.int64)
        self.b = np.asarray(b, dtype=np.int64)
        self.free = np.asarray(free, dtype=bool)
        self.free_nodes = np.flatnonzero(self.free)
        self.n_free = len(self.free_nodes)
        row_of = np.full(self.n_nodes + 1, -1, dtype=np.int64)  # index n_nodes = ground
        row_of[self.free_nodes] = np.arange(self.n_free)
        self.row_of = row_of
        ra, rb = row_of[self.a], row_of[self.b]
        # stamp order: aa, ab, ba, bb; a stamp is kept when its row and column are free
        free_a, free_b = ra >= 0, rb >= 0
        both = free_a & free_b
        keep = np.concatenate([free_a, both, both, free_b])
        self._keep = keep
        slot, self._indices, self._indptr = _structure(self.n_free, ra, rb)
        self._slot = slot[keep]
        self._nnz = len(self._indices)

    def matrix(self, d_aa, d_ab, d_ba, d_bb) -> sp.csc_matrix:
        """The free-node matrix from per-element stamps (real or complex)."""
        values = np.concatenate([d_aa, d_ab, d_ba, d_bb])[self._keep]
        if np.iscomplexobj(values):
            data = (np.bincount(self._slot, values.real, self._nnz)
                    + 1j * np.bincount(self._slot, values.imag, self._nnz))
        else:
            data = np.bincount(self._slot, values, self._nnz)
        return sp.csc_matrix((data, self._indices, self._indptr), shape=(self.n_free, self.n_free))

    def linear_matrix(self, g) -> sp.csc_matrix:
        """The matrix of linear conductances ``g`` (one per element)."""
        g = np.asarray(g)
        return self.matrix(g, -g, -g, g)

    def node_sum(self, q_out_of_a, q_into_b=None) -> np.ndarray:
        """Net flow out of every node: ``+q`` at ``a``, ``-q`` at ``b`` (ground ignored).

        ``q_into_b`` defaults to ``q_out_of_a`` (an element that stores nothing).
        """
        q_in = q_out_of_a if q_into_b is None else q_into_b
        grounded = self.b < 0
        b = np.where(grounded, self.n_nodes, self.b)
        out = np.bincount(self.a, weights=np.real(q_out_of_a), minlength=self.n_nodes + 1)
        out = out - np.bincount(b, weights=np.real(q_in), minlength=self.n_nodes + 1)
        if np.iscomplexobj(q_out_of_a) or np.iscomplexobj(q_in):
            imag = np.bincount(self.a, weights=np.imag(q_out_of_a), minlength=self.n_nodes + 1)
            imag = imag - np.bincount(b, weights=np.imag(q_in), minlength=self.n_nodes + 1)
            out = out + 1j * imag
        return out[: self.n_nodes]


def _structure(n: int, ra: np.ndarray, rb: np.ndarray):
    """CSC structure of the free-node matrix and the slot of every stamp.

    Entries are the diagonal (every free node) and both orientations of each
    distinct free-free edge, so parallel elements share their slots.  One sort
    of the edge keys; the rest is scipy's compiled COO -> CSC conversion.
    Returns the slots of the stamps aa, ab, ba, bb of every element (-1 where
    a row or column is not free), the indices and the indptr.
    """
    width = max(n, 1)
    both = (ra >= 0) & (rb >= 0) & (ra != rb)
    lo = np.minimum(ra[both], rb[both])
    hi = np.maximum(ra[both], rb[both])
    edge_key, edge = np.unique(lo * width + hi, return_inverse=True)
    u = len(edge_key)
    e_lo, e_hi = edge_key // width, edge_key % width
    diagonal = np.arange(n)
    csc = sp.csc_matrix((np.arange(n + 2 * u, dtype=float),
                         (np.concatenate([diagonal, e_lo, e_hi]),
                          np.concatenate([diagonal, e_hi, e_lo]))), shape=(n, n))
    csc.sort_indices()
    position = np.empty(n + 2 * u, dtype=np.int64)
    position[csc.data.astype(np.int64)] = np.arange(n + 2 * u)
    m = len(ra)
    aa = np.where(ra >= 0, position[np.maximum(ra, 0)], -1) if n else np.full(m, -1)
    bb = np.where(rb >= 0, position[np.maximum(rb, 0)], -1) if n else np.full(m, -1)
    ab = np.where((ra >= 0) & (ra == rb), aa, -1)
    ba = ab.copy()
    forward = ra[both] < rb[both]
    ab[both] = position[n + edge.reshape(-1) + np.where(forward, 0, u)]
    ba[both] = position[n + edge.reshape(-1) + np.where(forward, u, 0)]
    slot = np.concatenate([aa, ab, ba, bb])
    return slot, csc.indices.astype(np.int32), csc.indptr.astype(np.int32)


def solve_sparse(A: sp.spmatrix, rhs: np.ndarray) -> np.ndarray:
    """Solve ``A x = rhs`` once by SuperLU with symmetric diagonal scaling.

    Parameters
    ----------
    A : sparse matrix, shape (n, n)
        A nodal matrix (conductances span many decades, hence the scaling).
    rhs : ndarray, shape (n,)

    Returns
    -------
    ndarray
        The solution.

    Notes
    -----
    The matrix is scaled to ``D A D`` with ``D = diag(|A_ii|)^(-1/2)``.  Real
    symmetric matrices get a symmetric fill-reducing ordering and diagonal
    pivots; others SuperLU's ``MMD_AT_PLUS_A`` with partial pivoting (the
    default column ordering is tens of times slower on nodal matrices).  To
    solve many matrices of one pattern, or to choose the method, use
    :class:`vesselnet.linsolve.Factorization`.
    """
    from .linsolve import Factorization

    return Factorization("superlu").solve(A, rhs)
