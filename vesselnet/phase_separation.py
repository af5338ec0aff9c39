"""Red-cell partition at diverging microvascular bifurcations (plasma skimming).

A parent vessel F feeds daughters alpha and beta.  The law gives FQE, the
fraction of the parent's red-cell flux entering alpha, from FQB, the fraction
of its blood flow entering alpha.  Laws, by file key (:data:`LAWS`):

``none``
    No separation, FQE = FQB: both daughters get the parent's hematocrit.
``pries-1990``
    The empirical law of Pries et al. 1989, as used in the network model of
    Pries et al. 1990.
``pries-2005``
    The same law with the parameters revised by Pries & Secomb 2005.

Diameters are in metres (converted to micrometres inside), hematocrit is the
parent's discharge hematocrit as a fraction.

Examples
--------
>>> fqe = red_cell_fraction(0.3, 10e-6, 8e-6, 6e-6, 0.45, law="pries-1990")
>>> print(round(float(fqe), 4), round(float(fqe) * 0.45 / 0.3, 4))   # FQE, H_alpha
0.184 0.276
"""

from __future__ import annotations

import numpy as np
from scipy.special import expit

from .errors import NetworkSpecError, Problem

LAWS = ("none", "pries-1990", "pries-2005")
"""File keys of the phase-separation laws."""


def _input_error(item: str, message: str, fix: str) -> NetworkSpecError:
    return NetworkSpecError([Problem("", 0, 0, item, message, fix)])


def _check(name: str, values: np.ndarray, bad: np.ndarray, rule: str, fix: str) -> None:
    if bad.any():
        flat = np.flatnonzero(bad)
        shown = ", ".join(str(i) for i in flat[:5]) + (", ..." if flat.size > 5 else "")
        raise _input_error(f"{name}[{shown}]",
                           f"{rule}, got {values.ravel()[flat[0]]:g} ({flat.size} value(s))", fix)


def _prepare(law, flow_fraction, parent_diameter_m, alpha_diameter_m, beta_diameter_m,
             parent_hematocrit):
    if law not in LAWS:
        raise _input_error(f"separation law '{law}'", "unknown law",
                           f"choose one of {', '.join(LAWS)}")
    arrays = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in (
        flow_fraction, parent_diameter_m, alpha_diameter_m, beta_diameter_m, parent_hematocrit)))
    fqb, d_f, d_a, d_b, h_f = arrays
    _check("flow_fraction", fqb, ~np.isfinite(fqb) | (fqb < 0) | (fqb > 1),
           "flow fraction must be in [0, 1]", "give Q_alpha / Q_parent")
    for name, d in (("parent_diameter_m", d_f), ("alpha_diameter_m", d_a),
                    ("beta_diameter_m", d_b)):
        _check(name, d, ~np.isfinite(d) | (d <= 0), "diameter must be finite and > 0 m",
               "give positive diameters in metres")
    _check("parent_hematocrit", h_f, ~np.isfinite(h_f) | (h_f < 0) | (h_f > 1),
           "discharge hematocrit must be a fraction in [0, 1]"
           + (" (a percentage? divide by 100)" if (h_f > 1).any() else ""),
           "give hematocrit as a fraction, for example 0.45")
    return fqb, d_f * 1e6, d_a * 1e6, d_b * 1e6, h_f


def _parameters(law, d_f_um, d_a_um, d_b_um, h_f):
    if law == "pries-1990":
        a = -6.96 * np.log(d_a_um / d_b_um) / d_f_um
        x0 = 0.4 / d_f_um
    elif law == "pries-2005":
        q = (d_a_um / d_b_um) ** 2
        a = -13.29 * ((q - 1.0) / (q + 1.0)) * (1.0 - h_f) / d_f_um
        x0 = 0.964 * (1.0 - h_f) / d_f_um
    else:
        zero = np.zeros(np.broadcast(d_f_um, d_a_um, d_b_um, h_f).shape)
        return zero, zero + 1.0, zero.copy()
    b = 1.0 + 6.98 * (1.0 - h_f) / d_f_um
    return a, b, x0


def separation_parameters(parent_diameter_m, alpha_diameter_m, beta_diameter_m,
                          parent_hematocrit, *, law: str
                          ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Parameters A, B, X0 of the logit phase-separation law.

    Parameters
    ----------
    parent_diameter_m, alpha_diameter_m, beta_diameter_m : array_like
        Diameters of the feeding vessel and of daughters alpha and beta (m), > 0.
    parent_hematocrit : array_like
        Discharge hematocrit of the parent, fraction in [0, 1].
    law : {'none', 'pries-1990', 'pries-2005'}
        Parameter set.

    Returns
    -------
    A, B, X0 : ndarray
        Dimensionless, broadcast shape.  ``none`` gives A = 0, B = 1, X0 = 0.

    Raises
    ------
    NetworkSpecError
        Unknown law, a diameter not finite or <= 0, a hematocrit outside [0, 1].

    Notes
    -----
    D in micrometres, H_F the parent discharge hematocrit.

    1989/1990 set: A = -6.96 ln(D_a/D_b) / D_F,  B = 1 + 6.98 (1 - H_F) / D_F,
    X0 = 0.4 / D_F.

    2005 set: A = -13.29 [(D_a^2/D_b^2 - 1)/(D_a^2/D_b^2 + 1)] (1 - H_F) / D_F,
    B = 1 + 6.98 (1 - H_F) / D_F,  X0 = 0.964 (1 - H_F) / D_F.

    References
    ----------
    A. R. Pries, K. Ley, M. Claassen, P. Gaehtgens, Microvasc Res 38 (1989)
    81-101 (the empirical law); A. R. Pries, T. W. Secomb, P. Gaehtgens,
    J. F. Gross, Circ Res 67 (1990) 826-834 (network model); A. R. Pries,
    T. W. Secomb, Am J Physiol Heart Circ Physiol 289 (2005) H2657-H2664
    (revised parameters).  The coefficients and the sign of A are from
    memory (project reference notes, section 3); check them against the
    papers.

    Examples
    --------
    >>> a, b, x0 = separation_parameters(10e-6, 8e-6, 6e-6, 0.45, law="pries-2005")
    >>> print(round(float(a), 4), round(float(b), 4), round(float(x0), 4))
    -0.2047 1.3839 0.053
    """
    _, d_f, d_a, d_b, h_f = _prepare(law, 0.5, parent_diameter_m, alpha_diameter_m,
                                     beta_diameter_m, parent_hematocrit)
    a, b, x0 = _parameters(law, d_f, d_a, d_b, h_f)
    return np.asarray(a), np.asarray(b), np.asarray(x0)


def red_cell_fraction(flow_fraction, parent_diameter_m, alpha_diameter_m, beta_diameter_m,
                      parent_hematocrit, *, law: str) -> np.ndarray:
    """Fraction FQE of the parent's red-cell flux that enters daughter alpha.

    Parameters
    ----------
    flow_fraction : array_like
        FQB = Q_alpha / Q_parent, in [0, 1].
    parent_diameter_m, alpha_diameter_m, beta_diameter_m : array_like
        Diameters of the feeding vessel and of daughters alpha and beta (m), > 0.
    parent_hematocrit : array_like
        Discharge hematocrit of the parent, fraction in [0, 1].
    law : {'none', 'pries-1990', 'pries-2005'}
        The law.

    Returns
    -------
    ndarray
        FQE in [0, 1], broadcast shape.  Daughter beta receives 1 - FQE
        (the law is antisymmetric under alpha <-> beta, FQB -> 1 - FQB).

    Raises
    ------
    NetworkSpecError
        Unknown law; FQB outside [0, 1]; a diameter not finite or <= 0; a
        hematocrit outside [0, 1].

    Notes
    -----
    With logit(x) = ln(x / (1 - x)) and A, B, X0 from
    :func:`separation_parameters`:

        logit(FQE) = A + B logit((FQB - X0) / (1 - 2 X0))   for X0 < FQB < 1 - X0
        FQE = 0 for FQB <= X0 (alpha receives plasma only)
        FQE = 1 for FQB >= 1 - X0 (beta receives plasma only)

    The cut-offs are applied with these exact comparisons, so FQB = X0 gives
    exactly 0.  Where X0 >= 1/2 (parent below about 0.8 um with the 1990
    set, below about 1.9 um with the 2005 set: far outside the law's range)
    the two cut-offs overlap; there the daughter with the larger flow takes
    all red cells, and FQB = 1/2 splits them evenly.  Daughter hematocrits
    are H_alpha = FQE H_F / FQB and H_beta = (1 - FQE) H_F / (1 - FQB).
    For D_F of 100 um and more, A and X0 tend to 0 and B to 1: FQE ~ FQB.

    References
    ----------
    As :func:`separation_parameters`.

    Examples
    --------
    >>> fqe = red_cell_fraction([0.03, 0.3, 0.5], 10e-6, 8e-6, 8e-6, 0.45, law="pries-2005")
    >>> print(np.round(fqe, 4))
    [0.     0.2087 0.5   ]
    """
    fqb, d_f, d_a, d_b, h_f = _prepare(law, flow_fraction, parent_diameter_m,
                                       alpha_diameter_m, beta_diameter_m, parent_hematocrit)
    if law == "none":
        return np.asarray(fqb.copy())
    a, b, x0 = _parameters(law, d_f, d_a, d_b, h_f)
    fqe = np.empty(fqb.shape)
    overlap = x0 >= 0.5
    fqe[overlap] = np.where(fqb[overlap] < 0.5, 0.0, np.where(fqb[overlap] > 0.5, 1.0, 0.5))
    low = ~overlap & (fqb <= x0)
    high = ~overlap & (fqb >= 1.0 - x0)
    fqe[low] = 0.0
    fqe[high] = 1.0
    mid = ~(overlap | low | high)
    x = (fqb[mid] - x0[mid]) / (1.0 - 2.0 * x0[mid])
    fqe[mid] = expit(a[mid] + b[mid] * (np.log(x) - np.log1p(-x)))
    return np.asarray(fqe)
