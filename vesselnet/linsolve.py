"""Linear solves of nodal systems: the solver chosen for the structure, analysis kept.

A :class:`Factorization` solves ``A x = b`` for a sequence of matrices that
share one sparsity pattern (the Newton steps of one solve, the samples of a
study on one topology).  The first matrix fixes the analysis: which method,
which ordering, the symbolic factorisation where the method has one; later
matrices reuse it.  Methods:

``tree``
    The free-node graph is a forest (each connected part a tree; parallel
    vessels merge into one edge): Gaussian elimination from the leaves to
    the roots, one generation at a time with numpy, then back-substitution.
    O(n), no fill, no ordering.  Used automatically for forests only.
``cholmod``
    Sparse Cholesky (CHOLMOD through scikit-sparse, optional) for real
    symmetric matrices: the nodal matrix of a passive network is symmetric
    positive definite.  The symbolic analysis is done once.
``superlu``
    Sparse LU (SuperLU, in scipy).  Real symmetric matrices are permuted once
    by a fill-reducing symmetric ordering and factorised in symmetric mode
    with that ordering; other matrices (complex, unsymmetric Jacobians) use
    SuperLU's ``MMD_AT_PLUS_A`` ordering with partial pivoting.
``amg``
    Smoothed-aggregation algebraic multigrid as a preconditioner for
    conjugate gradients (pyamg, optional), for mesh-like networks whose
    direct factors fill in; real symmetric matrices only.

The fill-reducing ordering for loops that stay local is "deepest first":
nodes in reverse breadth-first order from each part's first node, which is
fill-free on a tree and nearly so with local loops.  Loops that span the
tree get an approximate minimum degree ordering instead.

Examples
--------
>>> import numpy as np, scipy.sparse as sp
>>> A = sp.csc_matrix(np.array([[2.0, -1.0, 0.0], [-1.0, 2.0, -1.0], [0.0, -1.0, 2.0]]))
>>> f = Factorization("tree")
>>> np.round(f.solve(A, np.array([1.0, 0.0, 1.0])), 6)
array([1., 1., 1.])
>>> f.reason
'the free-node graph is a forest (3 nodes, 2 distinct edges, 1 part): O(n) elimination (requested)'
>>> f = Factorization()
>>> _ = f.solve(A, np.array([1.0, 0.0, 1.0]))
>>> f.method, f.reason
('superlu', 'a small system (3 nodes): sparse LU with partial pivoting, the reference path')
"""

from __future__ import annotations

import functools
import importlib.util

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import breadth_first_order, connected_components

from .errors import SolveError

METHODS = ("auto", "superlu", "tree", "cholmod", "amg")
MAX_TREE_LEVELS = 4000
"""Deeper forests (long unbranched chains) are eliminated by SuperLU in the
tree's own order: still fill-free, without one numpy pass per generation."""
LOCAL_SPAN = 0.002
"""Loops count as local when their ends lie within this fraction of the
nodes (at least 64) of each other in breadth-first order."""
SMALL_SYSTEM = 1000
"""Below this many unknowns ``auto`` (and ``superlu``) take SuperLU with partial pivoting,
the long-standing reference path: speed does not matter there, and results stay
identical to earlier versions bit for bit (coupled iterations can be that sensitive)."""
AMG_TOLERANCE = 1e-13
AMG_AUTO_SIZE = 200_000
"""``auto`` takes AMG (when pyamg imports) for networks this large whose loops span the
tree: measured here at 10^6 segments with 2 % long-range loops, AMG-CG took 11 s where
CHOLMOD with AMD ordering ran for minutes (the factor fills in)."""
AMG_MAX_ITERATIONS = 500


def cholmod_available() -> bool:
    """Whether scikit-sparse's CHOLMOD can be imported (the ``cholmod`` extra)."""
    return importlib.util.find_spec("sksparse") is not None


def amg_available() -> bool:
    """Whether pyamg can be imported (the ``amg`` extra)."""
    return importlib.util.find_spec("pyamg") is not None


class Structure:
    """What a sparsity pattern tells before any value: graph, forest or not, orderings.

    Parameters
    ----------
    A : scipy.sparse matrix, shape (n, n)
        Only its structure is used; it must be structurally symmetric with
        every diagonal entry present (a nodal matrix is).
    transpose, diag : ndarray of int, optional
        Where each stored entry's transpose sits and where the diagonal
        sits, in ``A``'s sorted CSC order, when the caller already knows
        (:class:`vesselnet.assembly.NodalPattern` does); else found here.
    """

    def __init__(self, A, *, transpose: np.ndarray | None = None, diag: np.ndarray | None = None):
        A = sp.csc_matrix(A)
        A.sort_indices()
        n = A.shape[0]
        self.n = n
        self.indptr, self.indices = A.indptr, A.indices
        if transpose is None:      # a caller's matrix: keep a structure of our own
            self.indptr, self.indices = A.indptr.copy(), A.indices.copy()
        # index arrays in the indices' own type (int32 up to 2^31 entries): half the memory,
        # and fresh memory is what large solves spend most on
        self.cols = np.repeat(np.arange(n, dtype=self.indices.dtype), np.diff(self.indptr))
        self.rows = self.indices
        nnz = len(self.rows)
        if transpose is None:
            # structurally symmetric: the CSR of the positions is the transpose map
            positions = sp.csc_matrix((np.arange(nnz, dtype=float), self.indices, self.indptr),
                                      shape=(n, n)).tocsr()
            positions.sort_indices()
            if not (np.array_equal(positions.indptr, self.indptr)
                    and np.array_equal(positions.indices, self.indices)):
                raise SolveError("linear solve: the matrix is not structurally symmetric; it is not a "
                                 "nodal matrix")
            transpose = positions.data.astype(self.indices.dtype)
        self.transpose = transpose
        if diag is None:
            diag = np.flatnonzero(self.rows == self.cols)
        if len(diag) != n:
            raise SolveError("linear solve: the matrix lacks diagonal entries; it is not a nodal "
                             "matrix")
        self.diag = diag
        self.n_edges = (nnz - n) // 2
        self.graph = sp.csr_matrix((np.ones(nnz), self.indices, self.indptr), shape=(n, n))
        # the graph is symmetric: its strongly connected parts are its parts, and
        # directed traversals need no transpose
        self.n_parts, self.part = connected_components(self.graph, directed=True,
                                                       connection="strong")
        self.is_forest = self.n_edges == n - self.n_parts
        self._bfs = None

    def same_pattern(self, A) -> bool:
        return (A.shape == (self.n, self.n) and len(A.indices) == len(self.indices)
                and np.array_equal(A.indptr, self.indptr) and np.array_equal(A.indices, self.indices))

    def bfs(self):
        """Breadth-first order and parents from each part's first node (parent -1 at roots)."""
        if self._bfs is None and self.n_parts == 1:     # one part: no joining node needed
            order, parent = breadth_first_order(self.graph, 0, directed=True,
                                                return_predecessors=True)
            parent = parent.astype(np.int64)
            parent[parent < 0] = -1
            self._bfs = (order, parent)
        if self._bfs is None:
            n = self.n
            first = np.full(self.n_parts, n, dtype=np.int64)
            np.minimum.at(first, self.part, np.arange(n))
            # one extra node joined to each part's first node; CSR built directly
            extra = np.zeros(n + 1, dtype=np.int64)
            extra[first + 1] = 1
            counts = np.diff(self.indptr) + extra[1:]
            indptr = np.concatenate([[0], np.cumsum(counts), [0]])
            indptr[-1] = indptr[-2] + self.n_parts
            indices = np.empty(indptr[-1], dtype=np.int32)
            fill = indptr[:-1].copy()
            ends = fill[1:]
            # existing entries of each row first, then the link to the extra node
            row_of = self.cols
            offset = np.arange(len(row_of)) - self.indptr[row_of]
            indices[indptr[row_of] + offset] = self.indices
            indices[ends[first] - 1] = n
            indices[indptr[n]:] = first
            extended = sp.csr_matrix((np.ones(len(indices)), indices, indptr), shape=(n + 1, n + 1))
            order, parent = breadth_first_order(extended, n, directed=True,
                                                return_predecessors=True)
            order = order[1:]
            parent = parent[:n].astype(np.int64)
            parent[parent == n] = -1
            self._bfs = (order, parent)
        return self._bfs

    @functools.cached_property
    def local_loops(self) -> bool:
        """Whether (99 % of) the loops close within a short stretch of breadth-first order."""
        return self.loops_are_local()

    def loops_are_local(self) -> bool:
        """Whether every loop closes within a short stretch of breadth-first order."""
        order, parent = self.bfs()
        position = np.empty(self.n, dtype=np.int64)
        position[order] = np.arange(self.n)
        off = self.rows < self.cols
        r, c = self.rows[off], self.cols[off]
        tree = (parent[r] == c) | (parent[c] == r)
        span = np.abs(position[r[~tree]] - position[c[~tree]])
        limit = max(64, LOCAL_SPAN * self.n)
        return bool(len(span) == 0 or np.quantile(span, 0.99) <= limit)

    def deepest_first(self) -> np.ndarray:
        """Reverse breadth-first order: every node before its parent."""
        return self.bfs()[0][::-1].copy()

    def is_symmetric(self, data) -> bool:
        return not np.iscomplexobj(data) and bool(np.array_equal(data, data[self.transpose]))


class Factorization:
    """Solve nodal systems of one sparsity pattern, keeping the analysis between calls.

    Parameters
    ----------
    method : {'auto', 'superlu', 'tree', 'cholmod', 'amg'}
        ``auto``: SuperLU with partial pivoting below ``SMALL_SYSTEM`` unknowns;
        ``tree`` for a forest; else ``amg`` for large real
        symmetric systems whose loops span the network, when pyamg is
        installed; else ``cholmod`` for real symmetric matrices when
        scikit-sparse is installed; else ``superlu``.  An
        explicit method that cannot handle a matrix (``tree`` on a graph with
        loops, ``cholmod`` or ``amg`` on a complex or unsymmetric matrix, a
        missing optional package) raises :class:`~vesselnet.errors.SolveError`.

    Attributes
    ----------
    method : str
        The method that ran last ('' before the first solve).
    reason : str
        Why it was chosen, in words.
    ordering : str
        The fill-reducing ordering used.
    """

    def __init__(self, method: str = "auto"):
        if method not in METHODS:
            raise SolveError(f"linear solve: unknown method {method!r}; use one of "
                             + ", ".join(METHODS))
        self.requested = method
        self.method = ""
        self.reason = ""
        self.ordering = ""
        self.structure: Structure | None = None
        self._state: dict = {}
        self._pivoting = False
        self.factorizations = 0

    @property
    def description(self) -> str:
        """``method (ordering)``, as results report it."""
        if not self.method:
            return "none (no free nodes)"
        return f"{self.method} ({self.ordering})" if self.ordering else self.method

    def solve(self, A, rhs: np.ndarray, structure: Structure | None = None) -> np.ndarray:
        """Solve ``A x = rhs``; the first call (or a new pattern) does the analysis.

        Parameters
        ----------
        A : scipy.sparse matrix, shape (n, n)
            A nodal matrix, real or complex.
        rhs : ndarray, shape (n,)
        structure : Structure, optional
            ``A``'s structure, when the caller keeps one (it is then trusted).

        Returns
        -------
        ndarray, shape (n,)
        """
        A = sp.csc_matrix(A)
        rhs = np.asarray(rhs)
        if A.shape[0] == 0:
            return np.zeros(0, dtype=np.result_type(A.dtype, rhs.dtype))
        A.sort_indices()
        if self.structure is None or (structure is not self.structure
                                      and not self.structure.same_pattern(A)):
            self.structure = structure if structure is not None else Structure(A)
            self._state = {}
            self.method = ""
        s = self.structure
        data = A.data
        symmetric = s.is_symmetric(data)
        self._pivoting = False
        method, reason = self._choose(s, symmetric, np.iscomplexobj(data) or np.iscomplexobj(rhs))
        if method != self.method:
            self._state = {}
        self.method, self.reason = method, reason
        self.factorizations += 1
        return getattr(self, f"_solve_{method}")(s, data, rhs, symmetric)

    def _choose(self, s: Structure, symmetric: bool, complex_: bool) -> tuple[str, str]:
        forest = (f"the free-node graph is a forest ({s.n} nodes, {s.n_edges} distinct edges, "
                  f"{s.n_parts} part{'s' if s.n_parts != 1 else ''})")
        loops = f"the free-node graph has {s.n_edges - s.n + s.n_parts} independent loops"
        kind = "complex" if complex_ else "real symmetric" if symmetric else "unsymmetric"
        m = self.requested
        if m == "tree":
            if not s.is_forest:
                raise SolveError(f"linear solve: method 'tree' needs a network without loops, but {loops}; "
                                 "use method 'auto'")
            return "tree", forest + ": O(n) elimination (requested)"
        if m == "cholmod":
            if not cholmod_available():
                raise SolveError("linear solve: method 'cholmod' needs scikit-sparse; install the "
                                 "'cholmod' extra (it builds against Debian's libsuitesparse-dev)")
            if not symmetric:
                raise SolveError(f"linear solve: method 'cholmod' needs a real symmetric matrix, got a "
                                 f"{kind} one; use 'superlu'")
            return "cholmod", f"requested; the matrix is {kind}"
        if m == "amg":
            if not amg_available():
                raise SolveError("linear solve: method 'amg' needs pyamg; install the 'amg' extra")
            if not symmetric:
                raise SolveError(f"linear solve: method 'amg' needs a real symmetric matrix, got a "
                                 f"{kind} one; use 'superlu'")
            return "amg", f"requested; the matrix is {kind}"
        if m == "superlu":
            self._pivoting = s.n < SMALL_SYSTEM
            return "superlu", f"requested; the matrix is {kind}"
        if s.n < SMALL_SYSTEM:
            self._pivoting = True
            return "superlu", (f"a small system ({s.n} nodes): sparse LU with partial pivoting, "
                               "the reference path")
        if s.is_forest:
            return "tree", forest + ": O(n) elimination, no fill"
        if symmetric and s.n >= AMG_AUTO_SIZE and amg_available() and not s.local_loops:
            return "amg", (f"{loops} spanning the network ({s.n} nodes): direct factors fill in "
                           "(minutes at 10^6), multigrid does not")
        if symmetric and cholmod_available():
            return "cholmod", f"{loops} and the matrix is real symmetric (positive definite)"
        why = "scikit-sparse is not installed" if symmetric else f"the matrix is {kind}"
        return "superlu", f"{loops}; sparse LU because {why}"

    # -- orderings --------------------------------------------------------

    def _symmetric_ordering(self, s: Structure) -> tuple[str, np.ndarray | None]:
        """('deepest-first', perm) for forests and local loops, else ('amd', None)."""
        if s.is_forest or s.local_loops:
            return "deepest-first", s.deepest_first()
        return "amd", None

    # -- methods ----------------------------------------------------------

    def _solve_tree(self, s: Structure, data, rhs, symmetric):
        plan = self._state.get("tree")
        if plan is None:
            plan = self._state["tree"] = _TreePlan(s)
        if plan.levels is None:
            self.ordering = f"tree order by SuperLU, {plan.depth} generations"
            return self._solve_superlu_natural(s, data, rhs, s.deepest_first(), "tree")
        self.ordering = f"{len(plan.levels)} generations"
        return plan.solve(data, rhs)

    def _solve_superlu(self, s: Structure, data, rhs, symmetric):
        import scipy.sparse.linalg as spla

        d = _scaling(s, data)
        scaled = data * d[s.rows] * d[s.cols]
        if symmetric and not self._pivoting:
            if "perm" not in self._state:
                name, perm = self._symmetric_ordering(s)
                if perm is None:
                    # the first factorisation finds the ordering; later ones reuse it
                    self.ordering = "MMD_AT_PLUS_A, computed once"
                    A = sp.csc_matrix((scaled, s.indices, s.indptr), shape=(s.n, s.n))
                    lu = spla.splu(A, permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.0,
                                   options={"SymmetricMode": True})
                    self._state["perm"] = (self.ordering, np.argsort(lu.perm_c).astype(np.int64))
                    return d * lu.solve(d * rhs)
                self._state["perm"] = (name, np.asarray(perm, dtype=np.int64))
            name, perm = self._state["perm"]
            self.ordering = name
            return d * self._solve_superlu_natural(s, scaled, d * rhs, perm, "superlu")
        self.ordering = "MMD_AT_PLUS_A, partial pivoting"
        A = sp.csc_matrix((scaled, s.indices, s.indptr), shape=(s.n, s.n))
        lu = spla.splu(A, permc_spec="MMD_AT_PLUS_A")
        return d * lu.solve(d * rhs)

    def _solve_superlu_natural(self, s: Structure, data, rhs, perm, key):
        """SuperLU on ``P A P^T`` for a fixed elimination order ``perm``, diagonal pivots."""
        import scipy.sparse.linalg as spla

        permuted = self._state.get(("permuted", key))
        if permuted is None:
            permuted = self._state[("permuted", key)] = _Permuted(s, perm)
        B = permuted.matrix(data)
        # little fill in these orders: small supernodes factorise 2-3 times faster here
        # (10^6 nodes with local loops: 0.19 s against 0.49 s with SuperLU's defaults)
        lu = spla.splu(B, permc_spec="NATURAL", diag_pivot_thresh=0.0, relax=1, panel_size=1,
                       options={"SymmetricMode": True})
        out = np.empty(s.n, dtype=np.result_type(B.dtype, rhs.dtype))
        out[permuted.perm] = lu.solve(rhs[permuted.perm])
        return out

    def _solve_cholmod(self, s: Structure, data, rhs, symmetric):
        from sksparse.cholmod import CholmodNotPositiveDefiniteError, analyze

        d = _scaling(s, data)
        scaled = data * d[s.rows] * d[s.cols]
        state = self._state
        if "factor" not in state:
            name, perm = self._symmetric_ordering(s)
            if perm is not None:
                state["permuted"] = _Permuted(s, perm)
                B = state["permuted"].matrix(scaled)
                state["factor"] = analyze(B, ordering_method="natural")
                self.ordering = name
            else:
                A = sp.csc_matrix((scaled, s.indices, s.indptr), shape=(s.n, s.n))
                state["factor"] = analyze(A, ordering_method="amd")
                self.ordering = "amd"
        permuted = state.get("permuted")
        B = permuted.matrix(scaled) if permuted else sp.csc_matrix((scaled, s.indices, s.indptr),
                                                                   shape=(s.n, s.n))
        factor = state["factor"]
        try:
            factor.cholesky_inplace(B)
        except CholmodNotPositiveDefiniteError as exc:
            raise SolveError(f"linear solve: CHOLMOD found the matrix not positive definite ({exc}); "
                             "use method 'superlu'") from exc
        b = d * rhs
        if permuted:
            out = np.empty(s.n, dtype=float)
            out[permuted.perm] = factor(b[permuted.perm])
        else:
            out = factor(b)
        return d * out

    def _solve_amg(self, s: Structure, data, rhs, symmetric):
        import pyamg

        d = _scaling(s, data)
        A = sp.csr_matrix(sp.csc_matrix((data * d[s.rows] * d[s.cols], s.indices, s.indptr),
                                        shape=(s.n, s.n)))
        # Gershgorin ('local') weights for the prolongation smoother: no eigenvalue
        # estimate, a tenth of the set-up time, the same convergence here
        hierarchy = pyamg.smoothed_aggregation_solver(A, symmetry="symmetric",
                                                      smooth=("jacobi", {"weighting": "local"}))
        residuals: list[float] = []
        b = d * rhs
        x = hierarchy.solve(b, tol=AMG_TOLERANCE, accel="cg", maxiter=AMG_MAX_ITERATIONS,
                            residuals=residuals)
        self.ordering = f"smoothed aggregation, {len(hierarchy.levels)} levels, CG {len(residuals) - 1} iterations"
        if residuals and residuals[-1] > 1e3 * AMG_TOLERANCE * max(np.linalg.norm(b), 1e-300):
            raise SolveError(f"linear solve: AMG-preconditioned CG stopped at relative residual "
                             f"{residuals[-1] / max(np.linalg.norm(b), 1e-300):.1e}; use method "
                             "'superlu' or 'cholmod'")
        return d * x


def _scaling(s: Structure, data) -> np.ndarray:
    """``diag(|A_ii|)^(-1/2)``: conductances span many decades."""
    diag = np.abs(data[s.diag])
    return 1.0 / np.sqrt(np.where(diag > 0, diag, 1.0))


class _Permuted:
    """The structure of ``P A P^T`` for a fixed order, and where each value goes."""

    def __init__(self, s: Structure, perm: np.ndarray):
        n = s.n
        self.perm = perm
        inverse = np.empty(n, dtype=np.int64)
        inverse[perm] = np.arange(n)
        key = inverse[s.cols] * n + inverse[s.rows]
        self.source = np.argsort(key, kind="stable")
        sorted_key = key[self.source]
        self.indices = (sorted_key % n).astype(np.int32)
        self.indptr = np.concatenate([[0], np.cumsum(np.bincount(sorted_key // n, minlength=n))]
                                     ).astype(np.int32)
        self.n = n

    def matrix(self, data) -> sp.csc_matrix:
        return sp.csc_matrix((data[self.source], self.indices, self.indptr), shape=(self.n, self.n))


class _TreePlan:
    """Generations of a forest, deepest first, with the matrix entries each step reads.

    Elimination of node ``c`` into its parent ``p`` (leaves first)::

        d_p <- d_p - A[p, c] A[c, p] / d_c        y_p <- y_p - A[p, c] y_c / d_c

    then roots ``x_r = y_r / d_r`` and, root to leaves, ``x_c = (y_c - A[c, p] x_p) / d_c``.
    No pivoting: nodal matrices are diagonally dominant.
    """

    def __init__(self, s: Structure):
        order, parent = s.bfs()
        n = s.n
        self.n = n
        position = np.empty(n, dtype=np.int64)
        position[order] = np.arange(n)
        # generations: contiguous runs of the breadth-first order
        parent_position = np.where(parent[order] >= 0, position[np.maximum(parent[order], 0)], -1)
        start, stop = 0, int(np.searchsorted(parent_position, 0, side="left"))
        bounds = [(start, stop)]
        while stop < n and len(bounds) <= MAX_TREE_LEVELS:
            nxt = int(np.searchsorted(parent_position, stop, side="left"))
            bounds.append((stop, nxt))
            stop = nxt
        self.depth = len(bounds)
        if stop < n:
            self.levels = None
            return
        # entries A[c, parent] (row c, column p) and A[parent, c] for every non-root c
        off = s.rows != s.cols
        upper = off & (s.rows == parent[s.cols])     # row = parent of column c: A[p, c]
        self.k_pc = np.full(n, -1, dtype=np.int64)
        self.k_pc[s.cols[upper]] = np.flatnonzero(upper)
        self.k_cp = np.where(self.k_pc >= 0, s.transpose[np.maximum(self.k_pc, 0)], -1)
        self.k_diag = s.diag
        self.parent = parent
        self.levels = []
        for lo, hi in bounds[1:]:
            nodes = order[lo:hi]
            self.levels.append((nodes, parent[nodes]))
        self.roots = order[bounds[0][0]:bounds[0][1]]

    def solve(self, data, rhs):
        dtype = np.result_type(data.dtype, rhs.dtype)
        d = data[self.k_diag].astype(dtype)
        y = rhs.astype(dtype)
        a_pc = np.zeros(self.n, dtype=dtype)
        a_cp = np.zeros(self.n, dtype=dtype)
        has = self.k_pc >= 0
        a_pc[has] = data[self.k_pc[has]]
        a_cp[has] = data[self.k_cp[has]]
        for nodes, parents in reversed(self.levels):
            w = a_pc[nodes] / d[nodes]
            np.subtract.at(d, parents, w * a_cp[nodes])
            np.subtract.at(y, parents, w * y[nodes])
        if not (np.abs(d) > 0).all() or not np.isfinite(d).all():
            raise SolveError("linear solve: a zero pivot in the tree elimination; the system is "
                             "singular (a part without a pressure reference?)")
        x = np.empty(self.n, dtype=dtype)
        x[self.roots] = y[self.roots] / d[self.roots]
        for nodes, parents in self.levels:
            x[nodes] = (y[nodes] - a_cp[nodes] * x[parents]) / d[nodes]
        return x
