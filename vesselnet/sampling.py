"""Many steady solves of one topology: structure and ordering worked out once.

Monte Carlo samples change values (radii, lengths, bed resistances, lesion
severity), never which nodes are joined.  :class:`PreparedSolver` therefore
builds the sparse structure of the free-node system and its fill-reducing
ordering (minimum degree on A + A^T) once; each solve then only fills the
matrix with one ``bincount`` into a structure that is already in elimination
order and factorises it with that order (``permc_spec="NATURAL"``), skipping
the ordering step.  The Newton iteration (for lesions) is that of
:func:`vesselnet.solve.solve_groups`, with the same line search, convergence
test and result checks.

Examples
--------
>>> import dataclasses
>>> import numpy as np
>>> from vesselnet.model import Network
>>> net = Network.build(nodes={"r": {"pressure_pa": 13332.2}},
...     vessels=[{"id": "a", "from": "r", "to": "j", "length_m": 0.1, "radius_m": 0.002},
...              {"id": "b", "from": "j", "to": "t", "length_m": 0.1, "radius_m": 0.001},
...              {"id": "c", "from": "j", "to": "u", "length_m": 0.1, "radius_m": 0.001}],
...     beds=[{"id": "x", "node": "t", "resistance_pa_s_m3": 1e9},
...           {"id": "y", "node": "u", "resistance_pa_s_m3": 3e9}])
>>> prepared = PreparedSolver(net)
>>> wider = dataclasses.replace(net, vessels=dataclasses.replace(
...     net.vessels, radius_in_m=net.vessels.radius_in_m * 1.1,
...     radius_out_m=net.vessels.radius_out_m * 1.1))
>>> [round(float(s), 4) for s in prepared.solve(wider).bed_share]
[0.6917, 0.3083]
>>> from vesselnet.solve import solve
>>> [round(float(s), 4) for s in solve(wider).bed_share]
[0.6917, 0.3083]
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from .assembly import NodalPattern
from .errors import SolveError
from .model import Network
from .result import SteadyResult
from .solve import (DEFAULT_MAX_ITERATIONS, DEFAULT_TOLERANCE, element_groups, finish, flow_scale,
                    initial_pressure, line_search, non_convergence, solve)
from .topology import connected_parts
from .walls import with_wall_outputs

SPARSE_FACTOR_OPTIONS = {"relax": 1, "panel_size": 1}
"""SuperLU supernode settings for factors with little fill (trees, sparse loops): tiny
supernodes are 2-3 times faster there than the defaults (measured on 1e4-vessel trees
and on trees with 2 % extra loops, about 5 nonzeros of L+U per row)."""

DENSE_FILL = 20.0
"""Above this many nonzeros of L+U per row SuperLU's default supernodes are kept."""


def structure_key(network: Network) -> tuple:
    """What must stay equal for a prepared structure to be reused: sizes, terminals, kinds."""
    v, beds, nodes = network.vessels, network.beds, network.nodes
    lesion = ~np.isnan(v.stenosis_reduction) & ~v.occluded
    auto = np.isfinite(beds.min_resistance_pa_s_m3) & np.isfinite(beds.target_flow_m3_s)
    return (len(nodes), len(v), len(beds), v.from_node.tobytes(), v.to_node.tobytes(),
            v.occluded.tobytes(), lesion.tobytes(), v.distensible.tobytes(), beds.node.tobytes(),
            beds.outflow_node.tobytes(), auto.tobytes(), np.isnan(nodes.pressure_pa).tobytes())


class PreparedSolver:
    """Steady solves of networks that share one topology.

    Parameters
    ----------
    network : Network
        The reference network: every network later passed to :meth:`solve`
        must have its nodes, vessels, beds, fixed-pressure nodes, occlusions
        and lesion-bearing vessels (values may differ).
    viscosity_pa_s : ndarray, shape (n_vessels,), optional
        Viscosity per vessel (default: the blood's constant viscosity).

    Notes
    -----
    Networks with distensible vessels are passed to
    :func:`vesselnet.solve.solve` as they are (its two-stage start from the
    rigid solution is not repeated here).
    The choice of supernode settings depends only on the structure, so
    every process preparing the same network computes identical numbers.
    The symmetric diagonal scaling of :func:`vesselnet.assembly.solve_sparse`
    is applied to the stored values directly, so each solve costs one fill,
    one numeric factorisation in a fixed order and one triangular solve per
    Newton step.
    """

    def __init__(self, network: Network, *, viscosity_pa_s: np.ndarray | None = None):
        self.key = structure_key(network)
        self.distensible = bool((network.vessels.distensible & ~network.vessels.occluded).any())
        n_vessels = len(network.vessels)
        if viscosity_pa_s is None:
            viscosity_pa_s = np.full(n_vessels, network.blood.viscosity_pa_s)
        self.viscosity_pa_s = np.asarray(viscosity_pa_s, dtype=float)
        groups = element_groups(network, self.viscosity_pa_s)
        nodes = network.nodes
        n = len(nodes)
        parts = connected_parts(network)
        self.cut_off = ~parts.referenced[parts.label]
        self.fixed = ~np.isnan(nodes.pressure_pa)
        self.free = ~self.fixed & ~self.cut_off
        a = np.concatenate([g.a for g in groups])
        b = np.concatenate([g.b for g in groups])
        self.pattern = NodalPattern(n, a, b, self.free)
        self.elimination = self.pattern.free_nodes[self._ordering(groups)]
        n_free = len(self.elimination)
        relabel = np.empty(n, dtype=np.int64)
        others = np.setdiff1d(np.arange(n), self.elimination)
        relabel[self.elimination] = np.arange(n_free)
        relabel[others] = np.arange(n_free, n)
        ordered_free = np.zeros(n, dtype=bool)
        ordered_free[:n_free] = True
        self.ordered = NodalPattern(n, relabel[a], np.where(b >= 0, relabel[np.maximum(b, 0)], -1),
                                    ordered_free)
        probe = self.ordered.matrix(*(np.ones(len(a)),) * 4)
        self._row = probe.indices.copy()
        self._col = np.repeat(np.arange(n_free), np.diff(probe.indptr))
        self._diagonal_slot = np.flatnonzero(self._row == self._col)

    def _ordering(self, groups) -> np.ndarray:
        """Minimum-degree (A + A^T) ordering of the free rows, from the reference values."""
        if self.pattern.n_free == 0:
            return np.zeros(0, dtype=np.int64)
        parts = [g.evaluate(np.zeros(self.pattern.n_nodes)) for g in groups]
        dqa = np.concatenate([x[1] for x in parts])
        dqb = np.concatenate([x[2] for x in parts])
        A = self.pattern.matrix(dqa, dqb, -dqa, -dqb)
        diag = np.abs(A.diagonal())
        d = sp.diags(1.0 / np.sqrt(np.where(diag > 0, diag, 1.0)))
        lu = spla.splu((d @ A @ d).tocsc(), permc_spec="MMD_AT_PLUS_A")
        fill = (lu.L.nnz + lu.U.nnz) / max(A.shape[0], 1)
        self._lu_options = SPARSE_FACTOR_OPTIONS if fill < DENSE_FILL else {}
        return np.argsort(lu.perm_c)

    def _linear_solve(self, dqa, dqb, rhs_free_order: np.ndarray) -> np.ndarray:
        """Solve J x = rhs for the free nodes (rhs and x in ascending free-node order)."""
        A = self.ordered.matrix(dqa, dqb, -dqa, -dqb)
        diag = np.abs(A.data[self._diagonal_slot])
        d = 1.0 / np.sqrt(np.where(diag > 0, diag, 1.0))
        A.data *= d[self._row] * d[self._col]
        lu = spla.splu(A, permc_spec="NATURAL", **self._lu_options)
        full = np.empty(self.pattern.n_nodes)
        full[self.free] = rhs_free_order
        y = lu.solve(d * full[self.elimination])
        full[self.elimination] = d * y
        return full[self.free]

    def solve(self, network: Network, *, tolerance: float = DEFAULT_TOLERANCE,
              max_iterations: int = DEFAULT_MAX_ITERATIONS) -> SteadyResult:
        """Steady solution of ``network`` (same topology as the reference).

        Returns
        -------
        SteadyResult
            As :func:`vesselnet.solve.solve` returns it.

        Raises
        ------
        ValueError
            The network's topology differs from the reference one.
        SolveError
            Newton did not converge.
        """
        if structure_key(network) != self.key:
            raise ValueError("this network's topology differs from the prepared one; "
                             "prepare a solver for it")
        if self.distensible:
            return solve(network, viscosity_pa_s=self.viscosity_pa_s, tolerance=tolerance,
                         max_iterations=max_iterations)
        groups = element_groups(network, self.viscosity_pa_s)
        nodes = network.nodes
        free, fixed, cut_off, pattern = self.free, self.fixed, self.cut_off, self.pattern
        injection = np.where(np.isnan(nodes.inflow_m3_s) | cut_off, 0.0, nodes.inflow_m3_s)
        pressure = initial_pressure(network, groups, fixed)
        pressure[cut_off] = np.nan

        def evaluate(p):
            parts = [g.evaluate(np.nan_to_num(p)) for g in groups]
            q = np.concatenate([x[0] for x in parts])
            dqa = np.concatenate([x[1] for x in parts])
            dqb = np.concatenate([x[2] for x in parts])
            return q, dqa, dqb, pattern.node_sum(q) - injection

        history: list[float] = []
        q, dqa, dqb, imbalance = evaluate(pressure)
        iterations = 0
        while True:
            scale = flow_scale(q, injection)
            worst = float(np.abs(imbalance[free]).max(initial=0.0)) / scale
            history.append(worst)
            if iterations > 0 and worst <= tolerance or not free.any():
                break
            if iterations >= max_iterations:
                raise non_convergence(network, imbalance, free, history)
            step = self._linear_solve(dqa, dqb, -imbalance[free])
            pressure, q, dqa, dqb, imbalance = line_search(pressure, step, free, evaluate, worst, scale)
            iterations += 1
            if not np.isfinite(pressure[free]).all():
                raise SolveError("the linear solve returned non-finite pressures; the system is "
                                 "singular or too badly conditioned")
        result = finish(network, groups, pressure, q, imbalance, free, fixed, cut_off,
                        self.viscosity_pa_s, iterations, history)
        return with_wall_outputs(result, groups)

