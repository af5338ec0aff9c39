"""Quantities with units: one table of factors, one parser.

Every quantity in a file is a bare number in the file's default unit for its
kind, or a string ``"<number> <unit>"``.  Values are converted to SI once, on
reading, and back to display units once, on writing.

Examples
--------
>>> to_si_value("3.5 cP", "viscosity")
0.0035
>>> round(to_si_value(95, "pressure"), 3)       # bare number: default mmHg
12665.627
>>> to_si_value("45%", "fraction")
0.45
>>> round(from_si(1e-6, "flow", "mL/min"), 6)
60.0
"""

from __future__ import annotations

import difflib
import functools
import math
import re
import reprlib

from .errors import UnitError

MMHG_PA = 133.322387415
"""One conventional millimetre of mercury in pascal (common practice; pint agrees)."""

_LENGTH = {"m": 1.0, "cm": 1e-2, "mm": 1e-3, "um": 1e-6, "nm": 1e-9}
_PRESSURE = {"Pa": 1.0, "kPa": 1e3, "MPa": 1e6, "mmHg": MMHG_PA, "cmH2O": 98.0665,
             "dyn/cm2": 0.1}
_FLOW = {"m3/s": 1.0, "mL/s": 1e-6, "mL/min": 1e-6 / 60, "L/min": 1e-3 / 60,
         "L/s": 1e-3, "uL/min": 1e-9 / 60, "uL/s": 1e-9, "nL/min": 1e-12 / 60,
         "nL/s": 1e-12, "um3/s": 1e-18}
_VOLUME = {"m3": 1.0, "L": 1e-3, "mL": 1e-6, "uL": 1e-9, "nL": 1e-12}

KINDS: dict[str, dict[str, float]] = {
    "length": _LENGTH,
    "pressure": _PRESSURE,
    "flow": _FLOW,
    "viscosity": {"Pa*s": 1.0, "mPa*s": 1e-3, "cP": 1e-3, "P": 0.1},
    "density": {"kg/m3": 1.0, "g/cm3": 1e3, "g/mL": 1e3},
    "modulus": {"Pa": 1.0, "kPa": 1e3, "MPa": 1e6, "GPa": 1e9, "dyn/cm2": 0.1},
    "resistance": {"Pa*s/m3": 1.0, "mmHg*s/mL": MMHG_PA / 1e-6,
                   "mmHg*min/L": MMHG_PA / (1e-3 / 60), "dyn*s/cm5": 1e5,
                   "PRU": MMHG_PA / 1e-6, "WU": MMHG_PA / (1e-3 / 60)},
    "volume": _VOLUME,
    "compliance": {"m3/Pa": 1.0, "mL/mmHg": 1e-6 / MMHG_PA, "uL/mmHg": 1e-9 / MMHG_PA,
                   "L/mmHg": 1e-3 / MMHG_PA},
    "time": {"s": 1.0, "ms": 1e-3, "min": 60.0},
    "heart_rate": {"Hz": 1.0, "bpm": 1 / 60, "1/min": 1 / 60, "1/s": 1.0},
    "fraction": {"": 1.0, "%": 1e-2},
    "wss": {"Pa": 1.0, "dyn/cm2": 0.1},
    "velocity": {"m/s": 1.0, "cm/s": 1e-2, "mm/s": 1e-3, "um/s": 1e-6},
    "stress": {"Pa": 1.0, "kPa": 1e3, "MPa": 1e6, "mmHg": MMHG_PA},
    "frequency": {"Hz": 1.0},
    "dimensionless": {"": 1.0},
}
"""Kind -> unit -> factor to SI.  Units are written in canonical form here
(no ``^``, ``u`` for micro); :func:`canonical_unit` maps what users type."""

DEFAULT_UNITS: dict[str, str] = {
    "length": "cm", "radius": "mm", "pressure": "mmHg", "flow": "mL/min",
    "viscosity": "cP", "density": "kg/m3", "modulus": "MPa",
    "resistance": "mmHg*s/mL", "volume": "mL", "compliance": "mL/mmHg",
    "time": "s", "heart_rate": "bpm",
}
"""File defaults (SPEC section 1).  ``radius`` is a length kind with its own
default, used for radius, diameter and wall thickness."""

DISPLAY_UNITS: dict[str, str] = {
    "pressure": "mmHg", "flow": "mL/min", "wss": "Pa", "length": "cm",
    "radius": "mm", "velocity": "m/s", "resistance": "mmHg*s/mL",
    "viscosity": "cP", "volume": "mL", "stress": "kPa", "compliance": "mL/mmHg",
}
"""Units of written results (SPEC section 5), keyed like the JSON ``units`` map."""

_ALIASES = {"ml": "mL", "l": "L", "ul": "uL", "nl": "nL", "cp": "cP", "mmhg": "mmHg",
            "cmh2o": "cmH2O", "pa": "Pa", "kpa": "kPa", "dynes": "dyn"}
_NUMBER = re.compile(r"\s*([-+]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")
_PREFIX_FREE = {"radius": "length"}


def base_kind(kind: str) -> str:
    """The table kind behind a file kind (``radius`` reads as a length).

    >>> base_kind("radius")
    'length'
    """
    return _PREFIX_FREE.get(kind, kind)


@functools.lru_cache(maxsize=512)
def canonical_unit(unit: str) -> str:
    """Normalise a unit as typed: micro signs, ``^``, ``·``, spaces, common case slips.

    >>> canonical_unit("mmHg·s/mL"), canonical_unit("µm"), canonical_unit("m^3/s")
    ('mmHg*s/mL', 'um', 'm3/s')
    >>> canonical_unit("ml/min")
    'mL/min'
    """
    u = unit.strip().replace("µ", "u").replace("μ", "u").replace("^", "")
    u = u.replace("·", "*").replace("⋅", "*").replace("×", "*")
    u = re.sub(r"\s*([*/])\s*", r"\1", u)
    u = re.sub(r"\s+", "*", u)
    parts = re.split(r"([*/])", u)
    return "".join(_ALIASES.get(p.lower(), p) for p in parts)


def factor(unit: str, kind: str) -> float:
    """Factor that converts a value in ``unit`` of ``kind`` to SI.

    Raises
    ------
    UnitError
        The unit is unknown, or belongs to another kind.

    >>> factor("mm", "radius")
    0.001
    """
    table = KINDS[base_kind(kind)]
    canon = canonical_unit(unit)
    if canon in table:
        return table[canon]
    raise UnitError(_unknown_unit_message(unit, canon, kind))


def _unknown_unit_message(unit: str, canon: str, kind: str) -> str:
    label = kind.replace("_", " ")
    table = KINDS[base_kind(kind)]
    known = ", ".join(k for k in table if k) or "none (a bare number)"
    for other, other_table in KINDS.items():
        if canon in other_table and canon:
            return (f"'{unit}' is a unit of {other.replace('_', ' ')}, not of {label};"
                    f" use one of {known}")
    close = difflib.get_close_matches(canon, [k for k in table if k], n=1, cutoff=0.5)
    hint = f"; did you mean '{close[0]}'?" if close else f"; use one of {known}"
    return f"unknown unit '{unit}' for a {label}{hint}"


def to_si_value(value: object, kind: str, default_unit: str | None = None) -> float:
    """Read one quantity (number or ``"<number> <unit>"``) into SI.

    Parameters
    ----------
    value : int, float or str
        A bare number is in ``default_unit`` (the SPEC default of ``kind`` when None).
    kind : str
        A key of :data:`KINDS`, or ``radius``.

    Returns
    -------
    float
        The value in SI.

    Raises
    ------
    UnitError
        Not a number, not finite, an unknown unit or a unit of another kind.

    >>> to_si_value("1e-3 m", "length")
    0.001
    """
    if isinstance(value, bool):
        raise UnitError(f"expected a number, got {value!r}")
    if isinstance(value, (int, float)):
        number, unit = float(value) if abs(value) < 1e308 else math.inf, None
    elif isinstance(value, str):
        match = _NUMBER.fullmatch(value)
        if not match:
            raise UnitError(f"expected a number with an optional unit, got {reprlib.repr(value)}")
        number, unit = float(match.group(1)), match.group(2)
    else:
        raise UnitError(f"expected a number, got {type(value).__name__} {reprlib.repr(value)}")
    if not math.isfinite(number):
        raise UnitError(f"expected a finite number, got {reprlib.repr(value)}")
    if not unit:
        if kind == "fraction":
            return number
        unit = default_unit or DEFAULT_UNITS[kind]
    si = number * factor(unit, kind)
    if not math.isfinite(si):
        raise UnitError(f"{reprlib.repr(value)} is too large to represent in SI units")
    return si


def from_si(value, kind: str, unit: str):
    """Convert an SI value or numpy array to ``unit``.

    >>> round(from_si(133.322387415, "pressure", "mmHg"), 9)
    1.0
    """
    return value / factor(unit, kind)
