"""Hydraulic resistance of rigid vessel segments (laminar, Newtonian per segment).

Examples
--------
>>> print(f"{poiseuille_resistance(0.1, 0.002, 3.5e-3):.4e}")
5.5704e+07
>>> print(f"{tapered_resistance(0.1, 0.003, 0.002, 3.5e-3):.4e}")
2.6133e+07
"""

from __future__ import annotations

import numpy as np


def poiseuille_resistance(length_m, radius_m, viscosity_pa_s):
    """Hagen-Poiseuille resistance of a straight tube.

    Parameters
    ----------
    length_m, radius_m : array_like
        Segment length and lumen radius (m).
    viscosity_pa_s : array_like
        Dynamic viscosity (Pa*s).

    Returns
    -------
    ndarray
        Resistance (Pa*s/m^3).

    Notes
    -----
    R = 8 mu L / (pi r^4); steady, laminar, fully developed flow in a rigid tube.

    References
    ----------
    Hagen (1839), Poiseuille (1840); any fluid-mechanics textbook.
    """
    r = np.asarray(radius_m, dtype=float)
    return 8.0 * np.asarray(viscosity_pa_s) * np.asarray(length_m) / (np.pi * r**4)


def tapered_resistance(length_m, radius_in_m, radius_out_m, viscosity_pa_s):
    """Resistance of a linearly tapered tube in the lubrication approximation.

    Parameters
    ----------
    length_m : array_like
        Segment length (m).
    radius_in_m, radius_out_m : array_like
        Radii at the two ends (m); equal radii give Poiseuille exactly.
    viscosity_pa_s : array_like
        Dynamic viscosity (Pa*s).

    Returns
    -------
    ndarray
        Resistance (Pa*s/m^3).

    Notes
    -----
    Integrating 8 mu / (pi r(x)^4) along r(x) = r0 + (r1 - r0) x / L gives
    R = (8 mu L / (3 pi)) (r0^2 + r0 r1 + r1^2) / (r0^3 r1^3).  Valid for small
    taper angles (|dr/dx| << 1).
    """
    r0 = np.asarray(radius_in_m, dtype=float)
    r1 = np.asarray(radius_out_m, dtype=float)
    mu_l = np.asarray(viscosity_pa_s) * np.asarray(length_m)
    return 8.0 * mu_l / (3.0 * np.pi) * (r0**2 + r0 * r1 + r1**2) / (r0**3 * r1**3)


def wall_shear_stress(flow_m3_s, radius_m, viscosity_pa_s):
    """Poiseuille wall shear stress 4 mu Q / (pi r^3) (Pa), signed like the flow.

    >>> round(float(wall_shear_stress(5e-6, 0.003, 3.5e-3)), 4)
    0.8252
    """
    r = np.asarray(radius_m, dtype=float)
    return 4.0 * np.asarray(viscosity_pa_s) * np.asarray(flow_m3_s) / (np.pi * r**3)


def reynolds_number(flow_m3_s, radius_m, viscosity_pa_s, density_kg_m3):
    """Reynolds number rho U D / mu = 2 rho |Q| / (pi r mu) from the mean velocity.

    >>> round(float(reynolds_number(5e-6, 0.003, 3.5e-3, 1060.0)), 1)
    321.3
    """
    r = np.asarray(radius_m, dtype=float)
    return 2.0 * density_kg_m3 * np.abs(flow_m3_s) / (np.pi * r * np.asarray(viscosity_pa_s))
