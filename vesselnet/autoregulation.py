"""Autoregulating organ beds: hold a target flow while the bed can still dilate.

A bed that autoregulates adjusts its resistance to keep its flow at a
target; it can dilate only down to a minimum resistance (its maximal
dilation, the hyperaemic state).  Once there it is *exhausted* and behaves
as a fixed resistance, so that its flow falls with its perfusion pressure.
Without this, a fixed distal resistance makes resting flow fall with a
stenosis far earlier than observed (Gould et al. 1974; REFERENCES 4.3, 10.15).

Examples
--------
>>> import numpy as np
>>> law = AutoregulatedLaw(np.array([1.0, 1.0]), np.array([10.0, 10.0]))
>>> q, dqa, dqb = law.evaluate(np.array([50.0, 5.0]), np.array([0.0, 0.0]))
>>> q.tolist(), dqa.tolist()          # holding at the target; exhausted at 5/10
([1.0, 0.5], [0.0, 0.1])
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

FIXED, HOLDING, EXHAUSTED = "fixed", "holding", "exhausted"
"""Bed states reported in results."""

HOLDING_TOLERANCE = 1e-9
"""A bed holds when its flow is within this fraction of its target."""


@dataclass(frozen=True, eq=False)
class AutoregulatedLaw:
    """q = min(Q_target, dP / R_min): the flow of an autoregulating bed.

    Parameters
    ----------
    target_flow_m3_s : ndarray, shape (m,)
        Flow each bed holds while it can (m^3/s), > 0.
    min_resistance_pa_s_m3 : ndarray, shape (m,)
        Resistance at maximal dilation (Pa*s/m^3), > 0.

    Notes
    -----
    The law is piecewise linear and concave in dP = p_a - p_b:

    * dP >= Q_target R_min: the bed *holds*, q = Q_target, dq/dP = 0 (its
      resistance dP / Q_target is whatever holds the flow; no upper limit);
    * dP < Q_target R_min: the bed is *exhausted*, q = dP / R_min,
      dq/dP = 1 / R_min (reversed flow included).

    Newton's method on the nodal pressures with this law is a semismooth
    (active-set) Newton method: the derivative is exact on each piece, the
    iterates settle the state of every bed in a few steps, and convergence
    is then immediate (the law is linear on each piece).  Choosing this over
    an outer loop that re-sets resistances keeps one Newton loop for every
    nonlinear element (lesions and beds together) and its convergence is not
    linear but finite.  A network whose pressure level is fixed only by holding
    beds (a prescribed inflow and every bed holding) has no unique solution;
    the solve then reports a singular system.

    References
    ----------
    Gould KL, Lipscomb K, Hamilton GW (1974) Am J Cardiol 33:87-94 (resting
    flow held until severe stenosis; the qualitative check of REFERENCES 4.3).
    """

    target_flow_m3_s: np.ndarray
    min_resistance_pa_s_m3: np.ndarray

    def evaluate(self, p_a, p_b):
        """(q, dq/dp_a, dq/dp_b) at end pressures ``p_a``, ``p_b`` (Pa)."""
        g = 1.0 / self.min_resistance_pa_s_m3
        open_flow = g * (p_a - p_b)
        holding = open_flow >= self.target_flow_m3_s
        q = np.where(holding, self.target_flow_m3_s, open_flow)
        slope = np.where(holding, 0.0, g)
        return q, slope, -slope

    drop_dependent = True
    """The law is not invertible in q: residual checks pass the actual drop."""

    def pressure_drop(self, q, drop=None):
        """The pressure drop (Pa) the law gives with flow ``q``.

        Without ``drop``: the smallest drop that gives ``q``, q R_min (an
        exhausted bed's drop; a holding bed's may be larger).  With the actual
        ``drop``: ``drop - (q_law(drop) - q) R_min``, which equals ``drop``
        exactly when ``(drop, q)`` is on the law, so that ``|drop - result|``
        measures how far off it is, in Pa.
        """
        r_min = self.min_resistance_pa_s_m3
        if drop is None:
            return np.asarray(q) * r_min
        q_law = np.minimum(self.target_flow_m3_s, drop / r_min)
        return drop - (q_law - q) * r_min


def autoregulating(beds) -> np.ndarray:
    """True for beds that autoregulate (a minimum resistance is given)."""
    return np.isfinite(beds.min_resistance_pa_s_m3)


def bed_states(result) -> np.ndarray:
    """Each bed's state in a steady result: ``fixed``, ``holding`` or ``exhausted``.

    Parameters
    ----------
    result : SteadyResult

    Returns
    -------
    ndarray of str, shape (n_beds,)
        ``fixed`` for beds that do not autoregulate.  An autoregulating bed
        without a resolved target (its own baseline) holds by definition.

    Examples
    --------
    >>> from vesselnet.model import Network
    >>> from vesselnet.solve import solve
    >>> net = Network.build(nodes={"r": {"pressure_pa": 12000.0}},
    ...     vessels=[{"id": "a", "from": "r", "to": "t", "length_m": 0.1, "radius_m": 0.002}],
    ...     beds=[{"id": "organ", "node": "t", "resistance_pa_s_m3": 1e9,
    ...            "min_resistance_pa_s_m3": 2e8, "target_flow_m3_s": 5e-5}])
    >>> bed_states(solve(net)).tolist()       # 5e-5 m^3/s needs 10 kPa at 2e8: not available
    ['exhausted']
    """
    beds = result.network.beds
    states = np.full(len(beds), FIXED, dtype=object)
    auto = autoregulating(beds)
    target = beds.target_flow_m3_s
    held = result.bed_flow_m3_s >= target * (1 - HOLDING_TOLERANCE)
    states[auto & (held | np.isnan(target))] = HOLDING
    states[auto & ~held & np.isfinite(target)] = EXHAUSTED
    return states


def bed_effective_resistance(result) -> np.ndarray:
    """Perfusion pressure over flow of each bed (Pa*s/m^3); the resting value where the flow is 0."""
    flow = result.bed_flow_m3_s
    safe = np.where(flow != 0, flow, 1.0)
    return np.where(flow != 0, result.bed_perfusion_pressure_pa / safe,
                    result.network.beds.resistance_pa_s_m3)


def with_targets(network, bed_flow_m3_s):
    """``network`` with every unresolved autoregulation target set to ``bed_flow_m3_s``.

    Parameters
    ----------
    network : Network
    bed_flow_m3_s : ndarray, shape (n_beds,)
        Baseline flow of each bed (the flow it holds).

    Returns
    -------
    Network
        A new network; beds that do not autoregulate, or have a target, keep theirs.
    """
    beds = network.beds
    fill = autoregulating(beds) & np.isnan(beds.target_flow_m3_s)
    if not fill.any():
        return network
    target = np.where(fill, np.asarray(bed_flow_m3_s, dtype=float), beds.target_flow_m3_s)
    return dataclasses.replace(network, beds=dataclasses.replace(beds, target_flow_m3_s=target))
