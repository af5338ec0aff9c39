"""Newton's method on the nodal pressures with lesions: quadratic convergence, one sparse
structure per solve, and a located error when it does not converge.

Reference: Newton's method converges quadratically near a root where the Jacobian is exact
and nonsingular and Lipschitz (Kantorovich; any numerical-analysis text, common practice);
the order is estimated from the residual sequence as
p = log(e[k+1]/e[k]) / log(e[k]/e[k-1]).
"""

import numpy as np
import pytest

from vesselnet import assembly, changes, solve as solve_module
from vesselnet.demos import demo_path
from vesselnet.errors import SolveError
from vesselnet.model import Network
from vesselnet.reader import load_network
from vesselnet.solve import solve
from vesselnet.testing import assert_invariants

MMHG = 133.322387415
ROUNDOFF = 1e-11


def lesion_tree(seed: int, n_vessels: int = 120, n_lesions: int = 25) -> Network:
    """A random tree with loops and beds, and severe lesions on random vessels."""
    rng = np.random.default_rng(seed)
    n_tree = int(0.9 * n_vessels)
    edges = [(int(rng.integers(0, i)), i) for i in range(1, n_tree + 1)]
    while len(edges) < n_vessels:
        a, b = (int(x) for x in rng.integers(0, n_tree + 1, 2))
        if a != b:
            edges.append((a, b))
    vessels = [{"id": f"v{k}", "from": f"n{a}", "to": f"n{b}", "length_m": float(rng.uniform(0.02, 0.2)),
                "radius_m": float(rng.uniform(1e-3, 4e-3))} for k, (a, b) in enumerate(edges)]
    parents = {a for a, _ in edges[:n_tree]}
    beds = [{"id": f"b{i}", "node": f"n{i}", "resistance_pa_s_m3": float(rng.uniform(0.5, 5)) * MMHG / 1e-6}
            for i in range(1, n_tree + 1) if i not in parents]
    net = Network.build(nodes={"n0": {"pressure_pa": 100 * MMHG}}, vessels=vessels, beds=beds)
    for row in rng.choice(n_vessels, n_lesions, replace=False):
        net = changes.narrow(net, vessel=f"v{row}", reduction=float(rng.uniform(0.6, 0.95)),
                             length_m=float(net.vessels.length_m[row] / 2), at=float(rng.uniform(0, 1)))
    return net


LEG_LESIONS = {
    "six lesions": [("sfa_mid", 0.9), ("popliteal_bk", 0.85), ("ata_prox", 0.9), ("pta_prox", 0.8),
                    ("peroneal_prox", 0.95), ("external_iliac", 0.8)],
    "iliac": [("common_iliac", 0.9)],
    "tandem femoral": [("sfa_prox", 0.8), ("sfa_dist", 0.85), ("popliteal_ak", 0.9)],
}


@pytest.mark.parametrize("case", LEG_LESIONS)
def test_newton_converges_quadratically(case):
    """On the demo leg with severe lesions the residual sequence (recorded in the result) has
    order about 2 near the solution: the last estimate above round-off is at least 1.8."""
    net = load_network(demo_path("leg"))
    for vessel, reduction in LEG_LESIONS[case]:
        net = changes.narrow(net, vessel=vessel, reduction=reduction, length_m=0.02)
    result = solve(net)
    e = np.array(result.residual_history)
    assert result.iterations >= 3 and e[-1] < 1e-10
    orders = [np.log(e[k + 1] / e[k]) / np.log(e[k] / e[k - 1])
              for k in range(1, len(e) - 1) if e[k + 1] > ROUNDOFF]
    assert orders and orders[-1] >= 1.8
    assert_invariants(result)


def test_one_sparse_structure_per_solve(monkeypatch):
    """The Newton loop builds the nodal sparsity pattern once and refills it every step."""
    built = []
    original = assembly.NodalPattern

    class Counting(original):
        def __init__(self, *args, **kwargs):
            built.append(1)
            super().__init__(*args, **kwargs)

    monkeypatch.setattr(solve_module, "NodalPattern", Counting)
    result = solve(lesion_tree(4099))
    assert result.iterations >= 3 and len(built) == 1


def test_no_convergence_is_a_solve_error_naming_the_worst_node():
    """A step cap too low for the lesions: SolveError with the residual and the node."""
    net = lesion_tree(5381)
    with pytest.raises(SolveError, match=r"did not converge in 1 Newton steps: largest flow imbalance "
                                         r"[0-9.e+-]+ of the total inflow, at node 'n\d+'") as caught:
        solve(net, max_iterations=1)
    assert caught.value.ids and caught.value.ids[0] in net.nodes.ids
