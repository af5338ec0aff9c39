"""What each lesion does in a steady solution: pressure drop and distal/proximal pressure ratio.

A lesion sits inside its vessel (see :func:`vesselnet.solve.lesion_coefficients`):
healthy vessel, lesion, healthy vessel, in series, all carrying the vessel's
flow.  Its *proximal* pressure is the pressure just before it on the upstream
side and its *distal* pressure the pressure just after it on the downstream
side, upstream and downstream in the direction the blood actually flows.  The
ratio distal / proximal of these mean (absolute) pressures is the model's
analogue of a fractional flow reserve reading when the beds are at maximal
dilation; at resting bed resistances it is a resting ratio (REFERENCES 8.9,
10.14: FFR is defined at maximal hyperaemia).

Examples
--------
>>> from vesselnet.model import Network
>>> from vesselnet.solve import solve
>>> net = Network.build(nodes={"a": {"pressure_pa": 12000.0}},
...     vessels=[{"id": "cor", "from": "a", "to": "d", "length_m": 0.05, "radius_m": 0.0015,
...               "stenosis_reduction": 0.6, "stenosis_length_m": 0.01}],
...     beds=[{"id": "bed", "node": "d", "resistance_pa_s_m3": 1e10, "outflow_pressure_pa": 0.0}])
>>> table = lesion_table(solve(net))
>>> table["vessel"].tolist(), round(float(table["pressure_ratio"][0]), 3)
(['cor'], 0.895)
"""

from __future__ import annotations

import numpy as np

from .solve import lesion_coefficients, vessel_resistance
from .stenosis import stenosis_pressure_drop

FITTED_RANGE_AREA = (0.5, 0.9)
"""Area reductions the Young-Tsai coefficients were fitted over, roughly (REFERENCES 4.1)."""


def lesion_rows(network) -> np.ndarray:
    """Rows of the open vessels that carry a lesion."""
    v = network.vessels
    return np.flatnonzero(~v.occluded & ~np.isnan(v.stenosis_reduction))


def lesion_table(result) -> dict[str, np.ndarray]:
    """Per-lesion columns (SI) of a steady result.

    Parameters
    ----------
    result : SteadyResult

    Returns
    -------
    dict of ndarray
        ``vessel`` (ids), ``row``, ``reduction`` (diameter), ``area_reduction``,
        ``flow_m3_s`` (the vessel's, signed), ``pressure_drop_pa`` (across the
        lesion itself, in the flow direction, >= 0), ``proximal_pressure_pa``,
        ``distal_pressure_pa``, ``pressure_ratio`` (distal / proximal; 1 at
        zero flow), ``fitted_range`` (area reduction within the range the law
        was fitted on).
    """
    net = result.network
    v = net.vessels
    rows = lesion_rows(net)
    viscosity = result.vessel_viscosity_pa_s
    r_v, k_t, upstream, _ = lesion_coefficients(net, rows, viscosity,
                                                vessel_resistance(net, viscosity))
    q = result.vessel_flow_m3_s[rows]
    after_upstream = result.pressure_pa[v.from_node[rows]] - upstream * q
    drop = stenosis_pressure_drop(q, r_v, k_t)            # from the 'from' side, signed
    after_lesion = after_upstream - drop
    forward = q >= 0
    proximal = np.where(forward, after_upstream, after_lesion)
    distal = np.where(forward, after_lesion, after_upstream)
    safe = np.where(proximal != 0, proximal, 1.0)
    ratio = np.where(q != 0, distal / safe, 1.0)
    area = 1.0 - (1.0 - v.stenosis_reduction[rows]) ** 2
    return {"vessel": np.array([v.ids[i] for i in rows], dtype=object), "row": rows,
            "reduction": v.stenosis_reduction[rows], "area_reduction": area, "flow_m3_s": q,
            "pressure_drop_pa": np.abs(drop), "proximal_pressure_pa": proximal,
            "distal_pressure_pa": distal, "pressure_ratio": ratio,
            "fitted_range": (area >= FITTED_RANGE_AREA[0]) & (area <= FITTED_RANGE_AREA[1])}
