"""Tests of vesselnet.womersley (rigid-tube oscillatory flow, convention e^(+i omega t)).

Sources:
- Womersley JR (1955) J Physiol 127:553-563.  The F10 and Z_L formulas as
  restated in REFERENCES.md 5.2 are [M, standard] (from memory, not checked
  against the paper); their tabulated values are [C] (computed from those
  formulas with numpy/scipy), so they show the formula is evaluated as
  written, not that it matches the paper.
- Reference tools: scipy.special.jv (direct complex-argument Bessel) and
  mpmath.besselj at 40 digits (arbitrary precision).
"""

import warnings

import mpmath
import numpy as np
import pytest
from scipy import special

from vesselnet.errors import NetworkSpecError
from vesselnet.womersley import (inviscid_inertance_per_length, longitudinal_impedance,
                                 womersley_f10, womersley_number)

MU = 3.5e-3      # Pa s, REFERENCES 8.7 (blood, 37 C)
RHO = 1060.0     # kg/m^3


def f10_jv(alpha):
    """F10 straight from the formula with scipy.special.jv (REFERENCES 5.2)."""
    z = alpha * np.exp(3j * np.pi / 4)
    return 2 * special.jv(1, z) / (z * special.jv(0, z))


def z_long_mpmath(omega, radius, mu=MU, rho=RHO):
    """Z_L = i omega rho / (pi R^2 (1 - F10)) in 40-digit arithmetic (mpmath)."""
    with mpmath.workdps(40):
        a = mpmath.mpf(radius) * mpmath.sqrt(mpmath.mpf(omega) * rho / mpmath.mpf(mu))
        z = a * mpmath.exp(3j * mpmath.pi / 4)
        f10 = 2 * mpmath.besselj(1, z) / (z * mpmath.besselj(0, z))
        return complex(1j * omega * rho / (mpmath.pi * mpmath.mpf(radius) ** 2 * (1 - f10)))


@pytest.mark.parametrize("radius_m, expected, half_digit", [
    (12.5e-3, 18.89, 5e-3),    # aorta, REFERENCES 5.1 [C]
    (3e-3, 4.533, 5e-4),       # femoral
    (50e-6, 0.076, 5e-4),      # arteriole
])
def test_womersley_number_check_values(radius_m, expected, half_digit):
    """REFERENCES 5.1: alpha = R sqrt(omega rho / mu) at 1.2 Hz [formula V, values C]."""
    alpha = womersley_number(2 * np.pi * 1.2, radius_m, MU, RHO)
    assert alpha == pytest.approx(expected, abs=half_digit)


@pytest.mark.parametrize("alpha, expected", [
    (0.5, 0.99870 - 0.03119j), (1.0, 0.97977 - 0.12152j), (3.0, 0.49901 - 0.35996j),
    (5.0, 0.28406 - 0.24160j), (10.0, 0.14163 - 0.13125j), (20.0, 0.07073 - 0.06819j),
])
def test_f10_table(alpha, expected):
    """REFERENCES 5.2 F10 table ([C] values of the [M, standard] formula), 5 decimals."""
    got = womersley_f10(alpha)
    assert abs(got.real - expected.real) <= 5e-6
    assert abs(got.imag - expected.imag) <= 5e-6


@pytest.mark.parametrize("alpha", [0.05, 0.5, 1.0, 1.999, 2.0, 2.001, 3.0, 7.5, 20.0, 150.0, 600.0])
def test_f10_equals_direct_scipy_jv(alpha):
    """F10 equals 2 J1(z)/(z J0(z)) evaluated directly with scipy.special.jv."""
    assert womersley_f10(alpha) == pytest.approx(f10_jv(alpha), rel=1e-12)


@pytest.mark.parametrize("alpha", [1e-6, 1e-3, 0.1, 0.7, 1.9, 2.1, 4.0, 30.0, 1000.0])
def test_z_long_matches_arbitrary_precision(alpha):
    """Z_L to 1e-13 against mpmath at 40 digits, including small alpha where the
    direct double-precision formula loses digits in 1 - F10."""
    radius = 2e-3
    omega = alpha ** 2 * MU / (RHO * radius ** 2)
    assert longitudinal_impedance(omega, radius, MU, RHO) == pytest.approx(
        z_long_mpmath(omega, radius), rel=1e-13)


def test_direct_formula_loses_digits_where_series_does_not():
    """At alpha = 1e-4 the direct jv formula for Z_L is off by far more than 1e-9
    (cancellation in 1 - F10), the series is not (reference: mpmath)."""
    radius, alpha = 2e-3, 1e-4
    omega = alpha ** 2 * MU / (RHO * radius ** 2)
    ref = z_long_mpmath(omega, radius)
    naive = 1j * omega * RHO / (np.pi * radius ** 2 * (1 - f10_jv(alpha)))
    assert abs(naive - ref) / abs(ref) > 1e-9
    assert abs(longitudinal_impedance(omega, radius, MU, RHO) - ref) / abs(ref) < 1e-14


@pytest.mark.parametrize("alpha", [0.0, 1e-6, 1e-3, 0.138])
def test_small_alpha_poiseuille_and_four_thirds_inertance(alpha):
    """alpha -> 0: Re Z_L -> 8 mu/(pi R^4) (Hagen-Poiseuille) and Im Z_L ->
    (4/3) omega rho/(pi R^2) (parabolic-profile inertance).  REFERENCES 5.2
    [C]: both ratios are 1.000000 at alpha = 0.138; the corrections are O(alpha^4)."""
    radius = 3e-3
    omega = alpha ** 2 * MU / (RHO * radius ** 2)
    z = longitudinal_impedance(omega, radius, MU, RHO)
    r_pois = 8 * MU / (np.pi * radius ** 4)
    assert z.real / r_pois == pytest.approx(1.0, abs=max(alpha ** 4 / 100, 1e-15))
    if alpha == 0.0:
        assert z.imag == 0.0 and z.real == r_pois       # exactly Poiseuille, no 0/0
    else:
        l_low = 4.0 / 3.0 * RHO / (np.pi * radius ** 2)
        assert z.imag / (omega * l_low) == pytest.approx(1.0, abs=max(alpha ** 4 / 100, 1e-15))
    assert round(z.real / r_pois, 6) == 1.0


@pytest.mark.parametrize("alpha", [50.0, 1e3, 1e4, 1e6])
def test_large_alpha_inertance_leading_part(alpha):
    """alpha -> infinity: Z_L = i omega rho/(pi R^2) (1 + F10 + ...), |F10| ~ 2/alpha
    (boundary-layer asymptotics of J1/J0 -> i for Im z -> +inf, [M, standard]); no
    overflow where jv itself overflows (alpha > ~700, REFERENCES 5.2)."""
    radius = 12.5e-3
    omega = alpha ** 2 * MU / (RHO * radius ** 2)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        z = longitudinal_impedance(omega, radius, MU, RHO)
        f10 = womersley_f10(alpha)
    inertive = 1j * omega * RHO / (np.pi * radius ** 2)
    assert np.isfinite(z)
    assert abs(z / inertive - 1) < 2.5 / alpha
    assert f10 * alpha / (np.sqrt(2) * (1 - 1j)) == pytest.approx(1.0, abs=1.5 / alpha)
    assert z.real > 8 * MU / (np.pi * radius ** 4)     # boundary-layer resistance grows


def test_jv_overflows_where_scaled_ratio_does_not():
    """REFERENCES 5.2: the direct jv formula fails near alpha = 800; jve does not."""
    with np.errstate(all="ignore"):
        assert not np.isfinite(f10_jv(2000.0))
    with mpmath.workdps(30):
        z = mpmath.mpf(2000) * mpmath.exp(3j * mpmath.pi / 4)
        ref = complex(2 * mpmath.besselj(1, z) / (z * mpmath.besselj(0, z)))
    assert womersley_f10(2000.0) == pytest.approx(ref, rel=1e-12)


@pytest.mark.parametrize("radius_m, f_hz, expected", [
    (12.5e-3, 1.2, 1.3623e6 + 1.7494e7j),
    (3e-3, 1.2, 1.3736e8 + 3.5920e8j),
    (2e-3, 1.0, 5.8323e8 + 7.0008e8j),
])
def test_z_long_check_values(radius_m, f_hz, expected):
    """REFERENCES 5.2 Z_L check values ([C] of the [M, standard] formula), 5 digits."""
    z = longitudinal_impedance(2 * np.pi * f_hz, radius_m, MU, RHO)
    assert z.real == pytest.approx(expected.real, rel=5e-5)
    assert z.imag == pytest.approx(expected.imag, rel=5e-5)


def test_convention_is_plus_i_omega_t():
    """e^(+i omega t) (REFERENCES 10.11): inertance has Im Z_L > 0 and F10 has Im < 0."""
    assert longitudinal_impedance(2 * np.pi, 3e-3, MU, RHO).imag > 0
    assert womersley_f10(3.0).imag < 0


def test_vectorised_over_vessels():
    """One call over many radii equals elementwise calls, shape preserved."""
    radii = np.array([[50e-6, 1e-3], [3e-3, 12.5e-3]])
    z = longitudinal_impedance(2 * np.pi * 2.4, radii, MU, RHO)
    assert z.shape == (2, 2)
    for idx in np.ndindex(radii.shape):
        assert z[idx] == longitudinal_impedance(2 * np.pi * 2.4, radii[idx], MU, RHO)


def test_inviscid_inertance_check_value():
    """REFERENCES 5.3 table: L = rho L/(pi r^2) = 2.1594e5 Pa s^2/m^3 for 10 cm of aorta [C]."""
    assert 0.1 * inviscid_inertance_per_length(12.5e-3, RHO) == pytest.approx(2.1594e5, rel=5e-5)


@pytest.mark.parametrize("args, match", [
    ((-1.0, 3e-3, MU, RHO), "angular frequency must be finite and >= 0"),
    ((1.0, 0.0, MU, RHO), "radius must be finite and > 0"),
    ((1.0, 3e-3, np.nan, RHO), "viscosity must be finite and > 0"),
    ((1.0, 3e-3, MU, -1.0), "density must be finite and > 0"),
])
def test_bad_input(args, match):
    with pytest.raises(NetworkSpecError, match=match):
        longitudinal_impedance(*args)


def test_bad_alpha():
    with pytest.raises(NetworkSpecError, match="alpha must be finite and >= 0"):
        womersley_f10(-0.1)
