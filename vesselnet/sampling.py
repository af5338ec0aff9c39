"""Many steady solves of one topology: structure and solver analysis worked out once.

Monte Carlo samples change values (radii, lengths, bed resistances, lesion
severity), never which nodes are joined.  :class:`PreparedSolver` therefore
builds the free-node :class:`~vesselnet.assembly.NodalPattern` and one
:class:`~vesselnet.linsolve.Factorization` once.  The factorization picks its
method from the structure (level-by-level elimination for a tree, CHOLMOD,
multigrid or SuperLU with a fill-reducing ordering for loops, see
:mod:`vesselnet.linsolve`) and keeps its analysis (orderings, the symbolic
factorisation) for every later Newton step and sample; each solve then only
fills the matrix with one ``bincount`` and factorises it numerically.  The
Newton iteration (for lesions) is that of :func:`vesselnet.solve.solve_groups`,
with the same line search, convergence test and result checks.

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

from .assembly import NodalPattern
from .errors import SolveError
from .linsolve import Factorization
from .model import Network
from .result import SteadyResult
from .solve import (DEFAULT_MAX_ITERATIONS, DEFAULT_TOLERANCE, element_groups, finish, flow_scale,
                    initial_pressure, line_search, non_convergence, solve)
from .topology import connected_parts
from .walls import rigid_groups, with_wall_outputs


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
    method : {'auto', 'superlu', 'tree', 'cholmod', 'amg'}
        Linear solver (see :class:`vesselnet.linsolve.Factorization`).

    Attributes
    ----------
    factorization : Factorization
        Shared by every solve; results report its ``description`` and
        ``reason`` as ``solver`` and ``solver_reason``.

    Notes
    -----
    Networks with distensible vessels are passed to
    :func:`vesselnet.solve.solve` with the shared factorization (its
    two-stage start from the rigid solution is not repeated here).
    The factorization makes its analysis on the reference network's
    matrix when the solver is prepared, so every process preparing the same
    network computes identical numbers for a sample, whichever samples it
    solved before.  Each Newton step costs one fill, one numeric
    factorisation (or one O(n) elimination of a tree) and its solve.
    """

    def __init__(self, network: Network, *, viscosity_pa_s: np.ndarray | None = None,
                 method: str = "auto"):
        self.key = structure_key(network)
        self.distensible = bool((network.vessels.distensible & ~network.vessels.occluded).any())
        n_vessels = len(network.vessels)
        if viscosity_pa_s is None:
            viscosity_pa_s = np.full(n_vessels, network.blood.viscosity_pa_s)
        self.viscosity_pa_s = np.asarray(viscosity_pa_s, dtype=float)
        groups = element_groups(network, self.viscosity_pa_s)
        nodes = network.nodes
        parts = connected_parts(network)
        self.cut_off = ~parts.referenced[parts.label]
        self.fixed = ~np.isnan(nodes.pressure_pa)
        self.free = ~self.fixed & ~self.cut_off
        a = np.concatenate([g.a for g in groups])
        b = np.concatenate([g.b for g in groups])
        self.pattern = NodalPattern(len(nodes), a, b, self.free)
        self.factorization = Factorization(method)
        self._analyse(rigid_groups(groups))

    def _analyse(self, groups) -> None:
        """The factorization's first solve, on the reference matrix at zero pressure.

        Rigid walls stand in for distensible ones (a symmetric matrix, as the
        rigid-wall start of :func:`vesselnet.solve.solve` gives).  A singular
        reference is left to the solve that meets it, which says so.
        """
        if self.pattern.n_free == 0:
            return
        parts = [g.evaluate(np.zeros(self.pattern.n_nodes)) for g in groups]
        dqa = np.concatenate([x[1] for x in parts])
        dqb = np.concatenate([x[2] for x in parts])
        try:
            self.factorization.solve(self.pattern.matrix(dqa, dqb, -dqa, -dqb),
                                     np.ones(self.pattern.n_free))
        except (RuntimeError, SolveError):
            pass

    def _linear_solve(self, dqa, dqb, rhs: np.ndarray) -> np.ndarray:
        """Solve J x = rhs for the free nodes (rhs and x in ascending free-node order)."""
        try:
            return self.factorization.solve(self.pattern.matrix(dqa, dqb, -dqa, -dqb), rhs)
        except RuntimeError as exc:  # SuperLU: "Factor is exactly singular"
            raise SolveError(f"the Newton system of this sample is singular ({exc}); a part of "
                             "the network has no pressure level: give it a fixed pressure or a "
                             "fixed bed") from None

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
                         max_iterations=max_iterations, factorization=self.factorization)
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
                        self.viscosity_pa_s, iterations, history, linear=self.factorization)
        return with_wall_outputs(result, groups)

