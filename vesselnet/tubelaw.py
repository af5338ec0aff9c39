"""Distensible vessels: the thin-wall square-root pressure-area law and steady flow through it.

The lumen of a distensible vessel follows the thin-wall, linear-elastic
"square-root" law of one-dimensional arterial models (REFERENCES 6.1), in
the convention with the reference area inside the stiffness constant:

    P - P_ext = beta (sqrt(A) - sqrt(A0)),   beta = sqrt(pi) E h / ((1 - nu^2) A0)   [Pa/m]

(the other common convention writes beta~/A0 with beta~ = (4/3) sqrt(pi) E h,
the nu = 0.5 value; the two are not mixed here).  In radius form the law is
linear: r = r0 (1 + (P - P_ext) / k) with the wall stiffness
k = beta sqrt(A0) = E h / ((1 - nu^2) r0) [Pa], the transmural pressure per
unit of radial strain.  ``r0`` is the radius at zero transmural pressure.

Steady Poiseuille flow along such a tube has a closed form (REFERENCES 6.2),
coded here without cancellation so that it stays exact in the rigid limit
(k -> infinity gives Poiseuille at r0).  Below a floor radius
``FLOOR_FRACTION * r0`` (a collapsed vessel, outside the law; the caller
warns) the law is continued as a rigid tube at the floor radius, which keeps
the flow smooth and strictly monotone in both end pressures for Newton's
method.

Examples
--------
>>> k = wall_stiffness(0.003, 0.0006, 0.8e6, 0.5)          # REFERENCES 6.2 case
>>> print(f"{float(k):.1f} Pa, beta {wall_beta(0.003, 0.0006, 0.8e6, 0.5):.4e} Pa/m")
213333.3 Pa, beta 4.0120e+07 Pa/m
>>> law = DistensibleLaw(np.array([0.003]), np.array([k]), np.array([0.0]),
...                      np.array([3.5e-3]), np.array([0.2]))
>>> q, dqa, dqb = law.evaluate(np.array([100 * 133.322387415]), np.array([95 * 133.322387415]))
>>> print(f"{q[0]:.4e}")
3.8377e-05
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

FLOOR_FRACTION = 0.1
"""Radius, as a fraction of r0, below which the law is continued as a rigid tube.

Reached only at a transmural pressure of -0.9 k, far outside the law (a
collapsing vessel, for which the caller warns); the floor just keeps the
Newton iteration well defined there."""

SMALL_STRAIN = 0.10
"""Largest radial strain |r/r0 - 1| for which the linear law is trusted.

The law linearises both the wall material and the geometry (thin wall,
thickness unchanged, Laplace's relation on the reference radius): at a strain
of 10 % the Green-Lagrange and engineering strains already differ by 5 %
(a factor 1 + eps/2), and the wall keeps its thickness only to that order.
Vessel walls also stiffen markedly beyond strains of this order as collagen
is recruited (veins above about 30 mmHg, REFERENCES 8.6) [M]."""


def wall_stiffness(radius_m, thickness_m, modulus_pa, poisson):
    """Transmural pressure per unit radial strain, k = E h / ((1 - nu^2) r0) (Pa).

    Parameters
    ----------
    radius_m : array_like
        Lumen radius r0 at zero transmural pressure (m).
    thickness_m : array_like
        Wall thickness h (m).
    modulus_pa : array_like
        Young's modulus E of the wall (Pa); ``inf`` gives a rigid wall.
    poisson : array_like
        Poisson ratio nu (0.5: incompressible, longitudinally tethered wall).

    Returns
    -------
    ndarray
        k in Pa (k = beta sqrt(A0)).

    Notes
    -----
    From P - P_ext = beta (sqrt(A) - sqrt(A0)) with beta = sqrt(pi) E h /
    ((1 - nu^2) A0): sqrt(A) / sqrt(A0) = r / r0 = 1 + (P - P_ext) / k.

    References
    ----------
    Formaggia, Lamponi & Quarteroni 2003, J Eng Math 47:251-276; Sherwin,
    Franke, Peiro & Parker 2003, J Eng Math 47:217-250 (REFERENCES 6.1, from memory).

    Examples
    --------
    >>> print(f"{float(wall_stiffness(0.003, 0.0006, 0.8e6, 0.5)) / 133.322387415:.1f}")  # mmHg
    1600.1
    """
    nu = np.asarray(poisson, dtype=float)
    return (np.asarray(modulus_pa, dtype=float) * np.asarray(thickness_m, dtype=float)
            / ((1.0 - nu * nu) * np.asarray(radius_m, dtype=float)))


def wall_beta(radius_m, thickness_m, modulus_pa, poisson):
    """The square-root law's beta = sqrt(pi) E h / ((1 - nu^2) A0) (Pa/m), A0 = pi r0^2.

    >>> print(f"{wall_beta(0.003, 0.0006, 0.8e6, 0.5):.4e}")     # REFERENCES 6.2: 4.0120e7
    4.0120e+07
    """
    r0 = np.asarray(radius_m, dtype=float)
    return wall_stiffness(r0, thickness_m, modulus_pa, poisson) / (np.sqrt(np.pi) * r0)


def distended_radius(radius_m, stiffness_pa, transmural_pa):
    """Lumen radius r = r0 (1 + (P - P_ext) / k) under transmural pressure P - P_ext (m).

    No floor is applied: below r0 FLOOR_FRACTION the value is that of the
    linear law, which no longer describes the vessel.

    >>> round(float(distended_radius(0.003, 1.6e5, 13332.2387415)) * 1e3, 4)   # mm
    3.25
    """
    r0 = np.asarray(radius_m, dtype=float)
    return r0 * (1.0 + np.asarray(transmural_pa, dtype=float) / np.asarray(stiffness_pa, dtype=float))


def laplace_wall_stress(transmural_pa, radius_m, thickness_m):
    """Circumferential (hoop) stress of a thin-walled tube, sigma = P r / h (Pa).

    Parameters
    ----------
    transmural_pa : array_like
        Pressure inside minus outside (Pa).
    radius_m : array_like
        Lumen radius (m), the distended one for a distensible vessel.
    thickness_m : array_like
        Wall thickness (m); NaN gives NaN.

    Notes
    -----
    Laplace's law for a thin-walled cylinder (the hoop-stress or Barlow
    formula of pressure vessels): a force balance on half the tube gives
    2 sigma h L = 2 P r L.  Valid for h << r; the lumen radius is used.

    References
    ----------
    Y.C. Fung, Biomechanics: Circulation (2nd ed., Springer 1997), ch. 8;
    W.W. Nichols & M.F. O'Rourke, McDonald's Blood Flow in Arteries (common
    textbook relation).

    Examples
    --------
    >>> round(float(laplace_wall_stress(100 * 133.322387415, 0.003, 0.0006)) / 1e3, 2)   # kPa
    66.66
    """
    return (np.asarray(transmural_pa, dtype=float) * np.asarray(radius_m, dtype=float)
            / np.asarray(thickness_m, dtype=float))


def _clipped(radius_m, stiffness_pa, transmural_pa):
    """Radius above the floor, and transmural pressures measured from the floor."""
    t_floor = stiffness_pa * (FLOOR_FRACTION - 1.0)          # -inf for a rigid wall
    above = np.maximum(transmural_pa, t_floor)
    below = np.minimum(transmural_pa - t_floor, 0.0)         # <= 0, zero above the floor
    return distended_radius(radius_m, stiffness_pa, above), above, below


def _sum_powers(x, y, n):
    """x^n + x^(n-1) y + ... + y^n, the cancellation-free (x^(n+1) - y^(n+1)) / (x - y)."""
    total = np.zeros(np.broadcast(x, y).shape)
    for j in range(n + 1):
        total = total + x ** (n - j) * y ** j
    return total


def distensible_flow(p_a_pa, p_b_pa, radius_m, stiffness_pa, external_pa, viscosity_pa_s, length_m):
    """Steady flow through a distensible tube from end ``a`` to end ``b``, with derivatives.

    Parameters
    ----------
    p_a_pa, p_b_pa : array_like
        End pressures (Pa).
    radius_m : array_like
        Radius r0 at zero transmural pressure (m).
    stiffness_pa : array_like
        Wall stiffness k (see :func:`wall_stiffness`), ``inf`` for a rigid wall.
    external_pa : array_like
        Pressure outside the vessel (Pa).
    viscosity_pa_s, length_m : array_like
        Viscosity (Pa*s) and tube length (m).

    Returns
    -------
    q : ndarray
        Flow from a to b (m^3/s).
    dq_dpa, dq_dpb : ndarray
        Exact partial derivatives: pi r_a^4 / (8 mu L) and -pi r_b^4 / (8 mu L),
        the Poiseuille conductances at the two end radii.

    Notes
    -----
    Poiseuille in area form, Q = -(A^2 / (8 pi mu)) dP/dx, with dP = beta
    d(sqrt A), integrates to Q = beta (A_a^(5/2) - A_b^(5/2)) / (40 pi mu L)
    (REFERENCES 6.2).  With r linear in P this is
    Q = pi (P_a - P_b) (r_a^4 + r_a^3 r_b + ... + r_b^4) / (40 mu L), which is
    free of cancellation and tends to Poiseuille at r0 as k -> infinity.
    Below the floor radius the potential r^5 is continued by its tangent.

    References
    ----------
    REFERENCES 6.2 (derivation, check values computed with numpy).

    Examples
    --------
    >>> mmhg, k = 133.322387415, wall_stiffness(0.003, 0.0006, 0.8e6, 0.5)
    >>> q, _, _ = distensible_flow(100 * mmhg, 95 * mmhg, 0.003, k, 100 * mmhg, 3.5e-3, 0.2)
    >>> print(f"{float(q):.4e}")        # REFERENCES 6.2, P_ext = 100 mmHg
    3.0103e-05
    """
    p_a = np.asarray(p_a_pa, dtype=float)
    p_b = np.asarray(p_b_pa, dtype=float)
    r0, k = np.asarray(radius_m, dtype=float), np.asarray(stiffness_pa, dtype=float)
    ext = np.asarray(external_pa, dtype=float)
    r_a, t_a, f_a = _clipped(r0, k, p_a - ext)
    r_b, t_b, f_b = _clipped(r0, k, p_b - ext)
    both_above = (f_a == 0) & (f_b == 0)
    drop = np.where(both_above, p_a - p_b, t_a - t_b)        # k (r_a - r_b) / r0, exactly
    r_floor = FLOOR_FRACTION * r0
    scale = np.pi / (40.0 * np.asarray(viscosity_pa_s, dtype=float) * np.asarray(length_m, dtype=float))
    q = scale * (drop * _sum_powers(r_a, r_b, 4) + 5.0 * r_floor**4 * (f_a - f_b))
    return q, 5.0 * scale * r_a**4, -5.0 * scale * r_b**4


def distensible_volume(p_a_pa, p_b_pa, radius_m, stiffness_pa, external_pa, length_m):
    """Lumen volume of a distensible tube carrying steady flow between two end pressures (m^3).

    Notes
    -----
    Along the tube sqrt(A)^5 varies linearly with x (from the flow law), so
    V = integral of A dx = (5/7) L pi (r_b^7 - r_a^7) / (r_b^5 - r_a^5),
    coded cancellation-free; it equals pi r0^2 L in the rigid limit.  Radii
    are clipped at the floor (see :data:`FLOOR_FRACTION`).

    Examples
    --------
    >>> v = distensible_volume(1000.0, 1000.0, 0.003, 1e4, 0.0, 0.2)     # uniform, 10 % strain
    >>> round(float(v / (np.pi * 0.0033**2 * 0.2)), 12)
    1.0
    """
    r0, k = np.asarray(radius_m, dtype=float), np.asarray(stiffness_pa, dtype=float)
    ext = np.asarray(external_pa, dtype=float)
    r_a = _clipped(r0, k, np.asarray(p_a_pa, dtype=float) - ext)[0]
    r_b = _clipped(r0, k, np.asarray(p_b_pa, dtype=float) - ext)[0]
    ratio = _sum_powers(r_a, r_b, 6) / _sum_powers(r_a, r_b, 4)
    return (5.0 / 7.0) * np.pi * np.asarray(length_m, dtype=float) * ratio


@dataclass(frozen=True, eq=False)
class DistensibleLaw:
    """Flow law of distensible uniform tubes (one element per entry; SI arrays).

    ``radius_m`` is r0 at zero transmural pressure, ``stiffness_pa`` the wall
    stiffness k, ``external_pa`` the outside pressure.  The flow depends on
    both end pressures separately (dq/dp_a != -dq/dp_b), so
    :meth:`pressure_drop` needs the pressure at ``a`` too
    (``inlet_dependent``).
    """

    radius_m: np.ndarray
    stiffness_pa: np.ndarray
    external_pa: np.ndarray
    viscosity_pa_s: np.ndarray
    length_m: np.ndarray
    inlet_dependent = True

    def evaluate(self, p_a, p_b):
        """(q, dq/dp_a, dq/dp_b) at end pressures ``p_a``, ``p_b`` (see :func:`distensible_flow`)."""
        return distensible_flow(p_a, p_b, self.radius_m, self.stiffness_pa, self.external_pa,
                                self.viscosity_pa_s, self.length_m)

    def pressure_drop(self, q, p_a):
        """The law solved for p_a - p_b at flows ``q`` and inlet pressures ``p_a``.

        Newton's method on p_b (the law is smooth, monotone and convex in
        p_b), started from the Poiseuille drop at the inlet radius.
        """
        q = np.asarray(q, dtype=float)
        p_a = np.asarray(p_a, dtype=float)
        _, g_a, _ = self.evaluate(p_a, p_a)
        p_b = p_a - q / g_a
        for _ in range(60):
            q_b, _, dq_db = self.evaluate(p_a, p_b)
            step = (q_b - q) / dq_db
            p_b = p_b - step
            if np.all(np.abs(step) <= 4e-14 * np.abs(p_a - p_b) + 1e-300):
                break
        return p_a - p_b
