"""Oscillatory flow in a rigid tube (Womersley): Womersley number, F10, Z_L.

Linear theory of fully developed, laminar, axisymmetric flow of a Newtonian
fluid in a straight rigid tube driven by a harmonic pressure gradient.

**Time convention.** Every quantity is a phasor of the time dependence
``e^(+i omega t)``: a physical signal is ``Re[X e^(+i omega t)]``.  With this
convention the Bessel argument is ``alpha i^(3/2) = alpha e^(3 i pi/4)`` and an
inertance has a *positive* imaginary impedance ``+i omega L``.  (With
``e^(-i omega t)`` every imaginary part flips sign; do not mix the two.)

Examples
--------
>>> import numpy as np
>>> omega = 2 * np.pi * 1.2                      # 72 beats per minute
>>> print(np.round(womersley_number(omega, 12.5e-3, 3.5e-3, 1060.0), 2))
18.89
>>> z = longitudinal_impedance(omega, 3e-3, 3.5e-3, 1060.0)
>>> print(f"{z.real:.4e} {z.imag:.4e}")
1.3736e+08 3.5920e+08
"""

from __future__ import annotations

import numpy as np
from scipy import special

from .errors import NetworkSpecError, Problem

__all__ = ["womersley_number", "womersley_f10", "longitudinal_impedance",
           "inviscid_inertance_per_length"]

SERIES_ALPHA_MAX = 2.0
"""Below this Womersley number F10 and Z_L come from the power series (no
cancellation in ``1 - F10``); above it from the scaled Bessel ratio."""

_N_SERIES = 16   # |u| <= 1 at alpha = 2: the 16th terms are below 1e-26

# Power-series coefficients in u = i alpha^2 / 4 (= -z^2/4, z = alpha i^(3/2)):
#   J0(z)                     = sum_k u^k / (k!)^2
#   (J0(z) - 2 J1(z)/z) / u   = sum_j u^j (j+1) / ((j+1)! (j+2)!)
_J0_COEF = np.array([1.0 / special.factorial(k) ** 2 for k in range(_N_SERIES)])
_S_COEF = np.array([(j + 1) / (special.factorial(j + 1) * special.factorial(j + 2))
                    for j in range(_N_SERIES)])


def _invalid(where: str, message: str, fix: str) -> NetworkSpecError:
    return NetworkSpecError([Problem("", 0, 0, where, message, fix)])


def _check_positive(where: str, name: str, value: np.ndarray, unit: str,
                    *, allow_zero: bool = False) -> None:
    bad = ~np.isfinite(value) | ((value < 0) if allow_zero else (value <= 0))
    if np.any(bad):
        first = np.asarray(value)[bad].flat[0]
        bound = ">= 0" if allow_zero else "> 0"
        raise _invalid(where, f"{name} must be finite and {bound}, got {first} {unit}",
                       f"give {name} in {unit} (SI)")


def _polyval(coef: np.ndarray, u: np.ndarray) -> np.ndarray:
    """Evaluate sum_k coef[k] u^k by Horner's rule."""
    out = np.full_like(u, coef[-1])
    for c in coef[-2::-1]:
        out = out * u + c
    return out


def _impedance_factor(alpha: np.ndarray) -> np.ndarray:
    """K(alpha) = Z_L / (8 mu / (pi R^4)) = i alpha^2 / (8 (1 - F10)); K(0) = 1."""
    alpha = np.asarray(alpha, dtype=float)
    out = np.empty(alpha.shape, dtype=complex)
    small = alpha <= SERIES_ALPHA_MAX
    if np.any(small):
        u = 0.25j * alpha[small] ** 2
        # 1 - F10 = u S(u) / J0(u) and i alpha^2 / 8 = u / 2, so K = J0 / (2 S)
        out[small] = _polyval(_J0_COEF, u) / (2.0 * _polyval(_S_COEF, u))
    if np.any(~small):
        a = alpha[~small]
        out[~small] = 1j * a ** 2 / (8.0 * (1.0 - _f10_bessel(a)))
    return out


def _f10_bessel(alpha: np.ndarray) -> np.ndarray:
    """F10 from the ratio of exponentially scaled Bessel functions."""
    z = alpha * np.exp(0.75j * np.pi)
    # jve(v, z) = jv(v, z) exp(-|Im z|); the common factor cancels in the ratio
    return 2.0 * special.jve(1, z) / (z * special.jve(0, z))


def womersley_number(omega_rad_s, radius_m, viscosity_pa_s, density_kg_m3):
    """Womersley number alpha = R sqrt(omega rho / mu).

    Parameters
    ----------
    omega_rad_s : array_like
        Angular frequency [rad/s], >= 0.
    radius_m : array_like
        Lumen radius [m], > 0.
    viscosity_pa_s : array_like
        Dynamic viscosity [Pa s], > 0.
    density_kg_m3 : array_like
        Density [kg/m^3], > 0.  All four broadcast together.

    Returns
    -------
    ndarray or float
        alpha [-], same broadcast shape.

    Raises
    ------
    NetworkSpecError
        A negative frequency or a non-positive radius, viscosity or density.

    Notes
    -----
    alpha = R sqrt(omega rho / mu) = R sqrt(omega / nu_kin).  alpha below about
    1 means quasi-steady Poiseuille flow; above about 10 a plug-like core with a
    thin Stokes layer.

    References
    ----------
    Womersley JR (1955) Method for the calculation of velocity, rate of flow and
    viscous drag in arteries when the pressure gradient is known. J Physiol
    127:553-563.

    Examples
    --------
    >>> import numpy as np
    >>> alpha = womersley_number(2 * np.pi * 1.2, [3e-3, 50e-6], 3.5e-3, 1060.0)
    >>> print(np.round(alpha, 3))
    [4.533 0.076]
    """
    omega = np.asarray(omega_rad_s, dtype=float)
    radius = np.asarray(radius_m, dtype=float)
    mu = np.asarray(viscosity_pa_s, dtype=float)
    rho = np.asarray(density_kg_m3, dtype=float)
    where = "womersley_number"
    _check_positive(where, "angular frequency", omega, "rad/s", allow_zero=True)
    _check_positive(where, "radius", radius, "m")
    _check_positive(where, "viscosity", mu, "Pa*s")
    _check_positive(where, "density", rho, "kg/m3")
    return (radius * np.sqrt(omega * rho / mu))[()]


def womersley_f10(alpha):
    """Womersley's function F10(alpha) = 2 J1(z) / (z J0(z)), z = alpha i^(3/2).

    Parameters
    ----------
    alpha : array_like
        Womersley number [-], finite and >= 0.

    Returns
    -------
    ndarray or complex
        F10 [-], complex, same shape.  F10(0) = 1; F10 -> sqrt(2) (1 - i) / alpha
        as alpha -> infinity.

    Raises
    ------
    NetworkSpecError
        A negative or non-finite alpha.

    Notes
    -----
    Convention ``e^(+i omega t)``: z = alpha e^(3 i pi / 4) = alpha (-1 + i)/sqrt(2).

    For alpha > ``SERIES_ALPHA_MAX`` (2) the ratio is taken of the
    exponentially scaled Bessel functions ``jve(1, z) / jve(0, z)``, which
    equals ``J1(z) / J0(z)`` and stays finite where ``jv`` overflows
    (alpha above about 700).  For alpha <= 2 the power series in
    u = i alpha^2 / 4 is used,

        1 - F10 = u S(u) / J0(u),  J0 = sum u^k / (k!)^2,
        S = sum u^j (j+1) / ((j+1)! (j+2)!),

    so that ``1 - F10`` (which goes to zero like alpha^2) carries no
    cancellation; :func:`longitudinal_impedance` uses the same series.

    References
    ----------
    Womersley JR (1955) J Physiol 127:553-563 (the formula is restated from
    memory in standard texts; the series is elementary).

    Examples
    --------
    >>> print(np.round(womersley_f10([0.0, 1.0, 10.0]), 5))
    [1.     +0.j      0.97977-0.12152j 0.14163-0.13125j]
    """
    alpha = np.asarray(alpha, dtype=float)
    _check_positive("womersley_f10", "alpha", alpha, "(dimensionless)", allow_zero=True)
    return (1.0 - 1j * alpha ** 2 / (8.0 * _impedance_factor(alpha)))[()]


def longitudinal_impedance(omega_rad_s, radius_m, viscosity_pa_s, density_kg_m3):
    """Longitudinal (series) impedance per unit length of a rigid tube, Womersley.

    Parameters
    ----------
    omega_rad_s : array_like
        Angular frequency [rad/s], >= 0; 0 is the steady (mean) harmonic.
    radius_m : array_like
        Lumen radius [m], > 0, shape (n_vessels,) or broadcastable.
    viscosity_pa_s : array_like
        Dynamic viscosity [Pa s], > 0.
    density_kg_m3 : array_like
        Density [kg/m^3], > 0.

    Returns
    -------
    ndarray or complex
        Z_L [Pa s / m^4] (pressure drop per unit length per unit flow), complex,
        broadcast shape of the inputs.  Exactly 8 mu / (pi R^4) at omega = 0.

    Raises
    ------
    NetworkSpecError
        A negative frequency or a non-positive radius, viscosity or density.

    Notes
    -----
    Z_L(omega) = i omega rho / (pi R^2 (1 - F10(alpha))), convention
    ``e^(+i omega t)``.  It is evaluated as Z_L = (8 mu / (pi R^4)) K(alpha),
    K = i alpha^2 / (8 (1 - F10)), with K from the power series for alpha <= 2,
    so omega = 0 gives the Poiseuille resistance per length with no division
    by zero.  Limits: alpha -> 0 gives Re Z_L -> 8 mu / (pi R^4) and
    Im Z_L -> (4/3) omega rho / (pi R^2); alpha -> infinity gives
    Z_L -> i omega rho / (pi R^2) plus a boundary-layer resistance growing
    like alpha.

    References
    ----------
    Womersley JR (1955) J Physiol 127:553-563 [formula from memory, standard].

    Examples
    --------
    >>> z0 = longitudinal_impedance(0.0, 2e-3, 3.5e-3, 1060.0)
    >>> print(f"{z0.real:.4e} {z0.imag:.1f}")
    5.5704e+08 0.0
    >>> z = longitudinal_impedance(2 * np.pi, 2e-3, 3.5e-3, 1060.0)
    >>> print(f"{z.real:.4e} {z.imag:.4e}")
    5.8323e+08 7.0008e+08
    """
    radius = np.asarray(radius_m, dtype=float)
    mu = np.asarray(viscosity_pa_s, dtype=float)
    alpha = np.asarray(womersley_number(omega_rad_s, radius, mu, density_kg_m3))
    return (8.0 * mu / (np.pi * radius ** 4) * _impedance_factor(alpha))[()]


def inviscid_inertance_per_length(radius_m, density_kg_m3):
    """Inertance per unit length of an inviscid (plug) flow, L' = rho / (pi R^2).

    Parameters
    ----------
    radius_m : array_like
        Lumen radius [m], > 0.
    density_kg_m3 : array_like
        Density [kg/m^3], > 0.

    Returns
    -------
    ndarray or float
        L' [Pa s^2 / m^4].

    Notes
    -----
    The high-frequency limit of Im Z_L / omega.  At low frequency the Womersley
    inertance is (4/3) L' (parabolic profile).

    References
    ----------
    Standard linear wave theory (common practice) [M].

    Examples
    --------
    >>> print(f"{0.1 * inviscid_inertance_per_length(12.5e-3, 1060.0):.4e}")
    2.1594e+05
    """
    radius = np.asarray(radius_m, dtype=float)
    rho = np.asarray(density_kg_m3, dtype=float)
    _check_positive("inviscid_inertance_per_length", "radius", radius, "m")
    _check_positive("inviscid_inertance_per_length", "density", rho, "kg/m3")
    return (rho / (np.pi * radius ** 2))[()]
