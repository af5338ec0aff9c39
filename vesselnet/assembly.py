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
        rows = np.int32 if self.n_nodes < 2**31 - 1 else np.int64
        row_of = np.full(self.n_nodes + 1, -1, dtype=rows)  # index n_nodes = ground
        row_of[self.free_nodes] = np.arange(self.n_free, dtype=rows)
        self.row_of = row_of
        ra, rb = row_of[self.a], row_of[self.b]
        # stamp order: aa, ab, ba, bb; a stamp is kept when its row and column are free
        free_a, free_b = ra >= 0, rb >= 0
        both = free_a & free_b
        keep = np.concatenate([free_a, both, both, free_b])
        self._keep = keep
        self._slot, self._indices, self._indptr, self._transpose, self._diag = _structure(
            self.n_free, ra, rb)
        self._nnz = len(self._indices)
        self._linear_structure = None
        self._b_or_ground = np.where(self.b < 0, self.n_nodes, self.b)

    @property
    def structure(self):
        """The :class:`vesselnet.linsolve.Structure` of the matrices, built once from what
        the assembly already knows (pass it to ``Factorization.solve``)."""
        if self._linear_structure is None:
            from .linsolve import Structure

            self._linear_structure = Structure(
                sp.csc_matrix((np.zeros(self._nnz), self._indices, self._indptr),
                              shape=(self.n_free, self.n_free)),
                transpose=self._transpose, diag=self._diag)
        return self._linear_structure

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
        b = self._b_or_ground
        out = np.bincount(self.a, weights=np.real(q_out_of_a), minlength=self.n_nodes + 1)
        out = out - np.bincount(b, weights=np.real(q_in), minlength=self.n_nodes + 1)
        if np.iscomplexobj(q_out_of_a) or np.iscomplexobj(q_in):
            imag = np.bincount(self.a, weights=np.imag(q_out_of_a), minlength=self.n_nodes + 1)
            imag = imag - np.bincount(b, weights=np.imag(q_in), minlength=self.n_nodes + 1)
            out = out + 1j * imag
        return out[: self.n_nodes]


def _structure(n: int, ra: np.ndarray, rb: np.ndarray):
    """CSC structure of the free-node matrix and the slot of every kept stamp.

    Entries are the diagonal (every free node) and both orientations of each
    distinct free-free edge, so parallel elements share their slots.  The
    structure comes from scipy's compiled COO -> CSC conversion; only when
    it finds parallel elements (fewer entries than stamps) are the edges
    made distinct by a sort of their keys.  Returns, for the stamps kept by
    :class:`NodalPattern` (aa where ``a`` is free, ab and ba where both are,
    bb where ``b`` is), their slots; then the indices, the indptr, the slot
    of each entry's transpose and the slots of the diagonal.
    """
    free_a, free_b = ra >= 0, rb >= 0
    both = free_a & free_b
    ra_both, rb_both = ra[both], rb[both]
    loop = ra_both == rb_both                  # an element from a node to itself: diagonal only
    lo = np.minimum(ra_both[~loop], rb_both[~loop])
    hi = np.maximum(ra_both[~loop], rb_both[~loop])
    diagonal = np.arange(n, dtype=ra.dtype)

    def compressed(e_lo, e_hi):
        u = len(e_lo)
        entries = np.int32 if n + 2 * u < 2**31 - 1 else np.int64
        return sp.csc_matrix((np.arange(n + 2 * u, dtype=entries),
                              (np.concatenate([diagonal, e_lo, e_hi]),
                               np.concatenate([diagonal, e_hi, e_lo]))), shape=(n, n))

    csc = compressed(lo, hi)
    u = len(lo)
    edge = np.arange(u)
    if csc.nnz != n + 2 * u:                   # parallel elements: one edge for each pair of nodes
        width = max(n, 1)
        edge_key, edge = np.unique(lo.astype(np.int64) * width + hi, return_inverse=True)
        edge = edge.reshape(-1)
        u = len(edge_key)
        csc = compressed(edge_key // width, edge_key % width)
    index = csc.indices.dtype                  # int32 below 2^31 entries: half the memory
    position = np.empty(n + 2 * u, dtype=index)
    position[csc.data] = np.arange(n + 2 * u, dtype=index)
    forward = ra_both[~loop] < rb_both[~loop]
    ab = np.empty(len(ra_both), dtype=index)
    ba = np.empty(len(ra_both), dtype=index)
    ab[loop] = ba[loop] = position[ra_both[loop]]
    ab[~loop] = position[n + edge + np.where(forward, 0, u)]
    ba[~loop] = position[n + edge + np.where(forward, u, 0)]
    slot = np.concatenate([position[ra[free_a]], ab, ba, position[rb[free_b]]])
    transpose = np.empty(n + 2 * u, dtype=index)
    transpose[position] = position[np.concatenate([diagonal, n + u + np.arange(u), n + np.arange(u)])]
    return slot, csc.indices, csc.indptr, transpose, position[:n].copy()


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

    Raises
    ------
    SolveError
        The matrix is singular.

    Notes
    -----
    The matrix is scaled to ``D A D`` with ``D = diag(|A_ii|)^(-1/2)`` and
    factorised with the symmetric ordering ``MMD_AT_PLUS_A``: the default
    column ordering is tens of times slower on nodal matrices.  See
    :class:`ScaledFactor`, which also estimates the condition number.
    """
    return ScaledFactor(A).solve(rhs)


class ScaledFactor:
    """SuperLU factor of the symmetrically scaled matrix ``D A D`` (see :func:`solve_sparse`).

    Parameters
    ----------
    A : sparse matrix, shape (n, n)
        Real or complex.

    Raises
    ------
    SolveError
        The matrix is singular (a zero or infinite conductance, or a part
        with no pressure reference).

    Examples
    --------
    >>> import numpy as np, scipy.sparse as sp
    >>> A = sp.csc_matrix(np.array([[1e20, -1.0], [-1.0, 2.0]]))
    >>> factor = ScaledFactor(A)
    >>> x = factor.solve(np.array([1.0, 1.0]))
    >>> bool(np.allclose(A @ x, [1.0, 1.0], rtol=1e-14)), factor.condition_estimate() < 10
    (True, True)
    """

    def __init__(self, A: sp.spmatrix):
        import scipy.sparse.linalg as spla

        from .errors import SolveError

        self.n = A.shape[0]
        diag = np.abs(A.diagonal())
        with np.errstate(divide="ignore", invalid="ignore"):
            d = 1.0 / np.sqrt(np.where(diag > 0, diag, 1.0))
        self.d = d
        self.scaled = (sp.diags(d) @ A @ sp.diags(d)).tocsc()
        self.lu = None
        if self.n == 0:
            return
        if not np.isfinite(self.scaled.data).all():
            raise SolveError("the nodal matrix holds an infinite or undefined conductance; "
                             "check for zero or extreme lengths, radii and resistances")
        try:
            self.lu = spla.splu(self.scaled, permc_spec="MMD_AT_PLUS_A")
        except RuntimeError as exc:  # SuperLU: "Factor is exactly singular"
            raise SolveError(f"the nodal matrix is singular ({exc}); a part of the network is "
                             "held only by zero conductances, or extreme values underflow") from None

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        """The solution of ``A x = rhs``."""
        if self.n == 0:
            return np.zeros(0, dtype=rhs.dtype)
        return self.d * self.lu.solve(self.d * rhs)

    def condition_estimate(self) -> float:
        """1-norm condition number of the scaled matrix ``S = D A D``.

        ``||S||_1 * ||S^-1||_1``.  For a nodal matrix of positive
        conductances (an M-matrix: positive diagonal, off-diagonal entries
        <= 0, diagonally dominant) the inverse is entrywise nonnegative, so
        ``||S^-1||_1 = max(S^-T e)`` exactly, from one solve (Higham 2002,
        Accuracy and Stability of Numerical Algorithms, sec. 8.3).  Other
        matrices (complex, or laws that break the sign pattern) get Higham's
        block estimate (:func:`scipy.sparse.linalg.onenormest`).  A solution
        carries about ``16 - log10(condition)`` trustworthy digits.
        """
        import scipy.sparse.linalg as spla

        if self.n == 0:
            return 1.0
        S = self.scaled
        norm = float(abs(S).sum(axis=0).max())
        if _is_m_matrix(S, self.d):
            y = self.lu.solve(np.ones(self.n), trans="T")
            if (y > 0).all():
                return norm * float(y.max())
        if self.n <= 4:
            return float(np.linalg.cond(S.toarray(), 1))
        lu = self.lu
        trans = "H" if np.iscomplexobj(S.data) else "T"
        inverse = spla.LinearOperator((self.n, self.n), dtype=S.dtype, matvec=lu.solve,
                                      rmatvec=lambda x: lu.solve(x, trans=trans))
        return norm * float(spla.onenormest(inverse))


def _is_m_matrix(S: sp.csc_matrix, d: np.ndarray) -> bool:
    """Whether ``S = D A D`` comes from a real, diagonally dominant Z-matrix ``A``.

    Off-diagonal entries <= 0, diagonal > 0, and the column sums of ``A``,
    ``(S^T d^-1)_j / d_j``, nonnegative up to rounding.
    """
    if np.iscomplexobj(S.data):
        return False
    coo = S.tocoo()
    off = coo.row != coo.col
    if (coo.data[off] > 0).any() or (coo.data[~off] <= 0).any():
        return False
    sums = S.T @ (1.0 / d)
    return bool((sums >= -1e-12 * S.diagonal() / d).all())
