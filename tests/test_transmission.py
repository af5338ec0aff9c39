"""Tests of vesselnet.transmission (segment two-port and nodal admittance stamp).

Sources:
- REFERENCES.md 5.5 two-port relations [M, standard]; its check values are [C]
  (computed from the formulas there), 1.1 Hagen-Poiseuille and 1.2 taper
  resistance check values [C].
- Reference tools: scipy.integrate.solve_ivp on the telegrapher's equations
  dP/dx = -Z_L Q, dQ/dx = -Y_T P (uniform and tapered), scipy.integrate.quad,
  and a dense numpy Schur-complement (Kron) reduction as the slow oracle.
- Convention e^(+i omega t) throughout (REFERENCES 10.11).
"""

import warnings

import numpy as np
import pytest
from scipy import integrate

from vesselnet.errors import NetworkSpecError
from vesselnet.transmission import (DEFAULT_TAPER_SUBSEGMENTS, abcd_matrix,
                                    characteristic_impedance, input_impedance, line_constants,
                                    propagation_constant, reflection_coefficient,
                                    segment_admittance)
from vesselnet.units import MMHG_PA
from vesselnet.wall import compliance_per_length, moens_korteweg_speed, segment_compliance
from vesselnet.womersley import longitudinal_impedance

MU, RHO = 3.5e-3, 1060.0
MMHG_S_ML = MMHG_PA / 1e-6
# REFERENCES 5.5 segment
R, L, E, H = 3e-3, 0.2, 0.8e6, 0.6e-3
OMEGA = 2 * np.pi * 1.2


def ode_abcd(omega, length, r0, r1, h, e):
    """ABCD matrix of the (possibly tapered) line from solve_ivp, integrating the
    telegrapher's equations from the outlet back to the inlet with local
    Z_L(r(x)), C'(r(x)).  Q is scaled by 1e8 to balance the tolerances."""
    scale = 1e8

    def rhs(x, s):
        r = r0 + (r1 - r0) * x / length
        z = longitudinal_impedance(omega, r, MU, RHO)
        y = 1j * omega * compliance_per_length(r, h, e)
        p, q = s[0] + 1j * s[1], (s[2] + 1j * s[3]) / scale
        dp, dq = -z * q, -y * p * scale
        return [dp.real, dp.imag, dq.real, dq.imag]

    cols = []
    for start in ([1.0, 0.0, 0.0, 0.0], [0.0, 0.0, scale, 0.0]):
        sol = integrate.solve_ivp(rhs, (length, 0.0), start, method="DOP853",
                                  rtol=1e-12, atol=1e-14)
        s = sol.y[:, -1]
        cols.append([s[0] + 1j * s[1], (s[2] + 1j * s[3]) / scale])
    return np.array(cols).T


def stamp_from_abcd(m):
    """[P1; Q1] = M [P2; Q2] solved for (Q1, Q2) in terms of (P1, P2): Q1 is the flow
    into the segment at the inlet, Q2 the flow out at the outlet."""
    a, b, c, d = m[0, 0], m[0, 1], m[1, 0], m[1, 1]
    return np.array([d / b, (b * c - a * d) / b, 1 / b, -a / b])


# --- REFERENCES 5.5 check values ---------------------------------------------

def test_characteristic_impedance_check_value():
    """REFERENCES 5.5 [C]: Z0 = 3.2355 - 0.5975i mmHg s/mL."""
    z0 = characteristic_impedance(*line_constants(OMEGA, R, H, E, MU, RHO)) / MMHG_S_ML
    assert z0.real == pytest.approx(3.2355, abs=5e-5)
    assert z0.imag == pytest.approx(-0.5975, abs=5e-5)


def test_propagation_constant_and_phase_velocity_check_values():
    """REFERENCES 5.5 [C]: gamma = 0.15922 + 0.86211i 1/m, phase velocity 8.746 m/s,
    below c0/sqrt(1 - nu^2) = 10.03 m/s (viscous effects at alpha = 4.5)."""
    gamma = propagation_constant(*line_constants(OMEGA, R, H, E, MU, RHO))
    assert gamma.real == pytest.approx(0.15922, abs=5e-6)
    assert gamma.imag == pytest.approx(0.86211, abs=5e-6)
    assert OMEGA / gamma.imag == pytest.approx(8.746, abs=5e-4)
    assert OMEGA / gamma.imag < moens_korteweg_speed(R, H, E, RHO)
    assert moens_korteweg_speed(R, H, E, RHO) == pytest.approx(10.03, abs=5e-3)


def test_steady_input_impedance_is_load_plus_poiseuille():
    """REFERENCES 5.5 [C]: omega = 0, Z_T = 10 mmHg s/mL gives 10.1651 = Z_T + 8 mu L/(pi R^4)."""
    z, y = line_constants(0.0, R, H, E, MU, RHO)
    z_in = input_impedance(z, y, L, 10.0 * MMHG_S_ML)
    assert z_in.imag == 0.0
    assert z_in.real / MMHG_S_ML == pytest.approx(10.1651, abs=5e-5)
    assert z_in.real == pytest.approx(10.0 * MMHG_S_ML + 8 * MU * L / (np.pi * R ** 4), rel=1e-15)


@pytest.mark.parametrize("f_hz", [0.5, 1.2, 12.0, 60.0])
def test_matched_load(f_hz):
    """REFERENCES 5.5: Z_T = Z0 gives Z_in/Z0 = 1 exactly."""
    z, y = line_constants(2 * np.pi * f_hz, R, H, E, MU, RHO)
    z0 = characteristic_impedance(z, y)
    assert input_impedance(z, y, L, z0) / z0 == pytest.approx(1.0, abs=1e-14)


@pytest.mark.parametrize("load, expected", [(1.0, 0.0), (0.0, -1.0), (3.0, 0.5), (1e12, 1.0)])
def test_reflection_coefficient(load, expected):
    """Gamma = (Z_T - Z0)/(Z_T + Z0): matched 0, short -1, closed end -> +1 (standard)."""
    assert reflection_coefficient(load, 1.0) == pytest.approx(expected, abs=1e-11)


# --- two-port against an ODE integrator ----------------------------------------

@pytest.mark.parametrize("f_hz, length, r, h, e", [
    (1.2, 0.2, 3e-3, 0.6e-3, 0.8e6),
    (10.0, 0.4, 12.5e-3, 1.5e-3, 0.4e6),
    (25.0, 0.1, 2e-3, 0.5e-3, 1.0e6),
])
def test_abcd_equals_telegrapher_ode(f_hz, length, r, h, e):
    """The cosh/sinh two-port equals solve_ivp of dP/dx = -Z_L Q, dQ/dx = -Y_T P."""
    omega = 2 * np.pi * f_hz
    m = abcd_matrix(*line_constants(omega, r, h, e, MU, RHO), length)
    ref = ode_abcd(omega, length, r, r, h, e)
    assert np.allclose(m[0], ref[0], rtol=1e-8, atol=1e-8 * abs(ref[0, 1]))
    assert np.allclose(m[1], ref[1], rtol=1e-8, atol=1e-8 * abs(ref[1, 1]))
    assert np.linalg.det(m) == pytest.approx(1.0, abs=1e-12)    # reciprocity


@pytest.mark.parametrize("n_pieces", [2, 7, 50])
def test_cascade_of_short_segments_equals_one_long(n_pieces):
    """Property: the product of the ABCD matrices of n pieces of length L/n equals the
    ABCD matrix of length L (addition theorems of cosh/sinh)."""
    z, y = line_constants(2 * np.pi * 6.0, R, H, E, MU, RHO)
    piece = abcd_matrix(z, y, L / n_pieces)
    chained = np.linalg.matrix_power(piece, n_pieces)
    assert np.allclose(chained, abcd_matrix(z, y, L), rtol=1e-11, atol=0)


@pytest.mark.parametrize("f_hz", [0.0, 1.2, 7.0, 40.0])
def test_input_impedance_equals_abcd(f_hz):
    """Z_in = (A Z_T + B)/(C Z_T + D) from the two-port."""
    z, y = line_constants(2 * np.pi * f_hz, R, H, E, MU, RHO)
    m = abcd_matrix(z, y, L)
    load = (1.0 - 0.3j) * MMHG_S_ML
    ref = (m[0, 0] * load + m[0, 1]) / (m[1, 0] * load + m[1, 1])
    assert input_impedance(z, y, L, load) == pytest.approx(ref, rel=1e-13)


# --- nodal admittance stamp ------------------------------------------------------

@pytest.mark.parametrize("f_hz, length", [(0.6, 0.2), (1.2, 0.2), (9.0, 0.05), (25.0, 1.0),
                                          (0.01, 0.01)])
def test_stamp_equals_two_port(f_hz, length):
    """(q_from, q_to) from the stamp equals the ABCD relation solved for the flows
    (q_from into the segment at the from end, q_to out of it at the to end); this
    case list crosses the |gamma L| = 0.1 switch between series and exponentials."""
    omega = 2 * np.pi * f_hz
    y = np.array(segment_admittance(omega, length, R, H, E, MU, RHO))
    ref = stamp_from_abcd(abcd_matrix(*line_constants(omega, R, H, E, MU, RHO), length))
    assert np.allclose(y, ref, rtol=1e-12, atol=0)


@pytest.mark.parametrize("length, radius, expected", [
    (0.1, 2e-3, 5.5704e7), (1.0, 1e-3, None), (0.2, 3e-3, 2.2007e7)])
def test_steady_stamp_is_poiseuille(length, radius, expected):
    """omega = 0: y_ff = -y_ft = y_tf = -y_tt = g = pi r^4/(8 mu L) (Hagen-Poiseuille,
    REFERENCES 1.1 check values [C]); q_to = q_from."""
    y_ff, y_ft, y_tf, y_tt = segment_admittance(0.0, length, radius, H, E, MU, RHO)
    g = np.pi * radius ** 4 / (8 * MU * length)
    for v in (y_ff, -y_ft, y_tf, -y_tt):
        assert v.imag == 0.0
        assert v.real == pytest.approx(g, rel=1e-15)
    if expected is not None:
        assert 1 / y_ff.real == pytest.approx(expected, rel=5e-5)


@pytest.mark.parametrize("n_pieces", [1, 3, DEFAULT_TAPER_SUBSEGMENTS])
@pytest.mark.parametrize("length, r0, r1, expected", [
    (0.1, 3e-3, 2e-3, 2.6133e7), (0.3, 5e-3, 3e-3, 1.2940e7), (0.05, 1e-3, 1.6e-3, None)])
def test_steady_taper_is_closed_form(n_pieces, length, r0, r1, expected):
    """omega = 0 tapered: the stamp is 1/R with R = 8 mu L (r0^2 + r0 r1 + r1^2)/(3 pi r0^3 r1^3)
    (REFERENCES 1.2 [C] check values) = quad of 8 mu/(pi r(x)^4) (scipy), for any piece count."""
    y_ff, y_ft, y_tf, y_tt = segment_admittance(0.0, length, r0, H, E, MU, RHO,
                                                radius_to_m=r1, taper_subsegments=n_pieces)
    r_quad, _ = integrate.quad(lambda x: 8 * MU / (np.pi * (r0 + (r1 - r0) * x / length) ** 4),
                               0.0, length, epsabs=0.0, epsrel=1e-13)
    for v in (y_ff, -y_ft, y_tf, -y_tt):
        assert v.real == pytest.approx(1 / r_quad, rel=1e-13)
        assert v.imag == 0.0
    if expected is not None:
        assert 1 / y_ff.real == pytest.approx(expected, rel=5e-5)


@pytest.mark.parametrize("f_hz, tol", [(1.2, 1e-3), (6.0, 2e-3), (25.0, 1e-2)])
@pytest.mark.parametrize("length, r0, r1, h, e", [
    (0.2, 3e-3, 2e-3, 0.6e-3, 0.8e6), (0.3, 5e-3, 3e-3, 1e-3, 0.5e6), (0.1, 3e-3, 1.5e-3, 0.5e-3, 1e6)])
def test_pulsatile_taper_against_continuous_line(f_hz, tol, length, r0, r1, h, e):
    """omega > 0 tapered: the default cascade is within 0.1 % (1.2 Hz) to 1 % (25 Hz) of
    solve_ivp on the continuous tapered telegrapher's equations, and the error falls
    about fourfold when the piece count doubles (second order)."""
    omega = 2 * np.pi * f_hz
    ref = stamp_from_abcd(ode_abcd(omega, length, r0, r1, h, e))

    def error(n):
        y = np.array(segment_admittance(omega, length, r0, h, e, MU, RHO, radius_to_m=r1,
                                        taper_subsegments=n))
        return np.max(np.abs(y - ref)) / np.max(np.abs(ref))

    err = error(DEFAULT_TAPER_SUBSEGMENTS)
    assert err < tol
    assert 0.15 < error(2 * DEFAULT_TAPER_SUBSEGMENTS) / err < 0.35


def test_cascade_stamp_equals_dense_kron_reduction():
    """Oracle for the cascade algebra: the five uniform pieces of a taper (same piece
    model as documented in segment_admittance: equivalent radius, exact piece
    compliance), each stamped from its ABCD matrix, assembled into a dense nodal
    matrix and reduced to the two end nodes by a Schur complement (numpy), equal
    the built-in Kron cascade."""
    rng = np.random.default_rng(20240611)
    omega, length, r0, r1, n = 2 * np.pi * 3.3, 0.25, 4e-3, 2.5e-3, 5
    h, e = 0.8e-3, 0.7e6
    # slow oracle: assemble the (n+1)-node nodal matrix piece by piece
    big = np.zeros((n + 1, n + 1), dtype=complex)
    for k in range(n):
        ra, rb = r0 + (r1 - r0) * k / n, r0 + (r1 - r0) * (k + 1) / n
        r_eq = (3 * ra ** 3 * rb ** 3 / (ra ** 2 + ra * rb + rb ** 2)) ** 0.25
        c = segment_compliance(length / n, ra, h, e, radius_to_m=rb) / (length / n)
        z = longitudinal_impedance(omega, r_eq, MU, RHO)
        m = abcd_matrix(z, 1j * omega * c, length / n)
        yff, yft, ytf, ytt = stamp_from_abcd(m)
        big[np.ix_([k, k + 1], [k, k + 1])] += [[yff, yft], [-ytf, -ytt]]
    ends, inner = [0, n], list(range(1, n))
    schur = big[np.ix_(ends, ends)] - big[np.ix_(ends, inner)] @ np.linalg.solve(
        big[np.ix_(inner, inner)], big[np.ix_(inner, ends)])
    y_ff, y_ft, y_tf, y_tt = segment_admittance(omega, length, r0, h, e, MU, RHO,
                                                radius_to_m=r1, taper_subsegments=n)
    assert np.allclose([y_ff, y_ft, -y_tf, -y_tt], schur.ravel(), rtol=1e-12, atol=0)
    # the same solve with random end pressures: flows agree
    p = rng.normal(size=2) + 1j * rng.normal(size=2)
    assert np.allclose([y_ff * p[0] + y_ft * p[1], -(y_tf * p[0] + y_tt * p[1])], schur @ p,
                       rtol=1e-12)


@pytest.mark.parametrize("f_hz", [0.05, 0.2])
@pytest.mark.parametrize("r1", [None, 2e-3])
def test_low_frequency_storage_is_compliance(f_hz, r1):
    """With both ends at the same pressure P, q_from - q_to = i omega C P to O((gamma L)^2):
    the segment stores what its wall compliance says (tapered: exact integral)."""
    omega = 2 * np.pi * f_hz
    y_ff, y_ft, y_tf, y_tt = segment_admittance(omega, L, R, H, E, MU, RHO, radius_to_m=r1)
    stored = (y_ff + y_ft) - (y_tf + y_tt)
    c_total = segment_compliance(L, R, H, E, radius_to_m=r1)
    x2 = abs(np.prod(line_constants(omega, R, H, E, MU, RHO))) * L ** 2
    assert stored / (1j * omega * c_total) == pytest.approx(1.0, abs=max(x2, 1e-12) * 2)


@pytest.mark.parametrize("f_hz", [0.0, 1.2, 20.0])
def test_rigid_vessel_is_lumped_series_element(f_hz):
    """No wall data (E = inf): y_ff = -y_ft = y_tf = -y_tt = 1/(Z_L L), no storage."""
    omega = 2 * np.pi * f_hz
    y_ff, y_ft, y_tf, y_tt = segment_admittance(omega, L, R, np.nan, np.inf, MU, RHO)
    lumped = 1 / (longitudinal_impedance(omega, R, MU, RHO) * L)
    for v in (y_ff, -y_ft, y_tf, -y_tt):
        assert v == pytest.approx(lumped, rel=1e-14)


@pytest.mark.parametrize("length, f_hz", [(50.0, 25.0), (2000.0, 25.0), (5.0, 1e4)])
def test_long_lossy_line_is_stable(length, f_hz):
    """Re(gamma L) of about 29, 1146 and 54: no overflow (cosh would overflow above ~709), the
    transfer admittance vanishes and y_ff -> 1/Z0 (a semi-infinite line)."""
    omega = 2 * np.pi * f_hz
    z, y = line_constants(omega, R, H, E, MU, RHO)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        y_ff, y_ft, y_tf, y_tt = segment_admittance(omega, length, R, H, E, MU, RHO)
    assert all(np.isfinite(v) for v in (y_ff, y_ft, y_tf, y_tt))
    assert abs(y_ft) < 1e-3 * abs(y_ff)
    assert y_ff * characteristic_impedance(z, y) == pytest.approx(1.0, abs=2 * abs(y_ft / y_ff) + 1e-14)
    assert y_tt == -y_ff and y_tf == -y_ft


def test_vectorised_mixed_vessels():
    """One call over uniform, tapered and rigid vessels equals one call per vessel."""
    length = np.array([0.1, 0.2, 0.15])
    r0 = np.array([3e-3, 4e-3, 1e-3])
    r1 = np.array([3e-3, 2.5e-3, 1e-3])
    h = np.array([0.6e-3, 0.8e-3, np.nan])
    e = np.array([0.8e6, 0.6e6, np.inf])
    together = np.array(segment_admittance(2 * np.pi * 2.4, length, r0, h, e, MU, RHO, radius_to_m=r1))
    assert together.shape == (4, 3)
    for i in range(3):
        alone = segment_admittance(2 * np.pi * 2.4, length[i], r0[i], h[i], e[i], MU, RHO,
                                   radius_to_m=r1[i])
        assert np.allclose(together[:, i], alone, rtol=1e-15, atol=0)


@pytest.mark.parametrize("kwargs, match", [
    (dict(length_m=-0.1), "length must be finite and > 0"),
    (dict(omega_rad_s=-1.0), "angular frequency must be finite and >= 0"),
    (dict(taper_subsegments=0), "taper_subsegments must be an integer >= 1"),
    (dict(radius_to_m=0.0), "radius_to must be finite and > 0"),
])
def test_bad_input(kwargs, match):
    args = dict(omega_rad_s=1.0, length_m=0.1, radius_m=3e-3, thickness_m=H, youngs_modulus_pa=E,
                viscosity_pa_s=MU, density_kg_m3=RHO)
    args.update(kwargs)
    with pytest.raises(NetworkSpecError, match=match):
        segment_admittance(**args)


def test_infinite_load_rejected():
    z, y = line_constants(OMEGA, R, H, E, MU, RHO)
    with pytest.raises(NetworkSpecError, match="load impedance must be finite"):
        input_impedance(z, y, L, np.inf)
