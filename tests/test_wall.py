"""Tests of vesselnet.wall (tethered thin wall, C' = 2 pi r^3 (1 - nu^2)/(E h)).

Sources: REFERENCES.md 5.3 ([M, standard linear theory]; its table values are
[C], computed from the formulas as written there); Moens-Korteweg
c0 = sqrt(E h/(2 rho R)) [V: Biomedical Engineering and Design Handbook Vol. 1,
eqs. 3.17-3.18]; scipy.integrate.quad as the reference integrator.
"""

import numpy as np
import pytest
from scipy import integrate

from vesselnet.errors import NetworkSpecError
from vesselnet.units import MMHG_PA
from vesselnet.wall import (compliance_per_length, inviscid_characteristic_impedance,
                            moens_korteweg_speed, segment_compliance)
from vesselnet.womersley import inviscid_inertance_per_length

RHO = 1060.0
ML_MMHG = 1e-6 / MMHG_PA           # m^3/Pa in 1 mL/mmHg
MMHG_S_ML = MMHG_PA / 1e-6         # Pa s/m^3 in 1 mmHg s/mL

# REFERENCES 5.3 table: E (MPa), h (mm), r (mm), c0, c0/sqrt(0.75), C (m^3/Pa, 10 cm,
# nu = 0.5), C (mL/mmHg), Z0 = rho c0/(pi r^2) (mmHg s/mL)
TABLE_5_3 = [
    (0.4, 1.5, 12.5, 4.758, 5.494, 1.5340e-9, 0.2045, 0.0771),
    (0.8, 0.6, 3.0, 8.687, 10.031, 2.6507e-11, 3.534e-3, 2.443),
    (1.0, 0.5, 2.0, 10.859, 12.539, 7.5398e-12, 1.005e-3, 6.871),
]


@pytest.mark.parametrize("e_mpa, h_mm, r_mm, c0, c_tethered, c_m3_pa, c_ml_mmhg, z0", TABLE_5_3)
def test_table_5_3(e_mpa, h_mm, r_mm, c0, c_tethered, c_m3_pa, c_ml_mmhg, z0):
    """REFERENCES 5.3 [C]: Moens-Korteweg c0 (nu = 0), c0/sqrt(1 - nu^2) at nu = 0.5,
    10 cm compliance 3 pi r^3 L/(2 E h), and Z0 = rho c0/(pi r^2) (the table uses c0)."""
    e, h, r = e_mpa * 1e6, h_mm * 1e-3, r_mm * 1e-3
    assert moens_korteweg_speed(r, h, e, RHO, poisson_ratio=0.0) == pytest.approx(c0, abs=5e-4)
    assert moens_korteweg_speed(r, h, e, RHO) == pytest.approx(c_tethered, abs=5e-4)
    assert segment_compliance(0.1, r, h, e) == pytest.approx(c_m3_pa, rel=5e-5)
    assert segment_compliance(0.1, r, h, e) / ML_MMHG == pytest.approx(c_ml_mmhg, rel=1e-3)
    z = inviscid_characteristic_impedance(r, h, e, RHO, poisson_ratio=0.0) / MMHG_S_ML
    assert z == pytest.approx(z0, rel=1e-3)


def test_free_wall_is_four_thirds():
    """REFERENCES 5.3: with nu = 0, C = 2 pi r^3 L/(E h) = 2.0453e-9 m^3/Pa (aorta) [C],
    4/3 of the tethered value."""
    free = segment_compliance(0.1, 12.5e-3, 1.5e-3, 0.4e6, poisson_ratio=0.0)
    assert free == pytest.approx(2.0453e-9, rel=5e-5)
    assert free / segment_compliance(0.1, 12.5e-3, 1.5e-3, 0.4e6) == pytest.approx(4 / 3, rel=1e-14)


@pytest.mark.parametrize("nu", [0.0, 0.3, 0.5])
def test_speed_is_one_over_sqrt_inertance_times_compliance(nu):
    """Inviscid limit (REFERENCES 5.3): c = 1/sqrt(L' C'), Z0 = sqrt(L'/C') = rho c/A."""
    r, h, e = 4e-3, 0.7e-3, 0.6e6
    l_prime = inviscid_inertance_per_length(r, RHO)
    c_prime = compliance_per_length(r, h, e, poisson_ratio=nu)
    assert moens_korteweg_speed(r, h, e, RHO, poisson_ratio=nu) == pytest.approx(
        1 / np.sqrt(l_prime * c_prime), rel=1e-14)
    assert inviscid_characteristic_impedance(r, h, e, RHO, poisson_ratio=nu) == pytest.approx(
        np.sqrt(l_prime / c_prime), rel=1e-14)
    assert moens_korteweg_speed(r, h, e, RHO, poisson_ratio=nu) == pytest.approx(
        moens_korteweg_speed(r, h, e, RHO, poisson_ratio=0.0) / np.sqrt(1 - nu ** 2), rel=1e-14)


@pytest.mark.parametrize("r0, r1, length", [(3e-3, 2e-3, 0.1), (5e-3, 3e-3, 0.3), (1e-3, 1.4e-3, 0.05)])
def test_tapered_compliance_against_quadrature(r0, r1, length):
    """Integral of C'(r(x)) over a linear taper, reference scipy.integrate.quad."""
    h, e = 0.6e-3, 0.8e6
    ref, _ = integrate.quad(
        lambda x: compliance_per_length(r0 + (r1 - r0) * x / length, h, e), 0.0, length,
        epsabs=0.0, epsrel=1e-13)
    assert segment_compliance(length, r0, h, e, radius_to_m=r1) == pytest.approx(ref, rel=1e-12)


def test_rigid_wall_has_no_compliance():
    """A vessel without wall data is passed as E = inf: C' = 0 whatever the thickness."""
    c = compliance_per_length([3e-3, 3e-3], [np.nan, 0.6e-3], [np.inf, 0.8e6])
    assert c[0] == 0.0 and c[1] > 0.0


@pytest.mark.parametrize("kwargs, match", [
    (dict(radius_m=-1e-3, thickness_m=1e-3, youngs_modulus_pa=1e6), "radius must be finite and > 0"),
    (dict(radius_m=1e-3, thickness_m=0.0, youngs_modulus_pa=1e6), "wall thickness must be finite and > 0"),
    (dict(radius_m=1e-3, thickness_m=1e-3, youngs_modulus_pa=np.nan), "Young's modulus must be > 0"),
    (dict(radius_m=1e-3, thickness_m=1e-3, youngs_modulus_pa=1e6, poisson_ratio=0.7),
     r"poisson_ratio must lie in \[0, 0.5\]"),
])
def test_bad_input(kwargs, match):
    with pytest.raises(NetworkSpecError, match=match):
        compliance_per_length(**kwargs)
