"""Linear-elastic thin vessel wall: compliance, wave speed, characteristic impedance.

One convention throughout: a **longitudinally tethered thin wall** of a
linear-elastic, isotropic material, small deformations about the reference
radius.  The area compliance per unit length is

    C' = dA/dP = 2 pi r^3 (1 - nu^2) / (E h),

which with the default Poisson ratio nu = 0.5 (incompressible wall) is
3 pi r^3 / (2 E h).  Passing ``poisson_ratio=0`` gives the free thin wall
2 pi r^3 / (E h) and the classical Moens-Korteweg speed.  The wave speed
1/sqrt(L' C') with the inviscid inertance L' = rho / (pi r^2) is then
c = sqrt(E h / (2 rho r (1 - nu^2))) = c0 / sqrt(1 - nu^2).  E is the
(incremental) Young's modulus at the operating pressure, not a secant
modulus; a pressure-area law (square-root or arctangent) is not this module.

**Time convention** (for the admittance built on C'): phasors of
``e^(+i omega t)``, so the transverse admittance per length is
Y_T = +i omega C'.

Examples
--------
>>> import numpy as np
>>> print(np.round(moens_korteweg_speed(12.5e-3, 1.5e-3, 0.4e6, 1060.0), 3))
5.494
>>> print(np.round(moens_korteweg_speed(12.5e-3, 1.5e-3, 0.4e6, 1060.0, poisson_ratio=0.0), 3))
4.758
"""

from __future__ import annotations

import numpy as np

from .womersley import _check_positive, _invalid

__all__ = ["compliance_per_length", "segment_compliance", "moens_korteweg_speed",
           "inviscid_characteristic_impedance"]

DEFAULT_POISSON_RATIO = 0.5
"""Incompressible wall material (common practice, no source)."""


def _tether_factor(where: str, poisson_ratio) -> np.ndarray:
    nu = np.asarray(poisson_ratio, dtype=float)
    if np.any(~np.isfinite(nu) | (nu < 0) | (nu > 0.5)):
        raise _invalid(where, f"poisson_ratio must lie in [0, 0.5], got {poisson_ratio}",
                       "use 0.5 for an incompressible wall (default) or 0 for a free thin wall")
    return 1.0 - nu ** 2


def _wall_stiffness(where: str, thickness_m, youngs_modulus_pa) -> np.ndarray:
    """E h [Pa m]; a rigid wall is ``youngs_modulus_pa = inf`` (any thickness)."""
    h = np.asarray(thickness_m, dtype=float)
    e = np.asarray(youngs_modulus_pa, dtype=float)
    if np.any(np.isnan(e) | (e <= 0)):
        raise _invalid(where, f"Young's modulus must be > 0, got {e[np.isnan(e) | (e <= 0)].flat[0]} Pa",
                       "give the modulus in Pa (inf for a rigid wall)")
    rigid = np.isinf(e)
    h_checked = np.where(rigid, 1.0, h)
    _check_positive(where, "wall thickness", h_checked, "m")
    return np.where(rigid, np.inf, e * h_checked)


def compliance_per_length(radius_m, thickness_m, youngs_modulus_pa, *,
                          poisson_ratio=DEFAULT_POISSON_RATIO):
    """Area compliance per unit length of a tethered thin wall, C' = dA/dP.

    Parameters
    ----------
    radius_m : array_like
        Lumen radius [m], > 0.
    thickness_m : array_like
        Wall thickness [m], > 0 (ignored where the modulus is inf).
    youngs_modulus_pa : array_like
        Young's modulus [Pa], > 0; ``np.inf`` marks a rigid wall (C' = 0).
    poisson_ratio : array_like, optional
        Poisson ratio nu in [0, 0.5]; default 0.5.

    Returns
    -------
    ndarray or float
        C' [m^2/Pa] (= m^3/Pa per metre of vessel), broadcast shape.

    Raises
    ------
    NetworkSpecError
        Non-positive radius, thickness or modulus, or nu outside [0, 0.5].

    Notes
    -----
    C' = 2 pi r^3 (1 - nu^2) / (E h); nu = 0.5 gives 3 pi r^3 / (2 E h),
    nu = 0 the free thin wall 2 pi r^3 / (E h).

    References
    ----------
    Standard thin-wall linear elasticity [M]; the tethering factor (1 - nu^2)
    as in the square-root law of Formaggia, Lamponi & Quarteroni (2003)
    J Eng Math 47:251-276 [M].

    Examples
    --------
    >>> c = compliance_per_length(12.5e-3, 1.5e-3, 0.4e6)
    >>> print(f"{0.1 * c:.4e}")            # 10 cm of aorta, m^3/Pa
    1.5340e-09
    """
    where = "compliance_per_length"
    r = np.asarray(radius_m, dtype=float)
    _check_positive(where, "radius", r, "m")
    eh = _wall_stiffness(where, thickness_m, youngs_modulus_pa)
    return (2.0 * np.pi * r ** 3 * _tether_factor(where, poisson_ratio) / eh)[()]


def segment_compliance(length_m, radius_m, thickness_m, youngs_modulus_pa, *,
                       poisson_ratio=DEFAULT_POISSON_RATIO, radius_to_m=None):
    """Compliance of a whole segment, C = integral of C' dx, exact for a linear taper.

    Parameters
    ----------
    length_m : array_like
        Segment length [m], > 0.
    radius_m : array_like
        Lumen radius at the from end [m] (the radius of a uniform segment).
    thickness_m, youngs_modulus_pa : array_like
        As in :func:`compliance_per_length` (constant along the segment).
    poisson_ratio : array_like, optional
        Default 0.5.
    radius_to_m : array_like, optional
        Radius at the to end [m] for a linearly tapered segment; ``None`` means
        uniform.

    Returns
    -------
    ndarray or float
        C [m^3/Pa].

    Notes
    -----
    With r(x) = r0 + (r1 - r0) x / L, the integral of r^3 over the length is
    L (r0 + r1)(r0^2 + r1^2) / 4, so C = pi L (1 - nu^2)(r0 + r1)(r0^2 + r1^2)
    / (2 E h); it is 2 pi r^3 L (1 - nu^2)/(E h) when r0 = r1.

    References
    ----------
    Elementary integration of :func:`compliance_per_length`.

    Examples
    --------
    >>> print(f"{segment_compliance(0.1, 3e-3, 0.6e-3, 0.8e6):.4e}")
    2.6507e-11
    """
    where = "segment_compliance"
    length = np.asarray(length_m, dtype=float)
    _check_positive(where, "length", length, "m")
    r0 = np.asarray(radius_m, dtype=float)
    r1 = r0 if radius_to_m is None else np.asarray(radius_to_m, dtype=float)
    _check_positive(where, "radius", r0, "m")
    _check_positive(where, "radius_to", r1, "m")
    eh = _wall_stiffness(where, thickness_m, youngs_modulus_pa)
    mean_r3 = (r0 + r1) * (r0 ** 2 + r1 ** 2) / 4.0
    return (2.0 * np.pi * mean_r3 * length * _tether_factor(where, poisson_ratio) / eh)[()]


def moens_korteweg_speed(radius_m, thickness_m, youngs_modulus_pa, density_kg_m3, *,
                         poisson_ratio=DEFAULT_POISSON_RATIO):
    """Inviscid pulse-wave speed of a tethered thin-walled tube.

    Parameters
    ----------
    radius_m : array_like
        Lumen radius [m], > 0.
    thickness_m : array_like
        Wall thickness [m], > 0.
    youngs_modulus_pa : array_like
        Young's modulus [Pa], > 0 (inf gives an infinite speed).
    density_kg_m3 : array_like
        Blood density [kg/m^3], > 0.
    poisson_ratio : array_like, optional
        Default 0.5; 0 gives the classical Moens-Korteweg c0.

    Returns
    -------
    ndarray or float
        c [m/s].

    Notes
    -----
    c = 1 / sqrt(L' C') = sqrt(E h / (2 rho r (1 - nu^2))) = c0 / sqrt(1 - nu^2),
    with c0 = sqrt(E h / (2 rho r)) (Moens-Korteweg); 1.1547 c0 at nu = 0.5.
    Consistent with :func:`compliance_per_length`.

    References
    ----------
    Moens AI (1878); Korteweg DJ (1878) [M]; restated in the Biomedical
    Engineering and Design Handbook Vol. 1 (eqs. 3.17-3.18) and Painter (2008)
    Theor Biol Med Model 5:15.

    Examples
    --------
    >>> print(np.round(moens_korteweg_speed([3e-3, 2e-3], [0.6e-3, 0.5e-3],
    ...                                     [0.8e6, 1.0e6], 1060.0), 3))
    [10.031 12.539]
    """
    where = "moens_korteweg_speed"
    r = np.asarray(radius_m, dtype=float)
    rho = np.asarray(density_kg_m3, dtype=float)
    _check_positive(where, "radius", r, "m")
    _check_positive(where, "density", rho, "kg/m3")
    eh = _wall_stiffness(where, thickness_m, youngs_modulus_pa)
    return np.sqrt(eh / (2.0 * rho * r * _tether_factor(where, poisson_ratio)))[()]


def inviscid_characteristic_impedance(radius_m, thickness_m, youngs_modulus_pa,
                                      density_kg_m3, *,
                                      poisson_ratio=DEFAULT_POISSON_RATIO):
    """Characteristic impedance of an inviscid elastic tube, Z0 = rho c / A.

    Parameters
    ----------
    radius_m, thickness_m, youngs_modulus_pa, density_kg_m3 : array_like
        As in :func:`moens_korteweg_speed`.
    poisson_ratio : array_like, optional
        Default 0.5 (c includes the 1/sqrt(1 - nu^2) tethering factor).

    Returns
    -------
    ndarray or float
        Z0 [Pa s/m^3], real.  The usual choice of the proximal resistance of
        a three-element Windkessel at an outlet (see
        :func:`vesselnet.windkessel.windkessel_parameters`).

    Notes
    -----
    Z0 = sqrt(L'/C') = rho c / (pi r^2).  The viscous, frequency-dependent
    value is :func:`vesselnet.transmission.characteristic_impedance`; it tends
    to this one at high Womersley number.

    References
    ----------
    Standard linear wave theory [M]; Westerhof, Lankhaar & Westerhof (2009)
    Med Biol Eng Comput 47:131-141 (Zc in the three-element Windkessel).

    Examples
    --------
    >>> z0 = inviscid_characteristic_impedance(12.5e-3, 1.5e-3, 0.4e6, 1060.0,
    ...                                        poisson_ratio=0.0)
    >>> print(f"{z0 / 1.33322e8:.4f}")     # mmHg*s/mL
    0.0771
    """
    c = moens_korteweg_speed(radius_m, thickness_m, youngs_modulus_pa, density_kg_m3,
                             poisson_ratio=poisson_ratio)
    r = np.asarray(radius_m, dtype=float)
    return (np.asarray(density_kg_m3, dtype=float) * c / (np.pi * r ** 2))[()]
