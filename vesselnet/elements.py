"""Flow laws of two-terminal elements, vectorised, with exact derivatives.

Each law gives, for end pressures ``p_a`` and ``p_b``, the flow ``q`` from
``a`` to ``b`` and its partial derivatives, which is all the Newton solver
needs.  New physics (distensible walls, autoregulating beds) adds a law here.

Examples
--------
>>> import numpy as np
>>> law = QuadraticLaw(np.array([2.0]), np.array([1.0]))   # dP = 2 q + q|q|
>>> q, dqa, dqb = law.evaluate(np.array([8.0]), np.array([0.0]))
>>> float(q[0]), float(dqa[0]), float(dqb[0])
(2.0, 0.16666666666666666, -0.16666666666666666)
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True, eq=False)
class LinearLaw:
    """q = g (p_a - p_b) with conductance ``g`` (m^3/(s*Pa))."""

    conductance: np.ndarray

    def evaluate(self, p_a, p_b):
        g = self.conductance
        return g * (p_a - p_b), g, -g

    def pressure_drop(self, q):
        """The law solved for dP, for residual checks."""
        return q / self.conductance


@dataclass(frozen=True, eq=False)
class QuadraticLaw:
    """dP = r q + k q|q| (a lesion in series with its vessel), solved for q.

    Notes
    -----
    q = 2 dP / (r + sqrt(r^2 + 4 k |dP|)), the cancellation-free root, and
    dq/d(dP) = 1 / (r + 2 k |q|) > 0 everywhere, so Newton's method on the
    nodal pressures sees a smooth, monotone law, reversed flow included.
    """

    resistance: np.ndarray
    quadratic: np.ndarray

    def evaluate(self, p_a, p_b):
        dp = p_a - p_b
        r, k = self.resistance, self.quadratic
        q = 2.0 * dp / (r + np.sqrt(r * r + 4.0 * k * np.abs(dp)))
        slope = 1.0 / (r + 2.0 * k * np.abs(q))
        return q, slope, -slope

    def pressure_drop(self, q):
        return self.resistance * q + self.quadratic * q * np.abs(q)


@dataclass(frozen=True, eq=False)
class ElementGroup:
    """Elements sharing one law: terminals, ground pressures, and what they stand for.

    ``b = -1`` marks an element to ground at ``ground_pa``.  ``kind`` is
    ``"vessel"`` or ``"bed"``; ``rows`` are the vessel or bed rows represented.
    """

    kind: str
    rows: np.ndarray
    a: np.ndarray
    b: np.ndarray
    ground_pa: np.ndarray
    law: object

    def evaluate(self, pressure_pa: np.ndarray):
        """(q, dq/dp_a, dq/dp_b) at nodal pressures ``pressure_pa``."""
        p_b = np.where(self.b >= 0, pressure_pa[np.maximum(self.b, 0)], self.ground_pa)
        return self.law.evaluate(pressure_pa[self.a], p_b)

    def pressure_drop(self, pressure_pa: np.ndarray) -> np.ndarray:
        p_b = np.where(self.b >= 0, pressure_pa[np.maximum(self.b, 0)], self.ground_pa)
        return pressure_pa[self.a] - p_b

    def law_pressure_drop(self, pressure_pa: np.ndarray, q: np.ndarray) -> np.ndarray:
        """The law solved for the pressure drop at flows ``q``, for residual checks.

        A law whose drop also depends on the pressure at ``a`` (a distensible
        tube; ``inlet_dependent = True``) gets it as a second argument; a law
        that is not invertible in q (an autoregulating bed holds its flow over
        a range of drops; ``drop_dependent = True``) gets the actual drop.
        """
        if getattr(self.law, "inlet_dependent", False):
            return self.law.pressure_drop(q, pressure_pa[self.a])
        if getattr(self.law, "drop_dependent", False):
            return self.law.pressure_drop(q, self.pressure_drop(pressure_pa))
        return self.law.pressure_drop(q)
