"""Lumped outlet models: two- and three-element Windkessels and their setup.

A Windkessel closes an outlet of the modelled tree with the impedance of the
vascular bed beyond it, relating the outlet pressure above the venous
pressure to the outlet flow, P - P_v = Z Q.

**Time convention.** Phasors of ``e^(+i omega t)``, omega >= 0: a capacitor
has admittance +i omega C, so the impedances below have negative imaginary
parts.

Examples
--------
>>> import numpy as np
>>> mmhg_s_ml = 133.322387415e6                  # Pa*s/m^3 per mmHg*s/mL
>>> c = 1.5e-6 / 133.322387415                   # 1.5 mL/mmHg in m^3/Pa
>>> z = windkessel3_impedance(2 * np.pi, 0.05 * mmhg_s_ml, 0.95 * mmhg_s_ml, c)
>>> print(np.round(abs(z) / mmhg_s_ml, 4), np.round(np.degrees(np.angle(z)), 2))
0.1216 -59.51
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from .errors import NetworkSpecError, Problem
from .units import MMHG_PA
from .womersley import _check_positive, _invalid

__all__ = ["windkessel2_impedance", "windkessel3_impedance", "bed_resistances_from_total",
           "windkessel_parameters", "WindkesselParameters"]

_MMHG_S_ML = MMHG_PA / 1e-6       # Pa*s/m^3 in one mmHg*s/mL
_ML_MMHG = 1e-6 / MMHG_PA         # m^3/Pa in one mL/mmHg


def windkessel2_impedance(omega_rad_s, resistance_pa_s_m3, compliance_m3_pa):
    """Two-element (Frank) Windkessel impedance, R parallel to C.

    Parameters
    ----------
    omega_rad_s : array_like
        Angular frequency [rad/s], >= 0.
    resistance_pa_s_m3 : array_like
        Peripheral resistance R [Pa s/m^3], > 0.
    compliance_m3_pa : array_like
        Compliance C [m^3/Pa], >= 0.

    Returns
    -------
    ndarray or complex
        Z [Pa s/m^3]; Z(0) = R.

    Notes
    -----
    Z = R / (1 + i omega R C).  Time domain: C dP/dt = Q - (P - P_v)/R; the
    diastolic decay time constant is tau = R C.

    References
    ----------
    Westerhof N, Lankhaar J-W, Westerhof BE (2009) The arterial Windkessel.
    Med Biol Eng Comput 47:131-141 [formula from memory, standard].

    Examples
    --------
    >>> z = windkessel2_impedance(2 * np.pi, 1.33322e8, 1.5e-6 / 133.322)
    >>> print(np.round(abs(z) / 1.33322e8, 4), np.round(np.degrees(np.angle(z)), 2))
    0.1055 -83.94
    """
    omega = np.asarray(omega_rad_s, dtype=float)
    r = np.asarray(resistance_pa_s_m3, dtype=float)
    c = np.asarray(compliance_m3_pa, dtype=float)
    _check_positive("windkessel2_impedance", "angular frequency", omega, "rad/s", allow_zero=True)
    _check_positive("windkessel2_impedance", "resistance", r, "Pa*s/m3")
    _check_positive("windkessel2_impedance", "compliance", c, "m3/Pa", allow_zero=True)
    return (r / (1.0 + 1j * omega * r * c))[()]


def windkessel3_impedance(omega_rad_s, proximal_resistance_pa_s_m3,
                          distal_resistance_pa_s_m3, compliance_m3_pa):
    """Three-element (RCR) Windkessel impedance: R1 in series with (R2 parallel C).

    Parameters
    ----------
    omega_rad_s : array_like
        Angular frequency [rad/s], >= 0.
    proximal_resistance_pa_s_m3 : array_like
        R1 [Pa s/m^3], >= 0, usually the characteristic impedance Zc.
    distal_resistance_pa_s_m3 : array_like
        R2 [Pa s/m^3], > 0 (R2 = R_total - R1).
    compliance_m3_pa : array_like
        C [m^3/Pa], >= 0.

    Returns
    -------
    ndarray or complex
        Z [Pa s/m^3]; Z(0) = R1 + R2, Z -> R1 as omega -> infinity.

    Notes
    -----
    Z = R1 + R2 / (1 + i omega R2 C).  Time domain, with P_c the pressure on
    the capacitor: P = P_c + R1 Q, C dP_c/dt = Q - (P_c - P_v)/R2.

    References
    ----------
    Westerhof, Lankhaar & Westerhof (2009) Med Biol Eng Comput 47:131-141
    [formula from memory, standard].

    Examples
    --------
    >>> z = windkessel3_impedance(0.0, 1e7, 1.2e8, 1e-8)
    >>> print(f"{z.real:.3e}")
    1.300e+08
    """
    where = "windkessel3_impedance"
    omega = np.asarray(omega_rad_s, dtype=float)
    r1 = np.asarray(proximal_resistance_pa_s_m3, dtype=float)
    r2 = np.asarray(distal_resistance_pa_s_m3, dtype=float)
    c = np.asarray(compliance_m3_pa, dtype=float)
    _check_positive(where, "angular frequency", omega, "rad/s", allow_zero=True)
    _check_positive(where, "proximal resistance", r1, "Pa*s/m3", allow_zero=True)
    _check_positive(where, "distal resistance", r2, "Pa*s/m3")
    _check_positive(where, "compliance", c, "m3/Pa", allow_zero=True)
    return (r1 + r2 / (1.0 + 1j * omega * r2 * c))[()]


def bed_resistances_from_total(total_resistance_pa_s_m3, flow_share):
    """Per-bed resistances from the total peripheral resistance and flow shares.

    Parameters
    ----------
    total_resistance_pa_s_m3 : float
        R_T,total = (P_mean - P_out) / Q_total [Pa s/m^3], > 0.
    flow_share : array_like
        Q_i / Q_total of each bed, shape (n,), each in (0, 1].

    Returns
    -------
    ndarray
        R_T,i = R_T,total / share_i [Pa s/m^3], shape (n,).

    Notes
    -----
    Assumes every outlet sees the same mean pressure (conduit pressure drops
    neglected), so the bed conductances add up to 1 / R_T,total when the
    shares sum to one.

    References
    ----------
    Common practice [M]; Westerhof, Lankhaar & Westerhof (2009) give
    R = (P_ao,mean - P_ven,mean) / CO.

    Examples
    --------
    >>> print(bed_resistances_from_total(1.0e8, [0.25, 0.75]) / 1e8)
    [4.         1.33333333]
    """
    where = "bed_resistances_from_total"
    total = np.asarray(total_resistance_pa_s_m3, dtype=float)
    share = np.asarray(flow_share, dtype=float)
    _check_positive(where, "total resistance", total, "Pa*s/m3")
    _check_shares(where, share)
    return total / share


def _check_shares(where: str, share: np.ndarray) -> None:
    if share.ndim != 1 or share.size == 0:
        raise _invalid(where, f"flow_share must be a 1-D array with one share per bed, got shape {share.shape}",
                       "pass one share per bed")
    bad = ~np.isfinite(share) | (share <= 0) | (share > 1)
    if np.any(bad):
        raise _invalid(where, f"flow shares must lie in (0, 1], got {share[bad][0]}",
                       "give fractions (0.1 for 10 %), not percentages")
    if abs(share.sum() - 1.0) > 1e-6:
        warnings.warn(f"{where}: flow shares sum to {share.sum():.6g}, not 1; the distributed "
                      "peripheral compliance will not add up to the target", stacklevel=3)


@dataclass(frozen=True)
class WindkesselParameters:
    """Three-element Windkessel parameters of each bed, in SI.

    Attributes
    ----------
    ids : tuple of str
        Bed ids, in input order.
    proximal_resistance_pa_s_m3, distal_resistance_pa_s_m3 : ndarray
        R1 and R2 = R_T - R1 of each bed [Pa s/m^3], shape (n,).
    compliance_m3_pa : ndarray
        C_i = C_periph * share_i [m^3/Pa], shape (n,).
    total_compliance_m3_pa : float
        The target total arterial compliance.
    conduit_compliance_m3_pa : float
        The compliance of the modelled vessels, subtracted from the target.
    peripheral_compliance_m3_pa : float
        C_periph = total - conduit, distributed over the beds.
    """

    ids: tuple[str, ...]
    proximal_resistance_pa_s_m3: np.ndarray
    distal_resistance_pa_s_m3: np.ndarray
    compliance_m3_pa: np.ndarray
    total_compliance_m3_pa: float
    conduit_compliance_m3_pa: float
    peripheral_compliance_m3_pa: float

    def table(self) -> dict[str, np.ndarray]:
        """Id-aligned columns (pandas-ready)."""
        return {"id": np.array(self.ids, dtype=object),
                "proximal_resistance_pa_s_m3": self.proximal_resistance_pa_s_m3,
                "distal_resistance_pa_s_m3": self.distal_resistance_pa_s_m3,
                "compliance_m3_pa": self.compliance_m3_pa}

    def summary(self) -> str:
        """A few lines in display units (mmHg*s/mL, mL/mmHg)."""
        return (f"{len(self.ids)} beds; compliance total {self.total_compliance_m3_pa / _ML_MMHG:.4g}"
                f" mL/mmHg = conduit {self.conduit_compliance_m3_pa / _ML_MMHG:.4g}"
                f" + peripheral {self.peripheral_compliance_m3_pa / _ML_MMHG:.4g};"
                f" R1 {self.proximal_resistance_pa_s_m3.min() / _MMHG_S_ML:.4g}"
                f"..{self.proximal_resistance_pa_s_m3.max() / _MMHG_S_ML:.4g} mmHg*s/mL")


def windkessel_parameters(bed_resistance_pa_s_m3, terminal_impedance_pa_s_m3, flow_share, *,
                          total_compliance_m3_pa, conduit_compliance_m3_pa, ids=None):
    """Three-element Windkessel of each outlet bed from resistance, shares and compliance.

    Parameters
    ----------
    bed_resistance_pa_s_m3 : array_like
        Total resistance R_T,i of each bed beyond its outlet [Pa s/m^3],
        shape (n,), > 0 (see :func:`bed_resistances_from_total`).
    terminal_impedance_pa_s_m3 : array_like
        Characteristic impedance Z0,i = rho c_i / A_i of the terminal vessel
        feeding each bed [Pa s/m^3], shape (n,), >= 0
        (:func:`vesselnet.wall.inviscid_characteristic_impedance`).
    flow_share : array_like
        Q_i / Q_total of each bed, shape (n,), in (0, 1]; they should sum to 1
        (a warning otherwise).
    total_compliance_m3_pa : float
        Target total arterial compliance C_total [m^3/Pa], for example from
        the pulse-pressure or diastolic-decay method.
    conduit_compliance_m3_pa : float
        Compliance of the modelled vessels [m^3/Pa], >= 0, for example the sum
        of :func:`vesselnet.wall.segment_compliance` over the tree.
    ids : sequence of str, optional
        Bed ids for the result and error messages; default "0", "1", ...

    Returns
    -------
    WindkesselParameters
        R1 = Z0,i, R2 = R_T,i - R1, C_i = C_periph * share_i and the
        compliance bookkeeping.

    Raises
    ------
    NetworkSpecError
        Listing every bed whose R1 >= R_T,i (R2 would be <= 0), and a
        peripheral compliance C_total - C_conduit <= 0; also non-positive
        resistances, shares outside (0, 1] or mismatched lengths.

    Notes
    -----
    Per outlet i: R1,i = Z0,i (which removes the reflection of forward waves
    at the outlet), R2,i = R_T,i - R1,i (so R1 + R2 = R_T and the steady
    solution is unchanged), C_i = C_periph Q_i / Q_total with
    C_periph = C_total - C_conduit.

    References
    ----------
    Common practice [M]: Stergiopulos N, Young DF, Rogge TR (1992) J Biomech
    25:1477-1488; Alastruey J et al. (2008) Commun Comput Phys 4:317; Xiao N,
    Alastruey J, Figueroa CA (2014) Int J Numer Method Biomed Eng 30:204-231.

    Examples
    --------
    >>> mmhg_s_ml, ml_mmhg = 133.322387415e6, 1e-6 / 133.322387415
    >>> p = windkessel_parameters([10.0 * mmhg_s_ml, 10.0 / 9 * mmhg_s_ml],
    ...                           [0.5 * mmhg_s_ml, 0.1 * mmhg_s_ml], [0.1, 0.9],
    ...                           total_compliance_m3_pa=1.5 * ml_mmhg,
    ...                           conduit_compliance_m3_pa=0.0, ids=["arm", "rest"])
    >>> print(np.round(p.compliance_m3_pa / ml_mmhg, 3), np.round(p.distal_resistance_pa_s_m3 / mmhg_s_ml, 3))
    [0.15 1.35] [9.5   1.011]
    """
    where = "windkessel_parameters"
    rt = np.asarray(bed_resistance_pa_s_m3, dtype=float)
    z0 = np.asarray(terminal_impedance_pa_s_m3, dtype=float)
    share = np.asarray(flow_share, dtype=float)
    _check_shares(where, share)
    n = share.size
    names = tuple(str(i) for i in range(n)) if ids is None else tuple(str(i) for i in ids)
    if rt.shape != (n,) or z0.shape != (n,) or len(names) != n:
        raise _invalid(where, f"need one value per bed: {n} shares, resistances {rt.shape}, "
                       f"impedances {z0.shape}, {len(names)} ids", "pass arrays of equal length")
    _check_positive(where, "bed resistance", rt, "Pa*s/m3")
    _check_positive(where, "terminal characteristic impedance", z0, "Pa*s/m3", allow_zero=True)
    c_total = float(total_compliance_m3_pa)
    c_conduit = float(conduit_compliance_m3_pa)
    _check_positive(where, "total compliance", np.asarray(c_total), "m3/Pa")
    _check_positive(where, "conduit compliance", np.asarray(c_conduit), "m3/Pa", allow_zero=True)

    problems = [
        Problem("", 0, 0, f"{where} bed '{names[i]}'",
                f"proximal resistance R1 = terminal characteristic impedance "
                f"{z0[i] / _MMHG_S_ML:.4g} mmHg*s/mL is not below the bed resistance "
                f"{rt[i] / _MMHG_S_ML:.4g} mmHg*s/mL, so R2 = R_T - R1 would be <= 0",
                "check the bed resistance and the terminal vessel's radius and wall "
                "(a narrow or stiff terminal vessel has a large characteristic impedance)")
        for i in np.flatnonzero(z0 >= rt)]
    c_periph = c_total - c_conduit
    if c_periph <= 0:
        problems.append(Problem(
            "", 0, 0, where,
            f"peripheral compliance C_total - C_conduit must be > 0, got "
            f"{c_total / _ML_MMHG:.4g} - {c_conduit / _ML_MMHG:.4g} = {c_periph / _ML_MMHG:.4g} mL/mmHg",
            "raise the total compliance target or check the wall data: the modelled "
            "vessels already hold at least the target compliance"))
    if problems:
        raise NetworkSpecError(problems)

    def frozen(a: np.ndarray) -> np.ndarray:
        a = np.array(a, dtype=float)
        a.setflags(write=False)
        return a

    return WindkesselParameters(
        ids=names,
        proximal_resistance_pa_s_m3=frozen(z0),
        distal_resistance_pa_s_m3=frozen(rt - z0),
        compliance_m3_pa=frozen(c_periph * share),
        total_compliance_m3_pa=c_total,
        conduit_compliance_m3_pa=c_conduit,
        peripheral_compliance_m3_pa=c_periph)
