"""A vessel segment as a lossy transmission line (linear wave theory).

A segment of length L carries pressure P(x) and flow Q(x) obeying the
telegrapher's equations

    dP/dx = -Z_L Q,    dQ/dx = -Y_T P,

with the Womersley series impedance Z_L [Pa s/m^4]
(:func:`vesselnet.womersley.longitudinal_impedance`) and the wall's shunt
admittance Y_T = i omega C' [m^2/(Pa s)]
(:func:`vesselnet.wall.compliance_per_length`).  The propagation constant is
gamma = sqrt(Z_L Y_T) (branch Re gamma >= 0, forward waves decay as
e^(-gamma x)) and the characteristic impedance Z0 = Z_L / gamma.

**Time convention.** Phasors of ``e^(+i omega t)`` throughout; omega >= 0.

All functions here are written in x^2 = Z_L Y_T L^2 and use only even
functions of x = gamma L, so they are exact at omega = 0 and for rigid
vessels (Y_T = 0, lumped series impedance Z_L L), and they never form cosh or
sinh of a large argument except in :func:`abcd_matrix`, whose entries really
grow like e^(Re gamma L).

Examples
--------
>>> import numpy as np
>>> y_ff, y_ft, y_tf, y_tt = segment_admittance(0.0, 0.1, 2e-3, 0.5e-3, 1e6, 3.5e-3, 1060.0)
>>> print(f"{1 / y_ff.real:.4e} {(y_ff + y_ft).real:.1f}")   # Poiseuille, 1.1 check value
5.5704e+07 0.0
"""

from __future__ import annotations

import numpy as np

from .wall import DEFAULT_POISSON_RATIO, compliance_per_length, segment_compliance
from .womersley import _check_positive, _invalid, longitudinal_impedance

__all__ = ["line_constants", "propagation_constant", "characteristic_impedance",
           "abcd_matrix", "input_impedance", "reflection_coefficient",
           "segment_admittance", "DEFAULT_TAPER_SUBSEGMENTS"]

DEFAULT_TAPER_SUBSEGMENTS = 16
"""Uniform pieces a linearly tapered segment is cut into.  The cascade
converges to the continuous tapered line at second order in the piece length.
With 16 pieces the stamp of 3 -> 2 mm over 20 cm, 5 -> 3 mm over 30 cm and
3 -> 1.5 mm over 10 cm arteries was within 0.05 % of the continuous line
(solve_ivp of the telegrapher's equations) at 1.2 Hz and within 0.5 % at 25 Hz
(tested in ``tests/test_transmission.py``).  At omega = 0 any count is exact."""

_SERIES_X_MAX = 0.1   # |x| below which the even power series are used

# x coth x = 1 + x^2/3 - x^4/45 + 2x^6/945 - x^8/4725 + 2x^10/93555 - ...
_XCOTH = np.array([1.0, 1 / 3, -1 / 45, 2 / 945, -1 / 4725, 2 / 93555])
# x csch x = 1 - x^2/6 + 7x^4/360 - 31x^6/15120 + 127x^8/604800 - 73x^10/3421440
_XCSCH = np.array([1.0, -1 / 6, 7 / 360, -31 / 15120, 127 / 604800, -73 / 3421440])
# sinh x / x = sum x^(2n) / (2n+1)!
_SINHC = np.array([1.0, 1 / 6, 1 / 120, 1 / 5040, 1 / 362880, 1 / 39916800])


def _poly(coef: np.ndarray, v: np.ndarray) -> np.ndarray:
    out = np.full_like(v, coef[-1])
    for c in coef[-2::-1]:
        out = out * v + c
    return out


def _x_coth_csch(x2: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(x coth x, x csch x) for x = sqrt(x2), Re x >= 0, without overflow."""
    x2 = np.asarray(x2, dtype=complex)
    x = np.sqrt(x2)
    small = np.abs(x) < _SERIES_X_MAX
    xcoth = np.empty_like(x2)
    xcsch = np.empty_like(x2)
    xcoth[small] = _poly(_XCOTH, x2[small])
    xcsch[small] = _poly(_XCSCH, x2[small])
    xl = x[~small]
    e1 = np.exp(-xl)                    # |e1| <= 1 since Re x >= 0
    den = -np.expm1(-2.0 * xl)          # 1 - e^(-2x), no cancellation near 0
    xcoth[~small] = xl * (1.0 + e1 * e1) / den
    xcsch[~small] = 2.0 * xl * e1 / den
    return xcoth, xcsch


def line_constants(omega_rad_s, radius_m, thickness_m, youngs_modulus_pa,
                   viscosity_pa_s, density_kg_m3, *, poisson_ratio=DEFAULT_POISSON_RATIO):
    """Series impedance and shunt admittance per unit length of a vessel.

    Parameters
    ----------
    omega_rad_s : array_like
        Angular frequency [rad/s], >= 0.
    radius_m : array_like
        Lumen radius [m], > 0.
    thickness_m : array_like
        Wall thickness [m], > 0 (ignored for rigid vessels).
    youngs_modulus_pa : array_like
        Young's modulus [Pa]; ``np.inf`` marks a rigid vessel (Y_T = 0).
    viscosity_pa_s : array_like
        Blood viscosity [Pa s].
    density_kg_m3 : array_like
        Blood density [kg/m^3].
    poisson_ratio : array_like, optional
        Default 0.5 (tethered wall, see :mod:`vesselnet.wall`).

    Returns
    -------
    series_impedance_pa_s_m4 : ndarray
        Z_L [Pa s/m^4], complex.
    shunt_admittance_m2_pa_s : ndarray
        Y_T = i omega C' [m^2/(Pa s)], complex (zero at omega = 0 and for
        rigid vessels).

    Notes
    -----
    Z_L from Womersley's rigid-tube theory, C' = 2 pi r^3 (1 - nu^2)/(E h);
    convention ``e^(+i omega t)``.

    References
    ----------
    Womersley (1955) J Physiol 127:553-563; standard linear wave theory [M].

    Examples
    --------
    >>> z, y = line_constants(2 * np.pi * 1.2, 3e-3, 0.6e-3, 0.8e6, 3.5e-3, 1060.0)
    >>> print(f"{z.imag:.4e} {y.imag:.4e}")
    3.5920e+08 1.9986e-09
    """
    omega = np.asarray(omega_rad_s, dtype=float)
    z = longitudinal_impedance(omega, radius_m, viscosity_pa_s, density_kg_m3)
    c = compliance_per_length(radius_m, thickness_m, youngs_modulus_pa,
                              poisson_ratio=poisson_ratio)
    return np.asarray(z, dtype=complex)[()], (1j * omega * c + 0j)[()]


def propagation_constant(series_impedance_pa_s_m4, shunt_admittance_m2_pa_s):
    """Propagation constant gamma = sqrt(Z_L Y_T), branch Re gamma >= 0.

    Parameters
    ----------
    series_impedance_pa_s_m4 : array_like
        Z_L [Pa s/m^4], complex.
    shunt_admittance_m2_pa_s : array_like
        Y_T [m^2/(Pa s)], complex.

    Returns
    -------
    ndarray or complex
        gamma [1/m]: Re gamma is the attenuation [Np/m], Im gamma = omega / c_phase.

    Notes
    -----
    Forward waves go as e^(i omega t - gamma x); the principal square root
    gives Re gamma >= 0 (decay downstream) and, for a passive line,
    Im gamma >= 0.

    References
    ----------
    Standard transmission-line theory [M].

    Examples
    --------
    >>> z, y = line_constants(2 * np.pi * 1.2, 3e-3, 0.6e-3, 0.8e6, 3.5e-3, 1060.0)
    >>> print(np.round(propagation_constant(z, y), 5))
    (0.15922+0.86211j)
    """
    z = np.asarray(series_impedance_pa_s_m4, dtype=complex)
    y = np.asarray(shunt_admittance_m2_pa_s, dtype=complex)
    return np.sqrt(z * y)[()]


def characteristic_impedance(series_impedance_pa_s_m4, shunt_admittance_m2_pa_s):
    """Characteristic impedance Z0 = Z_L / gamma = sqrt(Z_L / Y_T).

    Parameters
    ----------
    series_impedance_pa_s_m4, shunt_admittance_m2_pa_s : array_like
        Z_L [Pa s/m^4] and Y_T [m^2/(Pa s)].

    Returns
    -------
    ndarray or complex
        Z0 [Pa s/m^3]; ``inf`` where Y_T = 0 (omega = 0 or a rigid vessel).

    Notes
    -----
    Taking Z0 = Z_L / gamma with gamma from :func:`propagation_constant` fixes
    the branch consistently (Re Z0 > 0 for a passive line).  With viscosity
    Im Z0 < 0 at low frequency; at high Womersley number Z0 -> rho c / A
    (:func:`vesselnet.wall.inviscid_characteristic_impedance`).

    References
    ----------
    Standard transmission-line theory [M].

    Examples
    --------
    >>> z, y = line_constants(2 * np.pi * 1.2, 3e-3, 0.6e-3, 0.8e6, 3.5e-3, 1060.0)
    >>> print(np.round(characteristic_impedance(z, y) / 1.33322e8, 4))   # mmHg*s/mL
    (3.2355-0.5975j)
    """
    z = np.asarray(series_impedance_pa_s_m4, dtype=complex)
    gamma = np.asarray(propagation_constant(z, shunt_admittance_m2_pa_s))
    safe = np.where(gamma == 0, 1.0, gamma)
    return np.where(gamma == 0, complex(np.inf, 0.0), z / safe)[()]


def abcd_matrix(series_impedance_pa_s_m4, shunt_admittance_m2_pa_s, length_m):
    """Transfer (ABCD) matrix of a uniform line: [P_in; Q_in] = M [P_out; Q_out].

    Parameters
    ----------
    series_impedance_pa_s_m4, shunt_admittance_m2_pa_s : array_like
        Z_L [Pa s/m^4] and Y_T [m^2/(Pa s)].
    length_m : array_like
        Segment length [m], > 0.

    Returns
    -------
    ndarray
        Shape ``(..., 2, 2)``, complex: [[cosh x, Z0 sinh x], [sinh x / Z0, cosh x]],
        x = gamma L.  Q_in enters at the inlet, Q_out leaves at the outlet.

    Notes
    -----
    Written as A = D = cosh x, B = Z_L L sinh(x)/x, C = Y_T L sinh(x)/x, so
    omega = 0 and rigid vessels give [[1, Z_L L], [0, 1]].  det M = 1
    (reciprocity); cascading segments multiplies their matrices.  The entries
    grow like e^(Re x) / 2 and overflow above Re x ~ 709: for network assembly
    use :func:`segment_admittance`, which does not.

    References
    ----------
    Standard two-port theory [M].

    Examples
    --------
    >>> m = abcd_matrix(5.5704e8, 0.0, 0.1)           # rigid, steady
    >>> print(np.round(m.real, 1))
    [[1.0000e+00 5.5704e+07]
     [0.0000e+00 1.0000e+00]]
    """
    z = np.asarray(series_impedance_pa_s_m4, dtype=complex)
    y = np.asarray(shunt_admittance_m2_pa_s, dtype=complex)
    length = np.asarray(length_m, dtype=float)
    _check_positive("abcd_matrix", "length", length, "m")
    z, y, length = np.broadcast_arrays(z, y, length)
    x2 = z * y * length ** 2
    x = np.sqrt(x2)
    small = np.abs(x) < _SERIES_X_MAX
    sinhc = np.empty_like(x2)
    sinhc[small] = _poly(_SINHC, x2[small])
    sinhc[~small] = np.sinh(x[~small]) / x[~small]
    cosh = np.cosh(x)
    out = np.empty(x2.shape + (2, 2), dtype=complex)
    out[..., 0, 0] = cosh
    out[..., 0, 1] = z * length * sinhc
    out[..., 1, 0] = y * length * sinhc
    out[..., 1, 1] = cosh
    return out


def input_impedance(series_impedance_pa_s_m4, shunt_admittance_m2_pa_s, length_m,
                    load_impedance_pa_s_m3):
    """Impedance seen at the inlet of a uniform line closed by a load.

    Parameters
    ----------
    series_impedance_pa_s_m4, shunt_admittance_m2_pa_s : array_like
        Z_L [Pa s/m^4] and Y_T [m^2/(Pa s)].
    length_m : array_like
        Segment length [m], > 0.
    load_impedance_pa_s_m3 : array_like
        Z_T [Pa s/m^3] at the outlet, finite.

    Returns
    -------
    ndarray or complex
        Z_in [Pa s/m^3].

    Notes
    -----
    Z_in = Z0 (Z_T + Z0 tanh x) / (Z0 + Z_T tanh x), x = gamma L, evaluated as
    (Z_T + Z_L L t) / (1 + Z_T Y_T L t) with t = tanh(x)/x, which is finite
    for every x and gives exactly Z_T + Z_L L at omega = 0 (Z_T plus the
    Poiseuille resistance) and Z_in = Z0 for a matched load.

    References
    ----------
    Standard transmission-line theory [M].

    Examples
    --------
    >>> z, y = line_constants(0.0, 3e-3, 0.6e-3, 0.8e6, 3.5e-3, 1060.0)
    >>> print(f"{input_impedance(z, y, 0.2, 1.33322e9).real / 1.33322e8:.4f}")
    10.1651
    """
    z = np.asarray(series_impedance_pa_s_m4, dtype=complex)
    y = np.asarray(shunt_admittance_m2_pa_s, dtype=complex)
    length = np.asarray(length_m, dtype=float)
    load = np.asarray(load_impedance_pa_s_m3, dtype=complex)
    _check_positive("input_impedance", "length", length, "m")
    if not np.all(np.isfinite(load)):
        raise _invalid("input_impedance", "load impedance must be finite, got inf or nan",
                       "model a closed end by omitting the outlet from the nodal system")
    xcoth, _ = _x_coth_csch(z * y * length ** 2)
    tanhc = 1.0 / xcoth
    return ((load + z * length * tanhc) / (1.0 + load * y * length * tanhc))[()]


def reflection_coefficient(load_impedance_pa_s_m3, characteristic_impedance_pa_s_m3):
    """Pressure reflection coefficient Gamma = (Z_T - Z0) / (Z_T + Z0).

    Parameters
    ----------
    load_impedance_pa_s_m3 : array_like
        Z_T [Pa s/m^3], finite.
    characteristic_impedance_pa_s_m3 : array_like
        Z0 [Pa s/m^3] of the line feeding the load.

    Returns
    -------
    ndarray or complex
        Gamma [-]: 0 for a matched load, -1 for a short (Z_T = 0), -> +1 for
        a closed end (Z_T -> inf).

    References
    ----------
    Standard transmission-line theory [M].

    Examples
    --------
    >>> print(reflection_coefficient([1.0, 3.0, 0.0], 1.0))
    [ 0. +0.j  0.5+0.j -1. +0.j]
    """
    zt = np.asarray(load_impedance_pa_s_m3, dtype=complex)
    z0 = np.asarray(characteristic_impedance_pa_s_m3, dtype=complex)
    return ((zt - z0) / (zt + z0))[()]


def _uniform_stamp(omega, length, radius, thickness, modulus, mu, rho, nu):
    """(a, b) of the symmetric nodal matrix [[a, b], [b, a]] of a uniform piece."""
    z, y = line_constants(omega, radius, thickness, modulus, mu, rho, poisson_ratio=nu)
    z = np.asarray(z)
    xcoth, xcsch = _x_coth_csch(np.asarray(y) * z * length ** 2)
    return xcoth / (z * length), -xcsch / (z * length)


def segment_admittance(omega_rad_s, length_m, radius_m, thickness_m, youngs_modulus_pa,
                       viscosity_pa_s, density_kg_m3, *,
                       poisson_ratio=DEFAULT_POISSON_RATIO, radius_to_m=None,
                       taper_subsegments=DEFAULT_TAPER_SUBSEGMENTS):
    """Nodal admittance stamp of vessel segments at one angular frequency.

    Parameters
    ----------
    omega_rad_s : array_like
        Angular frequency [rad/s], >= 0 (usually a scalar, one harmonic).
    length_m : array_like
        Segment lengths [m], > 0, shape (n,) (all arguments broadcast).
    radius_m : array_like
        Lumen radius at the from end [m] (of the whole segment if uniform).
    thickness_m : array_like
        Wall thickness [m] (ignored for rigid vessels).
    youngs_modulus_pa : array_like
        Young's modulus [Pa]; ``np.inf`` for a vessel without wall data, which
        becomes a rigid lumped series element Z_L L (resistance plus
        frequency-dependent Womersley inertance, no compliance).
    viscosity_pa_s, density_kg_m3 : array_like
        Blood viscosity [Pa s] and density [kg/m^3].
    poisson_ratio : array_like, optional
        Default 0.5 (tethered thin wall, :mod:`vesselnet.wall`).
    radius_to_m : array_like, optional
        Radius at the to end [m] for linearly tapered segments; ``None`` (or
        equal to ``radius_m``) means uniform.
    taper_subsegments : int, optional
        Number of uniform pieces a tapered segment is cut into; default
        :data:`DEFAULT_TAPER_SUBSEGMENTS` (16).

    Returns
    -------
    y_ff, y_ft, y_tf, y_tt : ndarray
        Complex [m^3/(s Pa)], shape (n,), such that

            q_from = y_ff P_from + y_ft P_to
            q_to   = y_tf P_from + y_tt P_to

        where ``q_from`` is the flow phasor LEAVING the from node INTO the
        segment (at its from end) and ``q_to`` is the flow phasor ENTERING the
        to node OUT OF the segment (at its to end); P_from, P_to are the node
        pressure phasors.  Both flows are positive in the from -> to
        direction, like the steady vessel flow.  At omega = 0 (no storage)
        y_ff = -y_ft = y_tf = -y_tt = g, the Poiseuille conductance, and
        q_to = q_from.  At omega > 0 the difference q_from - q_to is the flow
        stored in the wall.

    Raises
    ------
    NetworkSpecError
        Non-positive length, radius, viscosity, density or thickness, a
        negative frequency, or fewer than one taper subsegment.

    Notes
    -----
    Assembly into the nodal system "sum of phasor flows leaving node =
    injected flow" (Y P = I): for a segment f -> t add

        Y[f, f] += y_ff    Y[f, t] += y_ft
        Y[t, f] -= y_tf    Y[t, t] -= y_tt

    The stamp [[y_ff, y_ft], [-y_tf, -y_tt]] is complex symmetric
    (y_ft = -y_tf, reciprocity), so Y is complex symmetric, not Hermitian.

    Uniform segment, x = gamma L: from the ABCD matrix,
    y_ff = -y_tt = coth(x)/Z0 = x coth(x) / (Z_L L) and
    y_ft = -y_tf = -csch(x)/Z0 = -x csch(x) / (Z_L L).  x coth x and x csch x
    are even, so no branch choice matters; they come from power series for
    |x| < 0.1 and from e^(-x), expm1(-2x) otherwise (no overflow for long or
    lossy lines: y_ft -> 0 and y_ff -> 1/Z0).  With Y_T = 0 (omega = 0 or
    rigid) x = 0 and the stamp is the lumped series element 1/(Z_L L).

    Tapered segment (r0 -> r1 linearly): cut into ``taper_subsegments``
    equal uniform pieces, each with (i) the equivalent radius
    r_eq = (3 ra^3 rb^3 / (ra^2 + ra rb + rb^2))^(1/4), whose Poiseuille
    resistance equals the closed-form taper resistance of that piece, used in
    Z_L, and (ii) the exact integrated compliance of the piece.  The pieces
    are combined by eliminating the interior nodes (Kron reduction of the
    nodal matrices, no growing exponentials).  So at omega = 0 the stamp is
    exactly the closed-form taper conductance
    3 pi r0^3 r1^3 / (8 mu L (r0^2 + r0 r1 + r1^2)) for any number of pieces,
    and the total compliance is exact; at omega > 0 the cascade converges to
    the continuous tapered line.

    References
    ----------
    Standard transmission-line and nodal-analysis theory [M]; Womersley (1955)
    J Physiol 127:553-563; taper resistance by integrating Poiseuille
    (elementary).

    Examples
    --------
    >>> y = segment_admittance(0.0, 0.1, 3e-3, 0.6e-3, 0.8e6, 3.5e-3, 1060.0,
    ...                        radius_to_m=2e-3)
    >>> print(f"{1 / y[0].real:.4e}")              # taper closed form, 1.2 check value
    2.6133e+07
    >>> y = segment_admittance(2 * np.pi * 1.2, 0.2, 3e-3, 0.6e-3, 0.8e6, 3.5e-3, 1060.0)
    >>> print(np.round(np.array(y) * 1.33322e8, 4))   # in mL/(s*mmHg)
    [ 0.6192-1.6013j -0.6191+1.628j   0.6191-1.628j  -0.6192+1.6013j]
    """
    where = "segment_admittance"
    n_pieces = int(taper_subsegments)
    if n_pieces != taper_subsegments or n_pieces < 1:
        raise _invalid(where, f"taper_subsegments must be an integer >= 1, got {taper_subsegments}",
                       "use the default (16) or more pieces for steep tapers")
    r0 = np.asarray(radius_m, dtype=float)
    r1 = r0 if radius_to_m is None else np.asarray(radius_to_m, dtype=float)
    arrays = np.broadcast_arrays(
        np.asarray(omega_rad_s, dtype=float), np.asarray(length_m, dtype=float), r0, r1,
        np.asarray(thickness_m, dtype=float), np.asarray(youngs_modulus_pa, dtype=float),
        np.asarray(viscosity_pa_s, dtype=float), np.asarray(density_kg_m3, dtype=float),
        np.asarray(poisson_ratio, dtype=float))
    omega, length, r0, r1, h, e, mu, rho, nu = (np.array(a, ndmin=1) for a in arrays)
    _check_positive(where, "length", length, "m")
    _check_positive(where, "radius", r0, "m")
    _check_positive(where, "radius_to", r1, "m")

    a, b = _uniform_stamp(omega, length, r0, h, e, mu, rho, nu)
    d = a.copy()
    taper = r1 != r0
    if np.any(taper):
        a[taper], b[taper], d[taper] = _tapered_stamp(
            n_pieces, *(v[taper] for v in (omega, length, r0, r1, h, e, mu, rho, nu)))
    shape = np.broadcast_shapes(*(np.shape(v) for v in arrays))
    return tuple(v.reshape(shape)[()] for v in (a, b, -b, -d))


def _tapered_stamp(n_pieces, omega, length, r0, r1, h, e, mu, rho, nu):
    """(a, b, d) of the nodal matrix [[a, b], [b, d]] of a tapered segment."""
    piece = length / n_pieces
    a = b = d = None
    for k in range(n_pieces):
        ra = r0 + (r1 - r0) * k / n_pieces
        rb = r0 + (r1 - r0) * (k + 1) / n_pieces
        r_eq = (3.0 * ra ** 3 * rb ** 3 / (ra ** 2 + ra * rb + rb ** 2)) ** 0.25
        c_per_m = segment_compliance(piece, ra, h, e, poisson_ratio=nu, radius_to_m=rb) / piece
        z = np.asarray(longitudinal_impedance(omega, r_eq, mu, rho), dtype=complex)
        xcoth, xcsch = _x_coth_csch(1j * omega * c_per_m * z * piece ** 2)
        ak, bk = xcoth / (z * piece), -xcsch / (z * piece)
        if a is None:
            a, b, d = ak, bk, ak
            continue
        s = d + ak                       # admittance at the eliminated interior node
        a, b, d = a - b * b / s, -b * bk / s, ak - bk * bk / s
    return a, b, d
