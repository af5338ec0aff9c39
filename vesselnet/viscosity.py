"""Apparent viscosity of blood in tubes and microvessels (Fåhræus–Lindqvist effect).

Laws, by file key (:data:`LAWS`):

``constant``
    The blood viscosity given for the network, the same in every vessel.  It
    has no diameter or hematocrit dependence and no plasma reference, so the
    functions here refuse it; the caller uses the given value directly.
``pries-vitro``
    Pries, Neuhaus & Gaehtgens 1992, the empirical fit to glass-tube data.
``pries-vivo``
    Pries, Secomb, Gessner, Sperandio, Gross & Gaehtgens 1994, the in-vivo
    law fitted to flow in rat mesentery networks.

Diameters are in metres and converted to micrometres inside, hematocrit is
the *discharge* hematocrit as a fraction, results are relative to plasma
unless the function name says ``_pa_s``.

Examples
--------
>>> import numpy as np
>>> d_m = np.array([5e-6, 10e-6, 100e-6])
>>> print(np.round(relative_viscosity("pries-vitro", d_m, 0.45), 3))
[1.471 1.328 2.443]
>>> print(np.round(relative_viscosity("pries-vivo", d_m, 0.45), 3))
[12.62   5.872  2.532]
"""

from __future__ import annotations

import warnings

import numpy as np

from .errors import NetworkSpecError, Problem

LAWS = ("constant", "pries-vitro", "pries-vivo")
"""File keys of the viscosity laws."""

RELATIVE_LAWS = ("pries-vitro", "pries-vivo")
"""The laws that give viscosity relative to plasma (all of :data:`LAWS` but ``constant``)."""

DIAMETER_RANGE_M = {"pries-vitro": (3.3e-6, 1978e-6), "pries-vivo": (3.5e-6, 1978e-6)}
"""Diameters (m) inside which each law is used as fitted.

In vitro: the tube data of Pries et al. 1992 span 3.3-1978 um (abstract).
In vivo: singular at 1.1 um, so used only above about 3.5 um; above about
40 um it approaches the in-vitro law, whose upper limit it inherits.
"""

HEMATOCRIT_FITTED_MAX = 0.9
"""Highest discharge hematocrit of the in-vitro database (Pries et al. 1992, abstract)."""

VIVO_SINGULAR_DIAMETER_M = 1.1e-6
"""The in-vivo law divides by D - 1.1 um; it is not evaluated at or below this."""

_REFERENCE_HEMATOCRIT = 0.45
_LARGE_DIAMETER_LIMIT = 3.2          # mu_0.45 for D -> infinity, both laws


def _input_error(item: str, message: str, fix: str) -> NetworkSpecError:
    return NetworkSpecError([Problem("", 0, 0, item, message, fix)])


def _first_bad(name: str, values: np.ndarray, bad: np.ndarray) -> tuple[str, str, int]:
    """Item naming up to five offending indices, the first bad value, the count."""
    flat = np.flatnonzero(bad)
    shown = ", ".join(str(i) for i in flat[:5]) + (", ..." if flat.size > 5 else "")
    return f"{name}[{shown}]", f"{values.ravel()[flat[0]]:g}", flat.size


def _check_law(law: str) -> None:
    if law == "constant":
        raise _input_error(
            f"viscosity law '{law}'",
            "gives no viscosity relative to plasma (it does not depend on diameter "
            "or hematocrit)",
            "use the blood viscosity given for the network directly, or choose "
            "'pries-vitro' or 'pries-vivo'")
    if law not in RELATIVE_LAWS:
        raise _input_error(f"viscosity law '{law}'", "unknown law",
                           f"choose one of {', '.join(LAWS)}")


def _check_diameter(law: str, diameter_m: np.ndarray) -> None:
    bad = ~np.isfinite(diameter_m) | (diameter_m <= 0)
    if bad.any():
        item, got, n = _first_bad("diameter_m", diameter_m, bad)
        raise _input_error(item, f"diameter must be finite and > 0 m, got {got} "
                                 f"({n} value(s))", "give positive diameters in metres")
    if law == "pries-vivo":
        bad = diameter_m <= VIVO_SINGULAR_DIAMETER_M
        if bad.any():
            item, got, n = _first_bad("diameter_m", diameter_m, bad)
            raise _input_error(item, f"the in-vivo law is singular at 1.1 um and meaningless "
                                     f"below, got {got} m ({n} value(s))",
                               "use diameters above about 3.5e-6 m, or another law")


def _check_fraction(name: str, values: np.ndarray, *, upper_open: bool) -> None:
    bad = ~np.isfinite(values) | (values < 0) | ((values >= 1) if upper_open else (values > 1))
    if bad.any():
        item, got, n = _first_bad(name, values, bad)
        interval = "[0, 1)" if upper_open else "[0, 1]"
        hint = " (a percentage? divide by 100)" if (values > 1).any() else ""
        raise _input_error(item, f"discharge hematocrit must be a fraction in {interval}, "
                                 f"got {got} ({n} value(s)){hint}",
                           "give hematocrit as a fraction, for example 0.45")


def _shape_exponent(d_um: np.ndarray) -> np.ndarray:
    """C(D) of Pries et al. 1992, D in um: about +1 below 6 um, -0.8 for large D."""
    f = 1.0 / (1.0 + 1e-11 * d_um**12)
    return (0.8 + np.exp(-0.075 * d_um)) * (f - 1.0) + f


def _hematocrit_ratio(d_um: np.ndarray, hematocrit: np.ndarray) -> np.ndarray:
    """((1 - HD)^C - 1) / ((1 - 0.45)^C - 1), with its limit where C = 0."""
    c = _shape_exponent(d_um)
    log_h = np.log1p(-hematocrit)
    log_ref = np.log1p(-_REFERENCE_HEMATOCRIT)
    tiny = np.abs(c) < 1e-12
    c_safe = np.where(tiny, 1.0, c)
    ratio = np.expm1(c_safe * log_h) / np.expm1(c_safe * log_ref)
    return np.where(tiny, log_h / log_ref, ratio)


def _mu045_vitro(d_um: np.ndarray) -> np.ndarray:
    return 220.0 * np.exp(-1.3 * d_um) + _LARGE_DIAMETER_LIMIT - 2.44 * np.exp(-0.06 * d_um**0.645)


def _mu045_vivo(d_um: np.ndarray) -> np.ndarray:
    return 6.0 * np.exp(-0.085 * d_um) + _LARGE_DIAMETER_LIMIT - 2.44 * np.exp(-0.06 * d_um**0.645)


def relative_viscosity(law: str, diameter_m, hematocrit) -> np.ndarray:
    """Apparent viscosity of blood relative to plasma, by diameter and hematocrit.

    Parameters
    ----------
    law : {'pries-vitro', 'pries-vivo'}
        The viscosity law (``constant`` has no relative form and is refused).
    diameter_m : array_like
        Vessel or tube diameter (m), > 0; above 1.1e-6 m for ``pries-vivo``.
    hematocrit : array_like
        Discharge hematocrit as a fraction in [0, 1), broadcast against
        `diameter_m`.

    Returns
    -------
    ndarray
        mu_app / mu_plasma, dimensionless, in the broadcast shape.

    Raises
    ------
    NetworkSpecError
        Unknown law or ``constant``; a diameter not finite or <= 0 (or at or
        below 1.1 um in vivo); a hematocrit not finite or outside [0, 1), which
        names a probable percentage.

    Notes
    -----
    With D in micrometres and HD the discharge hematocrit (Pries et al. 1992):

        mu_0.45(D) = 220 exp(-1.3 D) + 3.2 - 2.44 exp(-0.06 D^0.645)
        C(D) = (0.8 + exp(-0.075 D)) (-1 + 1/(1 + 1e-11 D^12)) + 1/(1 + 1e-11 D^12)
        mu_vitro = 1 + (mu_0.45 - 1) ((1 - HD)^C - 1) / ((1 - 0.45)^C - 1)

    and in vivo (Pries et al. 1994), with the same C(D):

        mu*_0.45(D) = 6 exp(-0.085 D) + 3.2 - 2.44 exp(-0.06 D^0.645)
        mu_vivo = [1 + (mu*_0.45 - 1) ((1 - HD)^C - 1) / ((1 - 0.45)^C - 1) (D/(D - 1.1))^2]
                  (D/(D - 1.1))^2

    By construction mu_rel = mu_0.45 at HD = 0.45 (in vitro), and mu_rel = 1
    at HD = 0 in vitro.  C(D) crosses zero near 8 um, where the hematocrit
    ratio has the limit ln(1 - HD) / ln(0.55); it is evaluated with
    ``expm1``/``log1p`` and that limit, so it stays accurate there.

    Inputs outside the fitted ranges are evaluated; :func:`out_of_range`
    gives masks for them, for warnings.

    References
    ----------
    A. R. Pries, D. Neuhaus, P. Gaehtgens, Am J Physiol 263(6 Pt 2) (1992)
    H1770-H1778 (in-vitro law).

    A. R. Pries, T. W. Secomb, T. Gessner, M. B. Sperandio, J. F. Gross,
    P. Gaehtgens, Circ Res 75 (1994) 904-915 (in-vivo law).

    The coefficients are as restated in the project's REFERENCES.md, partly
    from memory; check them against the papers.

    Examples
    --------
    >>> print(np.round(relative_viscosity("pries-vitro", 10e-6, [0.0, 0.3, 0.6]), 3))
    [1.   1.17 1.61]
    >>> print(round(float(relative_viscosity("pries-vivo", 10e-6, 0.45)), 2))
    5.87
    """
    _check_law(law)
    d_m, h = np.broadcast_arrays(np.asarray(diameter_m, dtype=float),
                                 np.asarray(hematocrit, dtype=float))
    _check_diameter(law, d_m)
    _check_fraction("hematocrit", h, upper_open=True)
    d_um = d_m * 1e6
    ratio = _hematocrit_ratio(d_um, h)
    if law == "pries-vitro":
        return np.asarray(1.0 + (_mu045_vitro(d_um) - 1.0) * ratio)
    wall = (d_um / (d_um - VIVO_SINGULAR_DIAMETER_M * 1e6)) ** 2
    return np.asarray((1.0 + (_mu045_vivo(d_um) - 1.0) * ratio * wall) * wall)


def apparent_viscosity_pa_s(law: str, diameter_m, hematocrit, *,
                            plasma_viscosity_pa_s) -> np.ndarray:
    """Apparent viscosity of blood (Pa*s): the relative viscosity times plasma's.

    Parameters
    ----------
    law : {'pries-vitro', 'pries-vivo'}
        The viscosity law; see :func:`relative_viscosity`.
    diameter_m : array_like
        Diameter (m).
    hematocrit : array_like
        Discharge hematocrit, fraction in [0, 1).
    plasma_viscosity_pa_s : float or array_like
        Plasma viscosity (Pa*s), finite and > 0; about 1.1-1.3e-3 at 37 degC.
        Not water's (0.69e-3 at 37 degC).

    Returns
    -------
    ndarray
        Apparent viscosity (Pa*s), broadcast shape.

    Raises
    ------
    NetworkSpecError
        As :func:`relative_viscosity`, or a plasma viscosity not finite or <= 0.

    Warns
    -----
    UserWarning
        Plasma viscosity outside 0.5-3 mPa*s (perhaps given in cP or mPa*s
        instead of Pa*s).

    Notes
    -----
    mu_app = mu_rel(D, HD) * mu_plasma.

    References
    ----------
    As :func:`relative_viscosity`.

    Examples
    --------
    >>> mu = apparent_viscosity_pa_s("pries-vitro", 0.01, 0.45, plasma_viscosity_pa_s=1.2e-3)
    >>> print(round(float(mu) * 1e3, 2))   # mPa*s; large-tube limit 3.2 * 1.2
    3.84
    """
    plasma = np.asarray(plasma_viscosity_pa_s, dtype=float)
    bad = ~np.isfinite(plasma) | (plasma <= 0)
    if bad.any():
        item, got, _ = _first_bad("plasma_viscosity_pa_s", plasma, bad)
        raise _input_error(item, f"plasma viscosity must be finite and > 0 Pa*s, got {got}",
                           "give it in Pa*s, for example 1.2e-3")
    if ((plasma < 0.5e-3) | (plasma > 3e-3)).any():
        warnings.warn(f"apparent_viscosity_pa_s: plasma viscosity {plasma.ravel()[0]:g} Pa*s "
                      "is outside 0.5-3 mPa*s (plasma is about 1.2 mPa*s at 37 degC); "
                      "check the unit", UserWarning, stacklevel=2)
    return np.asarray(relative_viscosity(law, diameter_m, hematocrit) * plasma)


def tube_hematocrit(diameter_m, discharge_hematocrit) -> np.ndarray:
    """Tube hematocrit HT from discharge hematocrit HD (Fåhræus effect).

    Parameters
    ----------
    diameter_m : array_like
        Diameter (m), finite and > 0.
    discharge_hematocrit : array_like
        HD, fraction in [0, 1], broadcast against `diameter_m`.

    Returns
    -------
    ndarray
        HT, fraction, broadcast shape.  HT < HD in microvessels (above about
        3 um); HT -> HD for large D.

    Raises
    ------
    NetworkSpecError
        A diameter not finite or <= 0; a hematocrit not finite or outside [0, 1].

    Notes
    -----
    With D in micrometres (Pries et al. 1990):

        HT / HD = HD + (1 - HD) (1 + 1.7 exp(-0.415 D) - 0.6 exp(-0.011 D))

    The viscosity and phase-separation laws take HD; HT is for comparing
    with intravital measurements or for red-cell volume.

    References
    ----------
    A. R. Pries, T. W. Secomb, P. Gaehtgens, J. F. Gross (authors from
    memory), Circ Res 67 (1990) 826-834.  Formula from memory; check it
    against the paper.

    Examples
    --------
    >>> print(np.round(tube_hematocrit([10e-6, 500e-6], 0.45) / 0.45, 3))
    [0.719 0.999]
    """
    d_m, h = np.broadcast_arrays(np.asarray(diameter_m, dtype=float),
                                 np.asarray(discharge_hematocrit, dtype=float))
    _check_diameter("tube", d_m)
    _check_fraction("discharge_hematocrit", h, upper_open=False)
    d_um = d_m * 1e6
    ratio = h + (1.0 - h) * (1.0 + 1.7 * np.exp(-0.415 * d_um) - 0.6 * np.exp(-0.011 * d_um))
    return np.asarray(h * ratio)


def out_of_range(law: str, diameter_m, hematocrit) -> dict[str, np.ndarray]:
    """Masks of inputs outside each viscosity law's valid or fitted range.

    Parameters
    ----------
    law : {'constant', 'pries-vitro', 'pries-vivo'}
        The viscosity law.
    diameter_m : array_like
        Diameter (m).
    hematocrit : array_like
        Discharge hematocrit, fraction; broadcast against `diameter_m`.

    Returns
    -------
    dict of str to ndarray of bool
        Always the same keys, each mask in the broadcast shape:

        ``diameter_invalid``
            not finite or <= 0, or at or below 1.1 um for ``pries-vivo``
            (:func:`relative_viscosity` raises on these);
        ``diameter_below``
            finite, > 0, but below the fitted range (3.3 um in vitro, 3.5 um
            in vivo); includes the invalid in-vivo diameters;
        ``diameter_above``
            above 1978 um (larger than any tube of the in-vitro database);
        ``hematocrit_invalid``
            not finite or outside [0, 1) (raises);
        ``hematocrit_percent``
            above 1, probably a percentage (a subset of ``hematocrit_invalid``);
        ``hematocrit_above``
            in (0.9, 1), above the fitted range.

        For ``constant`` only the hematocrit masks and ``diameter_invalid``
        (<= 0 or not finite) can be true.

    Raises
    ------
    NetworkSpecError
        Unknown law.

    Notes
    -----
    Ranges: Pries et al. 1992 abstract (tubes 3.3-1978 um, hematocrit up to
    0.9); the in-vivo law of Pries et al. 1994 has a pole at D = 1.1 um.

    Examples
    --------
    >>> masks = out_of_range("pries-vivo", [2e-6, 10e-6, 10e-6], [0.45, 0.45, 45.0])
    >>> print(masks["diameter_below"], masks["hematocrit_percent"])
    [ True False False] [False False  True]
    """
    if law not in LAWS:
        raise _input_error(f"viscosity law '{law}'", "unknown law",
                           f"choose one of {', '.join(LAWS)}")
    d_m, h = np.broadcast_arrays(np.asarray(diameter_m, dtype=float),
                                 np.asarray(hematocrit, dtype=float))
    finite_d = np.isfinite(d_m) & (d_m > 0)
    no = np.zeros(d_m.shape, dtype=bool)
    masks = {"diameter_invalid": ~finite_d, "diameter_below": no.copy(),
             "diameter_above": no.copy()}
    if law in DIAMETER_RANGE_M:
        low_m, high_m = DIAMETER_RANGE_M[law]
        masks["diameter_below"] = finite_d & (d_m < low_m)
        masks["diameter_above"] = finite_d & (d_m > high_m)
        if law == "pries-vivo":
            masks["diameter_invalid"] = ~finite_d | (d_m <= VIVO_SINGULAR_DIAMETER_M)
    finite_h = np.isfinite(h)
    masks["hematocrit_invalid"] = ~finite_h | (h < 0) | (h >= 1)
    masks["hematocrit_percent"] = finite_h & (h > 1)
    masks["hematocrit_above"] = finite_h & (h > HEMATOCRIT_FITTED_MAX) & (h < 1)
    return masks
