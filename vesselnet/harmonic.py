"""A vessel network's elements at one angular frequency, on one sparse structure.

:class:`HarmonicNetwork` lowers a network once (element terminals, the
free-node :class:`~vesselnet.assembly.NodalPattern`, wall and lesion data)
and then gives, for any omega, the complex nodal stamps of every element and
the solution of the nodal system for given sources:

* a vessel with wall thickness and modulus is a lossy transmission line
  (:func:`vesselnet.transmission.segment_admittance`: Womersley's series
  impedance, the tethered thin-wall compliance); a vessel without them is
  rigid, the lumped series impedance Z_L L;
* a lesion is linearised about its steady mean flow Q: the small-signal
  impedance R_v + 2 K_t |Q| + i omega Ku rho Ls / A0 (Young-Tsai with the
  unsteady coefficient Ku) in series between the uniform-taper pieces of its
  vessel above and below it;
* a bed is its three-element Windkessel R1 + R2 / (1 + i omega R2 C) when it
  has Windkessel data, else its resistance, to its outflow pressure or node.

Examples
--------
>>> from vesselnet.model import Network
>>> from vesselnet.solve import solve
>>> net = Network.build(nodes={"r": {"pressure_pa": 13332.2}},
...     vessels=[{"id": "a", "from": "r", "to": "t", "length_m": 0.1, "radius_m": 0.002}],
...     beds=[{"id": "organ", "node": "t", "resistance_pa_s_m3": 1.3332e8}])
>>> d_aa, d_ab, d_ba, d_bb = HarmonicNetwork(net, solve(net)).stamps(2 * np.pi)
>>> print(np.round(1 / d_aa[1].real / 1.3332e8, 6), d_ab[0] == d_ba[0])
1.0 True
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from .assembly import NodalPattern, ScaledFactor
from .errors import SolveError
from .linsolve import Factorization
from .model import Network
from .result import SteadyResult
from .solve import vessel_resistance
from .stenosis import young_tsai_coefficients
from .topology import connected_parts
from .transmission import DEFAULT_TAPER_SUBSEGMENTS, segment_admittance
from .windkessel import windkessel3_impedance

LESION_INERTANCE_COEFFICIENT = 1.2
"""Ku of the Young-Tsai unsteady lesion term Ku rho Ls dU/dt (Young & Tsai 1973,
J Biomech 6:547-559; value from memory, REFERENCES 4.1 [M])."""


def _cascade(first, second):
    """Nodal matrix (a, b, d) of two two-ports in series (the middle node eliminated)."""
    a1, b1, d1 = first
    a2, b2, d2 = second
    s = d1 + a2
    return a1 - b1 * b1 / s, -b1 * b2 / s, d2 - b2 * b2 / s


class HarmonicNetwork:
    """The network's elements at any angular frequency, on one sparse structure.

    Parameters
    ----------
    network : Network
    steady : SteadyResult
        Supplies each vessel's viscosity and each lesion's mean flow.
    taper_subsegments : int
        Uniform pieces per tapered vessel (:func:`vesselnet.transmission.segment_admittance`).
    method : {'auto', 'superlu', 'tree', 'cholmod', 'amg'}
        Linear solver of the nodal systems (:class:`vesselnet.linsolve.Factorization`);
        the matrices are complex, so ``auto`` eliminates forests of at least
        :data:`~vesselnet.linsolve.SMALL_SYSTEM` nodes level by level and
        factorises the rest by SuperLU with partial pivoting.

    Attributes
    ----------
    factorization : Factorization
        One for every frequency (the pattern is the same): its analysis is made
        once, and its ``description`` and ``reason`` say what ran last.

    Notes
    -----
    Element order: open vessels without a lesion, open vessels with a lesion,
    beds.  At omega = 0 a vessel without a lesion is the steady solver's own
    conductance (:func:`vesselnet.solve.vessel_resistance`, the Poiseuille or
    closed-form taper resistance), which the two-port stamp equals in exact
    arithmetic; taking it directly keeps the 1e-14 rounding of the
    taper's piecewise cascade out of the 0 Hz system, so that it is the
    steady linear system bit for bit.  Occluded vessels are left out (no flow at any harmonic); nodes cut
    off from every pressure reference are not solved for (NaN).
    """

    def __init__(self, network: Network, steady: SteadyResult, *,
                 taper_subsegments: int = DEFAULT_TAPER_SUBSEGMENTS, method: str = "auto"):
        self.network = network
        self.taper_subsegments = int(taper_subsegments)
        self.factorization = Factorization(method)
        v, beds, nodes = network.vessels, network.beds, network.nodes
        open_ = ~v.occluded
        lesion = open_ & ~np.isnan(v.stenosis_reduction)
        self.plain = np.flatnonzero(open_ & ~lesion)
        self.lesion = np.flatnonzero(lesion)
        rows = np.concatenate([self.plain, self.lesion])
        self.vessel_rows = rows
        self.n_vessel_elements = len(rows)
        self.a = np.concatenate([v.from_node[rows], beds.node])
        self.b = np.concatenate([v.to_node[rows], beds.outflow_node])
        self.ground_pa = np.concatenate([np.full(len(rows), np.nan), beds.outflow_pressure_pa])
        parts = connected_parts(network)
        self.cut_off = ~parts.referenced[parts.label]
        self.fixed = ~np.isnan(nodes.pressure_pa)
        self.free = ~self.fixed & ~self.cut_off
        self.pattern = NodalPattern(len(nodes), self.a, self.b, self.free)
        self.mu = np.asarray(steady.vessel_viscosity_pa_s, dtype=float)
        self.rho = network.blood.density_kg_m3
        self.steady_resistance = vessel_resistance(network, self.mu)
        walled = np.isfinite(v.wall_thickness_m) & np.isfinite(v.wall_modulus_pa)
        self.walled = walled
        self.modulus = np.where(walled, v.wall_modulus_pa, np.inf)
        self.thickness = np.where(walled, v.wall_thickness_m, 1.0)
        self._lesion_setup(steady)
        r_total = beds.resistance_pa_s_m3
        self.has_windkessel = np.isfinite(beds.windkessel_proximal_pa_s_m3) & \
            np.isfinite(beds.windkessel_compliance_m3_pa)
        self.r1 = np.where(self.has_windkessel, beds.windkessel_proximal_pa_s_m3, 0.0)
        self.r2 = r_total - self.r1
        self.c = np.where(self.has_windkessel, beds.windkessel_compliance_m3_pa, 0.0)

    def _lesion_setup(self, steady: SteadyResult) -> None:
        v, rows = self.network.vessels, self.lesion
        length = v.length_m[rows]
        ls = v.stenosis_length_m[rows]
        at = v.stenosis_at[rows]
        r_in, r_out = v.radius_in_m[rows], v.radius_out_m[rows]
        d0 = 2.0 * (r_in * (1 - at) + r_out * at)
        ds = d0 * (1.0 - v.stenosis_reduction[rows])
        r_v, k_t = young_tsai_coefficients(d0, ds, ls, self.mu[rows], self.rho)
        q_mean = np.abs(steady.vessel_flow_m3_s[rows])
        self.lesion_resistance_pa_s_m3 = r_v + 2.0 * k_t * q_mean
        self.lesion_inertance_pa_s2_m3 = LESION_INERTANCE_COEFFICIENT * self.rho * ls / (np.pi * d0**2 / 4)
        start = np.clip(at * length - ls / 2, 0.0, length - ls)
        self.lesion_up = (start, r_in, r_in + (r_out - r_in) * start / length)
        end = start + ls
        self.lesion_down = (length - end, r_in + (r_out - r_in) * end / length, r_out)

    def _vessel_pieces(self, omega, rows, length, r0, r1):
        y_ff, y_ft, _, y_tt = segment_admittance(
            omega, length, r0, self.thickness[rows], self.modulus[rows], self.mu[rows], self.rho,
            poisson_ratio=self.network.vessels.wall_poisson[rows], radius_to_m=r1,
            taper_subsegments=self.taper_subsegments)
        return np.atleast_1d(y_ff), np.atleast_1d(y_ft), -np.atleast_1d(y_tt)

    def stamps(self, omega_rad_s: float):
        """Nodal stamps (d_aa, d_ab, d_ba, d_bb) of every element at ``omega_rad_s`` (complex).

        Row a of an element: flow leaving node a into it is d_aa P_a + d_ab P_b;
        row b: flow leaving node b into it is d_ba P_a + d_bb P_b.
        """
        v = self.network.vessels
        omega = float(omega_rad_s)
        rows = self.plain
        if omega == 0.0:
            g = 1.0 / self.steady_resistance[rows] + 0j
            a, b, d = g, -g, g.copy()
        elif len(rows):
            a, b, d = self._vessel_pieces(omega, rows, v.length_m[rows], v.radius_in_m[rows],
                                          v.radius_out_m[rows])
        else:
            a = b = d = np.zeros(0, dtype=complex)
        la, lb, ld = self._lesion_stamps(omega)
        z_bed = np.where(self.has_windkessel,
                         windkessel3_impedance(omega, self.r1, np.where(self.has_windkessel, self.r2, 1.0),
                                               self.c),
                         self.network.beds.resistance_pa_s_m3 + 0j)
        y = 1.0 / np.atleast_1d(z_bed)
        d_aa = np.concatenate([a, la, y])
        d_ab = np.concatenate([b, lb, -y])
        d_bb = np.concatenate([d, ld, y])
        return d_aa, d_ab, d_ab.copy(), d_bb

    def _lesion_stamps(self, omega: float):
        rows = self.lesion
        if not len(rows):
            empty = np.zeros(0, dtype=complex)
            return empty, empty, empty
        g = 1.0 / (self.lesion_resistance_pa_s_m3 + 1j * omega * self.lesion_inertance_pa_s2_m3)
        a, b, d = g.copy(), -g, g.copy()
        for piece, upstream in ((self.lesion_up, True), (self.lesion_down, False)):
            length, r0, r1 = piece
            has = length > 0
            if not has.any():
                continue
            pa, pb, pd = self._vessel_pieces(omega, rows[has], length[has], r0[has], r1[has])
            if upstream:
                na, nb, nd = _cascade((pa, pb, pd), (a[has], b[has], d[has]))
            else:
                na, nb, nd = _cascade((a[has], b[has], d[has]), (pa, pb, pd))
            a, b, d = a.copy(), b.copy(), d.copy()
            a[has], b[has], d[has] = na, nb, nd
        return a, b, d

    @property
    def solver(self) -> str:
        """The linear solver of the nodal systems, ``method (ordering)`` (empty before a solve)."""
        return self.factorization.description if self.factorization.method else ""

    def _linear_solve(self, A: sp.csc_matrix, rhs: np.ndarray) -> np.ndarray:
        """``A x = rhs`` for every column, then one step of iterative refinement.

        The nodal matrices of whole-body networks span many decades of
        conductance; the refinement step, one more solve for the residual,
        recovers digits the elimination loses.

        :attr:`factorization` chooses the method at the first frequency.  A
        forest is eliminated level by level, O(n) per right side, so every
        column and the refinement go through it.  Otherwise it factorises by
        SuperLU with partial pivoting after scaling by ``diag(|A_ii|)^(-1/2)``
        on both sides; as it factorises again on every call and takes one
        right side, the columns and the refinement share one
        :class:`~vesselnet.assembly.ScaledFactor` instead (the same scaling,
        ordering and pivoting): one factorisation per frequency.
        """
        f = self.factorization
        try:
            if not f.method:
                f.solve(A, rhs[:, 0])                  # the first frequency: choose the method
            if f.method == "tree":
                def solve(b):
                    return np.stack([f.solve(A, b[:, j]) for j in range(b.shape[1])], axis=1)
            else:
                factor = ScaledFactor(A)
                d = factor.d[:, None]

                def solve(b):
                    return d * factor.lu.solve(d * b)
            x = solve(rhs)
            return x + solve(rhs - A @ x)
        except RuntimeError as exc:  # SuperLU: "Factor is exactly singular"
            raise SolveError(f"the harmonic nodal system is singular ({exc}); a part of the network "
                             "is held only by zero admittances") from None

    def solve(self, omega_rad_s: float, injection_m3_s: np.ndarray, pressure_pa: np.ndarray,
              ground_pa: np.ndarray):
        """Solve the nodal system for one or more source columns.

        Parameters
        ----------
        omega_rad_s : float
        injection_m3_s : ndarray, complex, shape (n_nodes, m)
            Flow injected at each node (used at free nodes).
        pressure_pa : ndarray, complex, shape (n_nodes, m)
            Pressure of fixed nodes (other rows ignored).
        ground_pa : ndarray, complex, shape (n_elements, m)
            Pressure an element to ground drains to (other rows ignored).

        Returns
        -------
        pressure : ndarray, complex, shape (n_nodes, m)
            Nodal pressures (NaN at cut-off nodes).
        q_from, q_to : ndarray, complex, shape (n_elements, m)
            Flow into each element at ``a`` and out of it at ``b``.
        imbalance : ndarray, shape (m,)
            Largest nodal imbalance at free nodes (flow units).
        """
        d_aa, d_ab, d_ba, d_bb = self.stamps(omega_rad_s)
        pattern = self.pattern
        m = injection_m3_s.shape[1]
        known = np.where(self.fixed[:, None], pressure_pa, 0.0).astype(complex)
        grounded = self.b < 0
        bsafe = np.maximum(self.b, 0)
        rhs = np.empty((pattern.n_free, m), dtype=complex)
        for j in range(m):
            pa = known[self.a, j]
            pb = np.where(grounded, np.nan_to_num(ground_pa[:, j]), known[bsafe, j])
            contribution = pattern.node_sum(d_aa * pa + d_ab * pb, -(d_ba * pa + d_bb * pb))
            rhs[:, j] = (injection_m3_s[:, j] - contribution)[pattern.free_nodes]
        pressure = known.copy()
        if pattern.n_free:
            pressure[pattern.free_nodes] = self._linear_solve(pattern.matrix(d_aa, d_ab, d_ba, d_bb), rhs)
        if not np.isfinite(pressure).all():
            raise SolveError("the harmonic solve returned non-finite pressures; the system is "
                             "singular or too badly conditioned")
        pa = pressure[self.a]
        pb = np.where(grounded[:, None], np.nan_to_num(ground_pa), pressure[bsafe])
        q_from = d_aa[:, None] * pa + d_ab[:, None] * pb
        q_to = -(d_ba[:, None] * pa + d_bb[:, None] * pb)
        imbalance = np.array([np.abs((pattern.node_sum(q_from[:, j], q_to[:, j])
                                      - injection_m3_s[:, j])[pattern.free_nodes]).max(initial=0.0)
                              for j in range(m)])
        pressure[self.cut_off] = np.nan
        return pressure, q_from, q_to, imbalance


def solve_harmonic(network: Network, omega_rad_s: float, *, steady: SteadyResult,
                   injection_m3_s=None, pressure_pa=None, ground_pa=None):
    """Nodal pressures and element flows at one angular frequency (one source set).

    Parameters
    ----------
    network : Network
    omega_rad_s : float
        >= 0.  At 0 with the network's own sources this is the linear steady
        problem, solved with the two-port stamps.
    steady : SteadyResult
        For viscosities and lesion mean flows.
    injection_m3_s, pressure_pa : ndarray, shape (n_nodes,), optional
        Default: the network's steady values (prescribed inflows, fixed pressures).
    ground_pa : ndarray, shape (n_beds,), optional
        Outflow pressure of beds; default the network's.

    Returns
    -------
    pressure_pa : ndarray, complex, shape (n_nodes,)
    vessel_flow_in_m3_s, vessel_flow_out_m3_s : ndarray, complex, shape (n_vessels,)
        At the ``from`` and ``to`` ends (0 for occluded vessels).
    bed_flow_m3_s : ndarray, complex, shape (n_beds,)

    Examples
    --------
    >>> from vesselnet.model import Network
    >>> from vesselnet.solve import solve
    >>> net = Network.build(nodes={"r": {"pressure_pa": 13332.2}},
    ...     vessels=[{"id": "a", "from": "r", "to": "t", "length_m": 0.1, "radius_m": 0.002}],
    ...     beds=[{"id": "organ", "node": "t", "resistance_pa_s_m3": 1.3332e8}])
    >>> steady = solve(net)
    >>> p, q_in, q_out, q_bed = solve_harmonic(net, 0.0, steady=steady)
    >>> bool(abs(q_in[0] - steady.vessel_flow_m3_s[0]) < 1e-12 * steady.vessel_flow_m3_s[0])
    True
    """
    system = HarmonicNetwork(network, steady)
    nodes = network.nodes
    inj = np.nan_to_num(nodes.inflow_m3_s) if injection_m3_s is None else np.asarray(injection_m3_s)
    inj = np.where(system.cut_off, 0.0, inj)
    pres = np.nan_to_num(nodes.pressure_pa) if pressure_pa is None else np.asarray(pressure_pa)
    beds_ground = network.beds.outflow_pressure_pa if ground_pa is None else np.asarray(ground_pa)
    ground = np.concatenate([np.full(system.n_vessel_elements, np.nan), beds_ground])
    p, q_from, q_to, _ = system.solve(omega_rad_s, inj[:, None].astype(complex),
                                      pres[:, None].astype(complex), ground[:, None].astype(complex))
    flows_in, flows_out, bed = map_flows(system, q_from[:, 0], q_to[:, 0])
    return p[:, 0], flows_in, flows_out, bed


def map_flows(system: HarmonicNetwork, q_from, q_to):
    """Element flows back to (vessel flow at from end, at to end, bed flow), zero for occluded vessels."""
    n_v = len(system.network.vessels)
    flow_in = np.zeros(n_v, dtype=complex)
    flow_out = np.zeros(n_v, dtype=complex)
    k = system.n_vessel_elements
    flow_in[system.vessel_rows] = q_from[:k]
    flow_out[system.vessel_rows] = q_to[:k]
    return flow_in, flow_out, q_from[k:].copy()
