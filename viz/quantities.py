"""Per-vessel quantities a view can colour by, in display units.

A :class:`Quantity` turns a steady result into one value per vessel in the
unit it is shown in (the units of written results, SPEC section 5).  Views
read results only; nothing here solves.

Examples
--------
>>> from vesselnet.model import Network
>>> from vesselnet.solve import solve
>>> net = Network.build(nodes={"r": {"pressure_pa": 13332.2387415}},
...     vessels=[{"id": "a", "from": "r", "to": "t", "length_m": 0.1, "radius_m": 0.002}],
...     beds=[{"id": "organ", "node": "t", "resistance_pa_s_m3": 1.3332e8}])
>>> q = quantity("flow")
>>> q.title, round(float(q.values(solve(net))[0]), 1)
('flow [mL/min]', 4020.3)
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from vesselnet.errors import NetworkSpecError, Problem
from vesselnet.result import SteadyResult
from vesselnet.units import DISPLAY_UNITS, from_si


@dataclass(frozen=True)
class Quantity:
    """One per-vessel quantity shown by a view.

    Attributes
    ----------
    name : str
        Key used on the command line (``--color NAME``).
    label : str
        Words shown to people (``mean pressure``).
    unit : str
        Display unit (``mmHg``); ``1`` for a dimensionless number.
    values : callable
        ``values(result) -> ndarray (n_vessels,)`` in ``unit``.
    log_scale : bool
        Colour on a logarithmic scale when the positive values span more
        than two decades (flows and shear do, from aorta to arteriole).
    """

    name: str
    label: str
    unit: str
    values: Callable[[SteadyResult], np.ndarray]
    log_scale: bool = False

    @property
    def title(self) -> str:
        """``label [unit]``, the text of colour bars and axes."""
        return f"{self.label} [{self.unit}]"


def _pressure(result: SteadyResult) -> np.ndarray:
    v = result.network.vessels
    mean = 0.5 * (result.pressure_pa[v.from_node] + result.pressure_pa[v.to_node])
    return from_si(mean, "pressure", DISPLAY_UNITS["pressure"])


def _extra(key: str) -> Callable[[SteadyResult], np.ndarray]:
    def values(result: SteadyResult) -> np.ndarray:
        return 100.0 * np.asarray(result.vessel_extra[key], dtype=float)
    return values


QUANTITIES: dict[str, Quantity] = {q.name: q for q in (
    Quantity("pressure", "mean pressure", DISPLAY_UNITS["pressure"], _pressure),
    Quantity("flow", "flow", DISPLAY_UNITS["flow"],
             lambda r: from_si(np.abs(r.vessel_flow_m3_s), "flow", DISPLAY_UNITS["flow"]), True),
    Quantity("wss", "wall shear stress", DISPLAY_UNITS["wss"], lambda r: r.vessel_wss_pa, True),
    Quantity("velocity", "mean velocity", DISPLAY_UNITS["velocity"],
             lambda r: np.abs(r.vessel_mean_velocity_m_s), True),
    Quantity("pressure_drop", "pressure drop", DISPLAY_UNITS["pressure"],
             lambda r: from_si(r.vessel_pressure_drop_pa, "pressure", DISPLAY_UNITS["pressure"])),
    Quantity("radius", "mean radius", DISPLAY_UNITS["radius"],
             lambda r: from_si(r.vessel_mean_radius_m, "length", DISPLAY_UNITS["radius"])),
    Quantity("reynolds", "Reynolds number", "1", lambda r: np.abs(r.vessel_reynolds), True),
    Quantity("hematocrit", "discharge hematocrit", "%", _extra("hematocrit")),
    Quantity("tube_hematocrit", "tube hematocrit", "%", _extra("tube_hematocrit")),
    Quantity("wall_stress", "circumferential wall stress", "kPa",
             lambda r: from_si(np.asarray(r.vessel_extra["wall_stress_pa"], dtype=float), "pressure", "kPa")),
    Quantity("wall_strain", "circumferential wall strain", "%", _extra("wall_strain")),
    Quantity("volume", "blood volume", "mL",
             lambda r: from_si(np.asarray(r.vessel_extra["volume_m3"], dtype=float), "volume", "mL"), True),
)}
"""Every quantity a view can colour by, keyed by name."""

NEEDS_EXTRA = {"hematocrit": "hematocrit", "tube_hematocrit": "tube_hematocrit",
               "wall_stress": "wall_stress_pa", "wall_strain": "wall_strain", "volume": "volume_m3"}
"""Quantities that exist only when the result carries that ``vessel_extra`` entry."""


def quantity(name: str) -> Quantity:
    """The quantity called ``name``.

    Raises
    ------
    NetworkSpecError
        Unknown name (the message lists the known ones).
    """
    try:
        return QUANTITIES[name]
    except KeyError:
        raise NetworkSpecError([Problem("", 0, 0, "--color", f"unknown quantity {name!r}",
                                        f"choose one of {', '.join(QUANTITIES)}")]) from None


def available(result: SteadyResult) -> tuple[str, ...]:
    """Names of the quantities this result can be coloured by."""
    return tuple(n for n in QUANTITIES if n not in NEEDS_EXTRA or NEEDS_EXTRA[n] in result.vessel_extra)


def vessel_values(result: SteadyResult, name: str) -> np.ndarray:
    """Values of quantity ``name`` for every vessel of ``result``, in its display unit.

    Raises
    ------
    NetworkSpecError
        Unknown quantity, or one this result does not carry (hematocrit
        without a rheology law).
    """
    q = quantity(name)
    if name not in available(result):
        raise NetworkSpecError([Problem(
            "", 0, 0, f"--color {name}", f"this result has no {q.label} (hematocrit needs a "
            "viscosity law with red-cell separation, wall quantities distensible walls)",
            f"choose one of {', '.join(available(result))}")])
    return np.asarray(q.values(result), dtype=float)
