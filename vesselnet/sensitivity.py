"""Sensitivity of bed flow shares to every vessel radius, bed resistance and lesion, by adjoints.

At the steady solution the nodal balance F(p, theta) = 0 holds at every free
node.  For an output J = Q_bed / Q_in (a bed's share of the total inflow)

    dJ/dtheta = dJ/dtheta|_p - lambda^T dF/dtheta,   with   (dF/dp)^T lambda = (dJ/dp)^T,

so one extra linear solve per output (the adjoint, with the transposed
Jacobian already used by Newton) gives the derivative with respect to all
parameters at once, instead of one solve per parameter.  Each parameter acts
on one element only, so the last term is (lambda_a - lambda_b) dq_e/dtheta
for the element e = (a, b) it belongs to.  The element derivatives
dq_e/d(ln theta) at fixed pressures come from the element laws themselves
(whatever they are: Poiseuille, taper, Young-Tsai lesion) by a central
difference in ln theta with step 1e-5 (truncation and rounding both about
1e-10 relative); since an element depends on its own parameter only, one
pair of evaluations serves every parameter of a kind.

Results are elasticities, d ln(share) / d ln(parameter): the percentage
change of the share per percent change of the parameter.

Examples
--------
>>> from vesselnet.model import Network
>>> net = Network.build(nodes={"r": {"pressure_pa": 13332.2}},
...     vessels=[{"id": "a", "from": "r", "to": "j", "length_m": 0.1, "radius_m": 0.002},
...              {"id": "b", "from": "j", "to": "t", "length_m": 0.1, "radius_m": 0.001},
...              {"id": "c", "from": "j", "to": "u", "length_m": 0.1, "radius_m": 0.001}],
...     beds=[{"id": "x", "node": "t", "resistance_pa_s_m3": 1e9},
...           {"id": "y", "node": "u", "resistance_pa_s_m3": 1e9}])
>>> sens = sensitivity(net)
>>> for kind, item, e in sens.ranked("x", top=3):
...     print(kind, item, round(e, 4))
radius c -0.9425
radius b 0.9425
resistance y 0.2644
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from .assembly import NodalPattern
from .errors import SolveError
from .model import Network
from .result import SteadyResult
from .solve import element_groups, solve
from .topology import connected_parts

LOG_STEP = 1e-5
"""Step in ln(parameter) of the element-level central differences."""


@dataclass(frozen=True, eq=False)
class Sensitivity:
    """Elasticities of bed shares with respect to the network's parameters.

    Attributes
    ----------
    result : SteadyResult
        The solution the derivatives are taken at.
    bed_rows : ndarray of int, shape (n_out,)
        The beds whose shares are differentiated (rows of the network's beds).
    kind : ndarray of str, shape (n_par,)
        ``radius`` (vessel, both ends scaled alike), ``resistance`` (bed) or
        ``stenosis`` (a lesion's diameter reduction).
    item : ndarray of str, shape (n_par,)
        The vessel or bed id of each parameter.
    elasticity : ndarray, shape (n_out, n_par)
        d ln(share) / d ln(parameter).
    """

    result: SteadyResult
    bed_rows: np.ndarray
    kind: np.ndarray
    item: np.ndarray
    elasticity: np.ndarray

    @property
    def beds(self) -> tuple[str, ...]:
        """Ids of the output beds, in row order of :attr:`elasticity`."""
        return tuple(self.result.network.beds.ids[i] for i in self.bed_rows)

    def ranked(self, bed: str, *, top: int | None = 10) -> list[tuple[str, str, float]]:
        """What matters most for ``bed``: (kind, item, elasticity), largest |elasticity| first."""
        k = self.beds.index(bed)
        row = self.elasticity[k]
        order = np.argsort(-np.abs(row), kind="stable")[:top]
        return [(str(self.kind[j]), str(self.item[j]), float(row[j])) for j in order]

    def table(self, bed: str) -> dict[str, np.ndarray]:
        """Columns for one bed: parameter kind, item, elasticity (parameter order)."""
        k = self.beds.index(bed)
        return {"kind": self.kind, "item": self.item, "elasticity": self.elasticity[k]}


def sensitivity(network: Network, *, beds=None, result: SteadyResult | None = None) -> Sensitivity:
    """Adjoint elasticities of bed shares with respect to radii, bed resistances and lesions.

    Parameters
    ----------
    network : Network
    beds : sequence of str, optional
        Output beds (default: all).  Memory grows as outputs x parameters.
    result : SteadyResult, optional
        The solution of ``network`` if already at hand (solved otherwise).

    Returns
    -------
    Sensitivity
        Parameters: the radius of every open vessel, the resistance of every
        bed, the diameter reduction of every lesion.

    Raises
    ------
    KeyError
        An output bed is not in the network.
    SolveError
        The network has parts cut off from every pressure reference, or an
        output bed carries no flow.

    Notes
    -----
    Q_in is the network's total inflow as :attr:`SteadyResult.inflow_m3_s`
    defines it (prescribed inflows, what fixed-pressure nodes supply, reversed
    terminal beds); its dependence on the solution enters the adjoint right
    side.  Viscosity is held fixed (a diameter-dependent viscosity law would
    add its own derivative).  One factorisation of the Jacobian serves all
    outputs; adjoint right sides are solved in blocks of :data:`BLOCK`.
    """
    if result is None:
        result = solve(network)
    out_rows = (np.arange(len(network.beds)) if beds is None
                else np.array([network.beds.index[b] for b in beds], dtype=np.int64))
    mu = result.vessel_viscosity_pa_s
    groups = element_groups(network, mu)
    nodes = network.nodes
    n = len(nodes)
    parts = connected_parts(network)
    if (~parts.referenced[parts.label]).any():
        raise SolveError("sensitivity: parts of the network are cut off from every pressure "
                         "reference; their shares have no derivative")
    fixed = ~np.isnan(nodes.pressure_pa)
    a = np.concatenate([g.a for g in groups])
    b = np.concatenate([g.b for g in groups])
    p = np.nan_to_num(result.pressure_pa)
    evaluated = [g.evaluate(p) for g in groups]
    q = np.concatenate([x[0] for x in evaluated])
    dqa = np.concatenate([x[1] for x in evaluated])
    dqb = np.concatenate([x[2] for x in evaluated])
    element_kind = np.concatenate([np.full(len(g.a), g.kind) for g in groups])
    element_row = np.concatenate([g.rows for g in groups])
    m = len(a)

    c = _inflow_coefficients(network, result, a, b, q, element_kind, element_row, fixed)
    q_in = result.inflow_m3_s
    bed_element = _element_of(element_kind, element_row, "bed", len(network.beds))
    share = q[bed_element[out_rows]] / q_in
    if not (share != 0).all():
        raise SolveError("sensitivity: an output bed carries no flow, so its share has no "
                         "logarithmic derivative")
    kind, item, param_element, slope = _parameters(network, groups, p, mu, element_kind, element_row)

    pattern = NodalPattern(n, a, b, ~fixed)
    row_a = pattern.row_of[a]
    row_b = pattern.row_of[np.where(b >= 0, b, n)]
    elements = np.arange(m)
    ok_a, ok_b = row_a >= 0, row_b >= 0
    # dF/dp^T applied to dJ/dq: G = M W with M[row(a_e), e] = dq_e/dp_a, M[row(b_e), e] = dq_e/dp_b
    M = sp.csr_matrix((np.concatenate([dqa[ok_a], dqb[ok_b]]),
                       (np.concatenate([row_a[ok_a], row_b[ok_b]]),
                        np.concatenate([elements[ok_a], elements[ok_b]]))),
                      shape=(pattern.n_free, m))
    factor = _transposed_factor(pattern.matrix(dqa, dqb, -dqa, -dqb))
    pa, pb = row_a[param_element], row_b[param_element]
    elasticity = np.empty((len(out_rows), len(kind)))
    for start in range(0, len(out_rows), BLOCK):
        block = slice(start, min(start + BLOCK, len(out_rows)))
        k = block.stop - block.start
        W = np.zeros((m, k))                              # dJ/dq_e at fixed pressures
        W[bed_element[out_rows[block]], np.arange(k)] = 1.0 / q_in
        W -= np.outer(c, share[block] / q_in)
        lam = factor(M @ W)
        lam_a = np.where(pa[:, None] >= 0, lam[np.maximum(pa, 0)], 0.0)
        lam_b = np.where(pb[:, None] >= 0, lam[np.maximum(pb, 0)], 0.0)
        total = (W[param_element] - lam_a + lam_b) * slope[:, None]
        elasticity[block] = total.T / share[block, None]
    return Sensitivity(result=result, bed_rows=out_rows, kind=kind, item=item, elasticity=elasticity)


BLOCK = 64
"""Outputs whose adjoints are solved together."""


def _element_of(element_kind, element_row, kind: str, count: int) -> np.ndarray:
    """Element index of each vessel or bed row (-1 where it has none, as occluded vessels)."""
    out = np.full(count, -1, dtype=np.int64)
    mine = np.flatnonzero(element_kind == kind)
    out[element_row[mine]] = mine
    return out


def _inflow_coefficients(network, result, a, b, q, element_kind, element_row, fixed) -> np.ndarray:
    """c with Q_in = sum_e c_e q_e + constant, the sign pattern frozen at the solution."""
    supplying = fixed & (result.boundary_inflow_m3_s > 0)
    c = supplying[a].astype(float) - np.where(b >= 0, supplying[np.maximum(b, 0)], False)
    beds = network.beds
    is_bed = element_kind == "bed"
    terminal = np.zeros(len(a), dtype=bool)
    terminal[is_bed] = beds.outflow_node[element_row[is_bed]] < 0
    c[terminal & (q < 0)] -= 1.0
    return c


def _transposed_factor(J: sp.csc_matrix):
    """A function G -> lambda with J^T lambda = G (scaled like :func:`vesselnet.assembly.solve_sparse`)."""
    if J.shape[0] == 0:
        return lambda G: np.zeros_like(G)
    diag = np.abs(J.diagonal())
    d = 1.0 / np.sqrt(np.where(diag > 0, diag, 1.0))
    D = sp.diags(d)
    lu = spla.splu((D @ J @ D).tocsc(), permc_spec="MMD_AT_PLUS_A")
    return lambda G: d[:, None] * lu.solve(np.ascontiguousarray(d[:, None] * G), trans="T")


def _parameters(network: Network, groups, p, mu, element_kind, element_row):
    """Every parameter: kind, item id, its element, and dq_element/d ln(parameter).

    Each kind of parameter is scaled by exp(+-h) for all items at once: an
    element depends on its own parameter only.
    """
    v, beds = network.vessels, network.beds
    vessel_element = _element_of(element_kind, element_row, "vessel", len(v))
    bed_element = _element_of(element_kind, element_row, "bed", len(beds))
    lesion = ~v.occluded & ~np.isnan(v.stenosis_reduction)

    def radius(f):
        return dataclasses.replace(network, vessels=dataclasses.replace(
            v, radius_in_m=v.radius_in_m * f, radius_out_m=v.radius_out_m * f))

    def resistance(f):
        return dataclasses.replace(network, beds=dataclasses.replace(
            beds, resistance_pa_s_m3=beds.resistance_pa_s_m3 * f))

    def stenosis(f):
        return dataclasses.replace(network, vessels=dataclasses.replace(
            v, stenosis_reduction=v.stenosis_reduction * f))

    cases = [("radius", radius, np.flatnonzero(vessel_element >= 0), vessel_element, v.ids),
             ("resistance", resistance, np.arange(len(beds)), bed_element, beds.ids),
             ("stenosis", stenosis, np.flatnonzero(lesion), vessel_element, v.ids)]
    h = LOG_STEP
    kinds, items, elements, slopes = [], [], [], []
    for kind, scaled, rows, element_of, ids in cases:
        if not len(rows):
            continue
        up, down = (np.concatenate([g.evaluate(p)[0] for g in element_groups(scaled(np.exp(s)), mu)])
                    for s in (h, -h))
        dq = (up - down) / (2 * h)
        kinds.append(np.full(len(rows), kind, dtype=object))
        items.append(np.array([ids[i] for i in rows], dtype=object))
        elements.append(element_of[rows])
        slopes.append(dq[element_of[rows]])
    return (np.concatenate(kinds), np.concatenate(items), np.concatenate(elements),
            np.concatenate(slopes))
