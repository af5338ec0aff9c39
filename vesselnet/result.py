"""The steady solution of a network: pressures, flows and what follows from them.

All arrays are SI and aligned with the network's rows (nodes, vessels, beds
in input order).  Derived quantities (pressure drop, velocity, wall shear
stress, Reynolds number, shares) are computed from the stored solution, so
they can never disagree with it.
"""

from __future__ import annotations

import functools
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from .model import Network
from .resistance import reynolds_number, wall_shear_stress
from .units import MMHG_PA

LAMINAR_REYNOLDS = 2000.0
"""Upper end of the laminar range in steady pipe flow (Re about 2000; J.K-J. Li,
Dynamics of the Vascular System, REFERENCES 1.4)."""


@dataclass(frozen=True, eq=False)
class SteadyResult:
    """Steady pressures and flows of one network.

    Attributes
    ----------
    network : Network
        The network solved (never modified).
    pressure_pa : ndarray, shape (n_nodes,)
        Nodal pressures; NaN in parts cut off from every pressure reference.
    vessel_flow_m3_s : ndarray, shape (n_vessels,)
        Flow, positive from ``from`` to ``to``; zero in occluded vessels.
    bed_flow_m3_s : ndarray, shape (n_beds,)
        Flow into each bed.
    boundary_inflow_m3_s : ndarray, shape (n_nodes,)
        Flow entering the network at each node from outside (prescribed
        inflows and fixed-pressure nodes; negative where it leaves).
    vessel_viscosity_pa_s : ndarray, shape (n_vessels,)
        Viscosity used in each vessel.
    vessel_resistance_pa_s_m3 : ndarray, shape (n_vessels,)
        Effective resistance dP/Q at the solution (the linear one where Q = 0).
    iterations : int
        Newton steps taken (1 for a linear network).
    residual_history : tuple of float
        Largest nodal flow imbalance relative to the total inflow, before each step and at the end.
    mass_balance : float
        Final largest nodal flow imbalance relative to the total inflow.
    law_residual : float
        Largest |dP - law(Q)| relative to the largest pressure drop.
    solver : str
        Which linear solver ran (and its ordering).
    solver_reason : str
        Why that solver was chosen.
    warnings : tuple of str
        Things the user should know (flows outside the laminar range, parts cut off).
    vessel_extra : mapping of str to ndarray
        Further per-vessel results of other physics (for example ``hematocrit``).
    bed_extra : mapping of str to ndarray
        Further per-bed results (for example ``red_cell_delivery_m3_s``).
    extra_checks : mapping of str to object
        Convergence records of other physics (for example ``rheology``), JSON-ready
        values (numbers, text, lists, mappings), written under ``checks``.
    condition_estimate : float
        1-norm condition number of the last scaled nodal matrix (NaN when nothing was solved).
    """

    network: Network
    pressure_pa: np.ndarray
    vessel_flow_m3_s: np.ndarray
    bed_flow_m3_s: np.ndarray
    boundary_inflow_m3_s: np.ndarray
    vessel_viscosity_pa_s: np.ndarray
    vessel_resistance_pa_s_m3: np.ndarray
    iterations: int
    residual_history: tuple[float, ...]
    mass_balance: float
    law_residual: float
    solver: str
    warnings: tuple[str, ...] = ()
    vessel_extra: Mapping[str, np.ndarray] = field(default_factory=dict)
    bed_extra: Mapping[str, np.ndarray] = field(default_factory=dict)
    extra_checks: Mapping[str, object] = field(default_factory=dict)
    condition_estimate: float = float("nan")
    solver_reason: str = ""

    @functools.cached_property
    def inflow_m3_s(self) -> float:
        """Total flow entering the network from outside (m^3/s)."""
        into = self.boundary_inflow_m3_s
        reverse_beds = -self.bed_flow_m3_s[(self.bed_flow_m3_s < 0) & (self.network.beds.outflow_node < 0)]
        return float(into[into > 0].sum() + reverse_beds.sum())

    @property
    def vessel_pressure_drop_pa(self) -> np.ndarray:
        """Pressure at ``from`` minus pressure at ``to`` (Pa)."""
        v = self.network.vessels
        return self.pressure_pa[v.from_node] - self.pressure_pa[v.to_node]

    @property
    def vessel_mean_radius_m(self) -> np.ndarray:
        """Mean of the end radii, distended where wall mechanics ran (``vessel_extra``
        ``lumen_radius_m``) (m): the radius velocity and shear are reported at."""
        v = self.network.vessels
        return self.vessel_extra.get("lumen_radius_m", 0.5 * (v.radius_in_m + v.radius_out_m))

    @property
    def vessel_mean_velocity_m_s(self) -> np.ndarray:
        """Cross-section mean velocity Q / (pi r^2) at the mean radius (m/s), signed."""
        return self.vessel_flow_m3_s / (np.pi * self.vessel_mean_radius_m**2)

    @property
    def vessel_wss_pa(self) -> np.ndarray:
        """Poiseuille wall shear stress 4 mu |Q| / (pi r^3) at the mean radius (Pa)."""
        return np.abs(wall_shear_stress(self.vessel_flow_m3_s, self.vessel_mean_radius_m,
                                        self.vessel_viscosity_pa_s))

    @property
    def vessel_reynolds(self) -> np.ndarray:
        """Reynolds number from the mean velocity and mean diameter."""
        return reynolds_number(self.vessel_flow_m3_s, self.vessel_mean_radius_m,
                               self.vessel_viscosity_pa_s, self.network.blood.density_kg_m3)

    @property
    def vessel_reversed(self) -> np.ndarray:
        """True where flow runs against the vessel's nominal ``from -> to`` direction."""
        scale = max(float(np.abs(self.vessel_flow_m3_s).max(initial=0.0)), 1e-300)
        return self.vessel_flow_m3_s < -1e-12 * scale

    @property
    def bed_share(self) -> np.ndarray:
        """Each bed's flow as a fraction of the total inflow."""
        total = self.inflow_m3_s
        return self.bed_flow_m3_s / total if total > 0 else np.full(len(self.bed_flow_m3_s), np.nan)

    @property
    def bed_pressure_pa(self) -> np.ndarray:
        """Pressure at each bed's node (Pa)."""
        return self.pressure_pa[self.network.beds.node]

    @property
    def bed_outflow_pressure_pa(self) -> np.ndarray:
        """Pressure each bed drains to (Pa): its outflow pressure or its outflow node's."""
        beds = self.network.beds
        into_node = self.pressure_pa[np.maximum(beds.outflow_node, 0)]
        return np.where(beds.outflow_node >= 0, into_node, beds.outflow_pressure_pa)

    @property
    def bed_perfusion_pressure_pa(self) -> np.ndarray:
        """Bed node pressure minus its outflow pressure (Pa)."""
        return self.bed_pressure_pa - self.bed_outflow_pressure_pa

    def node_table(self, ids: bool = True) -> dict[str, np.ndarray]:
        """Per-node columns (SI): id, pressure, boundary inflow (``ids=False``: numbers only)."""
        table = {"id": np.array(self.network.nodes.ids, dtype=object)} if ids else {}
        table.update({"pressure_pa": self.pressure_pa, "inflow_m3_s": self.boundary_inflow_m3_s})
        return table

    def vessel_table(self, ids: bool = True) -> dict[str, np.ndarray]:
        """Per-vessel columns (SI): flow, pressure drop, velocity, shear, Reynolds, ...

        ``ids=False`` leaves out the text columns ``id``, ``from`` and ``to``.
        """
        v = self.network.vessels
        table = {}
        if ids:
            nodes = np.array(self.network.nodes.ids, dtype=object)
            table = {"id": np.array(v.ids, dtype=object), "from": nodes[v.from_node],
                     "to": nodes[v.to_node]}
        table.update({"flow_m3_s": self.vessel_flow_m3_s,
                      "pressure_drop_pa": self.vessel_pressure_drop_pa,
                      "mean_velocity_m_s": self.vessel_mean_velocity_m_s, "wss_pa": self.vessel_wss_pa,
                      "reynolds": self.vessel_reynolds, "reversed": self.vessel_reversed,
                      "resistance_pa_s_m3": self.vessel_resistance_pa_s_m3,
                      "viscosity_pa_s": self.vessel_viscosity_pa_s})
        table.update(self.vessel_extra)
        return table

    def bed_table(self, ids: bool = True) -> dict[str, np.ndarray]:
        """Per-bed columns (SI): flow, share, node pressure, perfusion pressure, extras
        (``ids=False``: without ``id`` and ``node``)."""
        beds = self.network.beds
        table = {}
        if ids:
            nodes = np.array(self.network.nodes.ids, dtype=object)
            table = {"id": np.array(beds.ids, dtype=object), "node": nodes[beds.node]}
        table.update({"flow_m3_s": self.bed_flow_m3_s, "share": self.bed_share,
                      "pressure_pa": self.bed_pressure_pa,
                      "perfusion_pressure_pa": self.bed_perfusion_pressure_pa})
        table.update(self.bed_extra)
        return table

    def summary(self) -> str:
        """One line: inflow, beds, largest share, mass balance.

        >>> from vesselnet.model import Network
        >>> from vesselnet.solve import solve
        >>> net = Network.build(nodes={"r": {"pressure_pa": 13332.2}},
        ...     vessels=[{"id": "a", "from": "r", "to": "t", "length_m": 0.1, "radius_m": 0.002}],
        ...     beds=[{"id": "organ", "node": "t", "resistance_pa_s_m3": 1.3332e8}])
        >>> print(solve(net).summary())  # doctest: +ELLIPSIS
        network: inflow 4020.3 mL/min, 1 bed, largest share organ 100.0 %, mass balance ...
        """
        inflow = self.inflow_m3_s * 6e7
        beds = self.network.beds
        text = f"{self.network.name}: inflow {inflow:.5g} mL/min, {len(beds)} bed"
        text += "s" if len(beds) != 1 else ""
        if np.isfinite(self.bed_share).any():  # shares are NaN when nothing flows in
            k = int(np.nanargmax(self.bed_share))
            text += f", largest share {beds.ids[k]} {100 * self.bed_share[k]:.1f} %"
        mean_p = ""
        if len(self.pressure_pa):
            mean_p = f", highest pressure {np.nanmax(self.pressure_pa) / MMHG_PA:.1f} mmHg"
        return text + f", mass balance {self.mass_balance:.1e}" + mean_p


def laminar_warnings(result_network: Network, reynolds: np.ndarray, limit: int = 5) -> list[str]:
    """Warnings for vessels whose Reynolds number is above the laminar range."""
    above = np.flatnonzero(reynolds > LAMINAR_REYNOLDS)
    if not len(above):
        return []
    order = above[np.argsort(-reynolds[above])]
    named = ", ".join(f"'{result_network.vessels.ids[i]}' (Re {reynolds[i]:.0f})" for i in order[:limit])
    more = f" and {len(above) - limit} more" if len(above) > limit else ""
    return [f"Reynolds number above the laminar range (about {LAMINAR_REYNOLDS:.0f}) in {named}{more}:"
            " flow there may be transitional, and Poiseuille then underestimates the resistance"]
