"""Pressure loss across an arterial stenosis (Young-Tsai lumped model, steady part).

Examples
--------
>>> r_v, k_t = young_tsai_coefficients(0.004, 0.002, 0.010, 3.5e-3, 1060.0)
>>> q = 100e-6 / 60
>>> round(float(stenosis_pressure_drop(q, r_v, k_t)) / 133.322387415, 2)
2.25
"""

from __future__ import annotations

import numpy as np

TURBULENT_COEFFICIENT = 1.52
"""K_t of Young & Tsai (1973), fitted to model stenoses [from memory; REFERENCES 4.1]."""


def young_tsai_coefficients(diameter_m, throat_diameter_m, lesion_length_m, viscosity_pa_s,
                            density_kg_m3, *, k_t=TURBULENT_COEFFICIENT):
    """Coefficients of the steady lesion law dP = R_v Q + K_t Q|Q|.

    Parameters
    ----------
    diameter_m : array_like
        Unobstructed lumen diameter D0 (m).
    throat_diameter_m : array_like
        Minimal lumen diameter Ds (m), D0 times (1 - diameter reduction).
    lesion_length_m : array_like
        Lesion length Ls (m).
    viscosity_pa_s, density_kg_m3 : float or array_like
        Blood viscosity (Pa*s) and density (kg/m^3).
    k_t : float
        Expansion-loss coefficient (1.52).

    Returns
    -------
    r_v : ndarray
        Viscous coefficient (Pa*s/m^3): the Poiseuille resistance of a tube
        of length La = 0.83 Ls + 1.64 Ds at the throat diameter.
    k_quadratic : ndarray
        Quadratic coefficient (Pa*s^2/m^6): k_t (rho / 2) (1/As - 1/A0)^2.

    Notes
    -----
    Young & Tsai write dP = (Kv mu / D0) U + (Kt rho / 2)(A0/As - 1)^2 |U| U
    with U = Q/A0 and Kv = 32 (La/D0)(A0/As)^2; in terms of Q this is
    R_v Q + K_t Q|Q| with the coefficients returned here.  The inertial term
    (Ku rho Ls dU/dt) is zero in steady flow.

    References
    ----------
    Young DF, Tsai FY (1973) J Biomech 6:395-410; Young DF (1979)
    J Biomech Eng 101:157-175 (coefficients from memory, REFERENCES 4.1).
    """
    d0 = np.asarray(diameter_m, dtype=float)
    ds = np.asarray(throat_diameter_m, dtype=float)
    la = 0.83 * np.asarray(lesion_length_m) + 1.64 * ds
    r_v = 128.0 * np.asarray(viscosity_pa_s) * la / (np.pi * ds**4)
    a0, a_s = np.pi * d0**2 / 4, np.pi * ds**2 / 4
    k_quadratic = k_t * np.asarray(density_kg_m3) / 2 * (1 / a_s - 1 / a0) ** 2
    return r_v, k_quadratic


def stenosis_pressure_drop(flow_m3_s, r_v, k_quadratic):
    """dP = R_v Q + K Q|Q| (Pa), signed like the flow (Q|Q|, never Q^2)."""
    q = np.asarray(flow_m3_s, dtype=float)
    return r_v * q + k_quadratic * q * np.abs(q)
