"""Setting a network up for pulsatile work: Windkessel beds and inflow shapes.

* :func:`setup_windkessels` gives every arterial bed a three-element
  Windkessel from the network's own bed resistances, its steady flow shares
  and a target total arterial compliance (REFERENCES 5.6).
* :func:`shape_constant_inflows` turns a constant prescribed inflow into a
  ventricular ejection waveform with the same mean.
* :func:`aortic_pressure_waveform` gives a fixed-pressure inlet an aortic
  pressure pulse with the same mean.

Examples
--------
>>> from vesselnet.model import Network
>>> net = Network.build(nodes={"heart": {"inflow_m3_s": 5e-3 / 60}},
...     vessels=[{"id": "aorta", "from": "heart", "to": "tip", "length_m": 0.3, "radius_m": 0.012,
...               "wall_thickness_m": 1.2e-3, "wall_modulus_pa": 5e5}],
...     beds=[{"id": "body", "node": "tip", "resistance_pa_s_m3": 1.2e8}])
>>> setup = setup_windkessels(net)
>>> print(setup.summary())     # doctest: +NORMALIZE_WHITESPACE
1 beds; compliance total 1.5 mL/mmHg = conduit 0.5428 + peripheral 0.9572; R1 0.09855..0.09855 mmHg*s/mL
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.sparse import csgraph

from .errors import NetworkSpecError, Problem
from .model import Network
from .result import SteadyResult
from .units import MMHG_PA
from .wall import inviscid_characteristic_impedance, segment_compliance
from .waveforms import ejection_waveform, harmonics, synthesize
from .windkessel import WindkesselParameters, windkessel3_impedance, windkessel_parameters

_ML_MMHG = 1e-6 / MMHG_PA
_MMHG_S_ML = MMHG_PA / 1e-6

DEFAULT_COMPLIANCE_PER_FLOW_S_PA = 1.5 * _ML_MMHG / (5e-3 / 60)
"""Default total arterial compliance per unit mean inflow: 1.5 mL/mmHg for a
cardiac output of 5 L/min (typical adult total arterial compliance 1-2 mL/mmHg,
REFERENCES 5.4 [M]; resting cardiac output about 5 L/min, REFERENCES 8.1).  A
network that carries part of the cardiac output (a leg) gets the same share of
the compliance, the rule by which REFERENCES 5.6 distributes it over outlets."""

DEFAULT_HEART_RATE_HZ = 70.0 / 60.0
"""70 beats per minute (resting adult, REFERENCES 8.1 [M])."""

DEFAULT_EJECTION_TIME_S = 0.3
"""Ventricular ejection lasting 0.3 s (resting adult; common practice, no source)."""

DEFAULT_PULSE_PRESSURE_PA = 40.0 * MMHG_PA
"""Aortic pulse pressure of a 120/80 mmHg adult (REFERENCES 8.1)."""

AORTIC_SHAPE_WINDKESSEL = (0.05 * _MMHG_S_ML, 0.95 * _MMHG_S_ML, 1.5 * _ML_MMHG)
"""(R1, R2, C) of the three-element Windkessel whose pressure response to the
ejection waveform gives the default aortic pressure shape: the REFERENCES 5.4
parameter set (R_total 1 mmHg*s/mL, C 1.5 mL/mmHg, Zc 0.05 mmHg*s/mL)."""


@dataclass(frozen=True)
class WindkesselSetup:
    """What :func:`setup_windkessels` did.

    Attributes
    ----------
    network : Network
        A copy of the input with ``windkessel_*`` columns set on the arterial
        beds (other beds keep what they had).
    parameters : WindkesselParameters
        R1, R2, C of the beds set (their ids in ``parameters.ids``) and the
        compliance bookkeeping (total, conduit subtracted, peripheral).
    rows : ndarray of int
        Bed rows that received a Windkessel.
    rigid_terminal : tuple of str
        Beds fed only by vessels without wall data, whose R1 comes from the
        nearest walled vessel upstream (or is 0 where there is none).
    left_resistive : tuple of str
        Beds left as pure resistances: downstream of another bed (portal,
        venous side) or without forward mean flow.
    """

    network: Network
    parameters: WindkesselParameters
    rows: np.ndarray
    rigid_terminal: tuple[str, ...]
    left_resistive: tuple[str, ...]

    def summary(self) -> str:
        """A few lines: the compliance bookkeeping and the beds not set."""
        text = self.parameters.summary()
        if self.rigid_terminal:
            text += (f"; R1 from the nearest walled vessel upstream for {len(self.rigid_terminal)} "
                     "bed(s) fed by vessels without wall data")
        if self.left_resistive:
            text += f"; left resistive: {', '.join(self.left_resistive[:6])}"
            text += " ..." if len(self.left_resistive) > 6 else ""
        return text


def default_total_compliance(inflow_m3_s: float) -> float:
    """Total arterial compliance (m^3/Pa) for a network carrying ``inflow_m3_s`` on average.

    Examples
    --------
    >>> print(round(default_total_compliance(5e-3 / 60) / (1e-6 / 133.322387415), 6))
    1.5
    """
    return DEFAULT_COMPLIANCE_PER_FLOW_S_PA * float(inflow_m3_s)


def downstream_of_beds(network: Network, steady: SteadyResult) -> np.ndarray:
    """Nodes reached from a bed's outflow node along the mean flow (the venous side), bool (n_nodes,).

    Examples
    --------
    >>> from vesselnet.model import Network
    >>> from vesselnet.solve import solve
    >>> net = Network.build(nodes={"a": {"pressure_pa": 12000.0}},
    ...     vessels=[{"id": "art", "from": "a", "to": "gut", "length_m": 0.1, "radius_m": 0.003},
    ...              {"id": "portal", "from": "pv", "to": "liver", "length_m": 0.1, "radius_m": 0.005}],
    ...     beds=[{"id": "gut", "node": "gut", "resistance_pa_s_m3": 1e9, "outflow_node": "pv"},
    ...           {"id": "liver", "node": "liver", "resistance_pa_s_m3": 1e8}])
    >>> downstream_of_beds(net, solve(net)).tolist()
    [False, False, True, True]
    """
    v, beds = network.vessels, network.beds
    n = len(network.nodes)
    q = steady.vessel_flow_m3_s
    forward = ~v.occluded & (q != 0)
    up = np.where(q >= 0, v.from_node, v.to_node)[forward]
    down = np.where(q >= 0, v.to_node, v.from_node)[forward]
    starts = np.unique(beds.outflow_node[beds.outflow_node >= 0])
    if not len(starts):
        return np.zeros(n, dtype=bool)
    src = np.concatenate([up, np.full(len(starts), n)])
    dst = np.concatenate([down, starts])
    graph = sp.csr_matrix((np.ones(len(src)), (src, dst)), shape=(n + 1, n + 1))
    order = csgraph.breadth_first_order(graph, n, directed=True, return_predecessors=False)
    reached = np.zeros(n + 1, dtype=bool)
    reached[order] = True
    return reached[:n]


def conduit_compliance(network: Network, rows: np.ndarray | None = None) -> float:
    """Sum of the thin-wall compliances of the open vessels with wall data (m^3/Pa).

    ``rows`` restricts the sum to those vessel rows.

    Examples
    --------
    >>> from vesselnet.model import Network
    >>> net = Network.build(vessels=[{"id": "a", "from": "p", "to": "q", "length_m": 0.1,
    ...     "radius_m": 12.5e-3, "wall_thickness_m": 1.5e-3, "wall_modulus_pa": 0.4e6}])
    >>> print(f"{conduit_compliance(net):.4e}")            # REFERENCES 5.3 check value
    1.5340e-09
    """
    v = network.vessels
    mask = np.isfinite(v.wall_thickness_m) & np.isfinite(v.wall_modulus_pa) & ~v.occluded
    if rows is not None:
        keep = np.zeros(len(v), dtype=bool)
        keep[np.asarray(rows, dtype=np.int64)] = True
        mask &= keep
    r = np.flatnonzero(mask)
    if not len(r):
        return 0.0
    return float(np.sum(segment_compliance(v.length_m[r], v.radius_in_m[r], v.wall_thickness_m[r],
                                           v.wall_modulus_pa[r], poisson_ratio=v.wall_poisson[r],
                                           radius_to_m=v.radius_out_m[r])))


def terminal_impedance(network: Network, steady: SteadyResult) -> tuple[np.ndarray, np.ndarray]:
    """Characteristic impedance of the walled vessels feeding each bed's node.

    Returns
    -------
    z0_pa_s_m3 : ndarray, shape (n_beds,)
        1 / sum(1 / Z0) over the open vessels with wall data whose mean flow
        enters the bed's node, Z0 = rho c / A at their end there
        (:func:`vesselnet.wall.inviscid_characteristic_impedance`).  Where
        only vessels without wall data (lumped, rigid) feed the node, the
        value at the upstream end of the one carrying the most flow, and so
        on up the tree; 0 where no walled vessel is found upstream.
    direct : ndarray of bool, shape (n_beds,)
        True where a walled vessel feeds the bed's node itself.
    """
    v, beds = network.vessels, network.beds
    n = len(network.nodes)
    q = steady.vessel_flow_m3_s
    open_ = ~v.occluded & (q != 0)
    walled = np.isfinite(v.wall_thickness_m) & np.isfinite(v.wall_modulus_pa) & open_
    into_to = q > 0
    down = np.where(into_to, v.to_node, v.from_node)
    up = np.where(into_to, v.from_node, v.to_node)
    rows = np.flatnonzero(walled)
    admittance = np.zeros(n)
    if len(rows):
        radius = np.where(into_to, v.radius_out_m, v.radius_in_m)[rows]
        z0 = inviscid_characteristic_impedance(radius, v.wall_thickness_m[rows], v.wall_modulus_pa[rows],
                                               network.blood.density_kg_m3,
                                               poisson_ratio=v.wall_poisson[rows])
        admittance = np.bincount(down[rows], weights=1.0 / np.atleast_1d(z0), minlength=n)
    direct = admittance > 0
    z_node = np.where(direct, 1.0 / np.where(direct, admittance, 1.0), 0.0)
    rigid = np.flatnonzero(open_ & ~walled)
    main_up = np.full(n, -1)
    if len(rigid):
        order = rigid[np.argsort(np.abs(q[rigid]))]          # the largest flow is written last
        main_up[down[order]] = up[order]
    pending = ~direct & (main_up >= 0)
    for _ in range(n):
        if not pending.any():
            break
        k = np.flatnonzero(pending)
        parent = main_up[k]
        z_node[k] = z_node[parent]
        done = z_node[k] > 0
        pending[k[done]] = False
        main_up[k[~done]] = main_up[parent[~done]]
        pending[k[main_up[k] < 0]] = False
    return z_node[beds.node], direct[beds.node]


def setup_windkessels(network: Network, *, total_compliance_m3_pa: float | None = None,
                      steady: SteadyResult | None = None) -> WindkesselSetup:
    """Three-element Windkessels on every arterial bed of ``network`` (REFERENCES 5.6).

    Parameters
    ----------
    network : Network
    total_compliance_m3_pa : float, optional
        Target total arterial compliance C_total; default
        :func:`default_total_compliance` of the steady inflow.
    steady : SteadyResult, optional
        The steady solution (flow shares, flow directions); default solved here.

    Returns
    -------
    WindkesselSetup

    Raises
    ------
    NetworkSpecError
        No arterial bed, a terminal impedance not below its bed's
        resistance, or modelled vessels already holding the target compliance.

    Notes
    -----
    Per arterial bed i (a bed whose node is not downstream of another bed's
    outflow node): R_T,i is its resistance (so the steady solution is
    unchanged: R1 + R2 = R_T); the share is Q_i / sum Q over the arterial
    beds, from the steady solution; R1 = Z0,node G_i^-1 G_node, with Z0,node
    the characteristic impedance of the walled vessels feeding the bed's node
    in parallel and G the bed conductances at that node (so that the R1 of
    beds sharing a node add in parallel to Z0).  Where only vessels without
    wall data feed the node (lumped branches) Z0 is that of the nearest
    walled vessel upstream (:func:`terminal_impedance`), so the lumped
    branch's inertance does not ring against the bed's compliance; R1 = 0
    where there is none.  R2 = R_T - R1; C_i = (C_total - C_conduit) share_i
    with C_conduit the compliance of the walled vessels upstream of the beds.

    References
    ----------
    Common practice [M]: Stergiopulos, Young & Rogge (1992) J Biomech
    25:1477-1488; Alastruey et al. (2008) Commun Comput Phys 4:317; Xiao,
    Alastruey & Figueroa (2014) Int J Numer Method Biomed Eng 30:204-231.
    """
    from .solve import solve

    steady = solve(network) if steady is None else steady
    beds, v = network.beds, network.vessels
    venous = downstream_of_beds(network, steady)
    flows = steady.bed_flow_m3_s
    arterial = ~venous[beds.node] & (flows > 0)
    rows = np.flatnonzero(arterial)
    if not len(rows):
        raise NetworkSpecError([Problem(network.source, 0, 0, "windkessel setup",
                                        "no bed carries forward mean flow on the arterial side",
                                        "check the beds and the inflow")])
    z0_node, fed = terminal_impedance(network, steady)
    conductance = 1.0 / beds.resistance_pa_s_m3
    node_g = np.bincount(beds.node[rows], weights=conductance[rows], minlength=len(network.nodes))
    r1 = z0_node[rows] * node_g[beds.node[rows]] / conductance[rows]
    share = flows[rows] / flows[rows].sum()
    arterial_vessels = np.flatnonzero(~(venous[v.from_node] & venous[v.to_node]))
    c_conduit = conduit_compliance(network, arterial_vessels)
    c_total = default_total_compliance(steady.inflow_m3_s) if total_compliance_m3_pa is None \
        else float(total_compliance_m3_pa)
    params = windkessel_parameters(beds.resistance_pa_s_m3[rows], r1, share,
                                   total_compliance_m3_pa=c_total, conduit_compliance_m3_pa=c_conduit,
                                   ids=[beds.ids[i] for i in rows])
    proximal = np.array(beds.windkessel_proximal_pa_s_m3, dtype=float)
    compliance = np.array(beds.windkessel_compliance_m3_pa, dtype=float)
    proximal[rows] = params.proximal_resistance_pa_s_m3
    compliance[rows] = params.compliance_m3_pa
    new_beds = dataclasses.replace(beds, windkessel_proximal_pa_s_m3=proximal,
                                   windkessel_compliance_m3_pa=compliance)
    rigid = tuple(beds.ids[i] for i in rows if not fed[i])
    left = tuple(beds.ids[i] for i in np.flatnonzero(~arterial))
    return WindkesselSetup(dataclasses.replace(network, beds=new_beds), params, rows, rigid, left)


def shape_constant_inflows(network: Network, *, heart_rate_hz: float | None = None,
                           stroke_volume_m3: float | None = None,
                           ejection_time_s: float = DEFAULT_EJECTION_TIME_S) -> Network:
    """Give each constant positive prescribed inflow an ejection waveform of the same mean.

    Parameters
    ----------
    network : Network
    heart_rate_hz : float, optional
        Default :data:`DEFAULT_HEART_RATE_HZ`, or mean / stroke volume.
    stroke_volume_m3 : float, optional
        Instead of the heart rate (then the network must have exactly one
        constant inflow to shape): heart rate = mean inflow / stroke volume.
    ejection_time_s : float
        Default :data:`DEFAULT_EJECTION_TIME_S`.

    Returns
    -------
    Network
        The same network with ``inflow_waveforms`` added for those nodes
        (``{stroke_volume_m3, heart_rate_hz, ejection_time_s}``, SPEC 7);
        nodes that already had a waveform are unchanged.

    Raises
    ------
    NetworkSpecError
        Both heart rate and stroke volume given, a stroke volume with several
        inflows, or an ejection longer than the cycle.

    Examples
    --------
    >>> from vesselnet.model import Network
    >>> net = Network.build(nodes={"heart": {"inflow_m3_s": 5e-3 / 60}},
    ...     vessels=[{"id": "a", "from": "heart", "to": "t", "length_m": 0.1, "radius_m": 0.01}],
    ...     beds=[{"id": "b", "node": "t", "resistance_pa_s_m3": 1e8}])
    >>> wave = shape_constant_inflows(net).nodes.inflow_waveforms[0]
    >>> print(round(wave["stroke_volume_m3"] * 1e6, 2), "mL")
    71.43 mL
    """
    nodes = network.nodes
    rows = [i for i in np.flatnonzero(np.nan_to_num(nodes.inflow_m3_s) > 0)
            if i not in nodes.inflow_waveforms]
    where = "inflow shape"
    if heart_rate_hz is not None and stroke_volume_m3 is not None:
        raise _problem(network, where, "give a heart rate or a stroke volume, not both: the mean "
                       "inflow is fixed by the network", "drop one of them")
    if stroke_volume_m3 is not None:
        if len(rows) != 1:
            raise _problem(network, where, f"a stroke volume sets the heart rate of one inflow, "
                           f"but {len(rows)} constant inflows are to be shaped",
                           "give a heart rate instead")
        if not stroke_volume_m3 > 0:
            raise _problem(network, where, f"stroke volume must be > 0, got {stroke_volume_m3}",
                           "give it in mL, e.g. 70")
        heart_rate_hz = float(nodes.inflow_m3_s[rows[0]]) / float(stroke_volume_m3)
    hr = DEFAULT_HEART_RATE_HZ if heart_rate_hz is None else float(heart_rate_hz)
    if not (hr > 0 and ejection_time_s > 0 and ejection_time_s * hr < 1):
        raise _problem(network, where, f"an ejection of {ejection_time_s:.4g} s does not fit a cycle "
                       f"at {60 * hr:.4g} bpm", "shorten the ejection time or lower the heart rate")
    waves = dict(nodes.inflow_waveforms)
    for i in rows:
        mean = float(nodes.inflow_m3_s[i])
        waves[int(i)] = {"stroke_volume_m3": mean / hr, "heart_rate_hz": hr,
                         "ejection_time_s": float(ejection_time_s), "mean_m3_s": mean}
    return dataclasses.replace(network, nodes=dataclasses.replace(nodes, inflow_waveforms=waves))


def aortic_pressure_waveform(mean_pa: float, pulse_pressure_pa: float, heart_rate_hz: float, *,
                             ejection_time_s: float = DEFAULT_EJECTION_TIME_S,
                             n_samples: int = 512) -> np.ndarray:
    """An aortic pressure pulse with a given mean and pulse pressure, samples over one cycle (Pa).

    Parameters
    ----------
    mean_pa, pulse_pressure_pa : float
        Cycle mean and max - min of the samples (Pa).
    heart_rate_hz : float
    ejection_time_s : float
    n_samples : int
        Samples at t_k = k T / n_samples, ejection starting at t = 0.

    Returns
    -------
    ndarray, shape (n_samples,)

    Notes
    -----
    The shape is the pressure of the three-element Windkessel
    :data:`AORTIC_SHAPE_WINDKESSEL` (REFERENCES 5.4) driven by the ejection
    waveform (:func:`vesselnet.waveforms.ejection_waveform`, 20 harmonics),
    with its oscillation scaled to the pulse pressure and shifted to the
    mean: a shape of our own for driving networks with a fixed inlet pressure,
    not a fit to measured data.

    Examples
    --------
    >>> p = aortic_pressure_waveform(95 * 133.322387415, 40 * 133.322387415, 70 / 60)
    >>> print(round(p.mean() / 133.322387415, 6), round(np.ptp(p) / 133.322387415, 6))
    95.0 40.0
    """
    r1, r2, c = AORTIC_SHAPE_WINDKESSEL
    q = ejection_waveform(70e-6, heart_rate_hz, ejection_time_s, int(n_samples))
    coef = harmonics(q, min(20, int(n_samples) // 2))
    omega = 2 * np.pi * heart_rate_hz * np.arange(coef.size)
    p = synthesize(coef * windkessel3_impedance(omega, r1, r2, c), np.arange(n_samples) / n_samples, 1.0)
    p = p - p.mean()
    return mean_pa + pulse_pressure_pa * p / np.ptp(p)


def _problem(network: Network, where: str, message: str, fix: str) -> NetworkSpecError:
    return NetworkSpecError([Problem(network.source, 0, 0, where, message, fix)])
