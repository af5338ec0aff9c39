"""Unit factors against pint, the general-purpose units library (outside reference)."""

import pint
import pytest

from vesselnet.errors import UnitError
from vesselnet.units import KINDS, from_si, to_si_value

REGISTRY = pint.UnitRegistry()

# Our canonical unit -> the same unit written for pint.  Trade names without a
# pint definition are spelled out: PRU = mmHg*s/mL, Wood unit = mmHg*min/L
# (REFERENCES conversions), bpm = 1/min.
PINT_NAME = {"dyn/cm2": "dyn/cm**2", "m3/s": "m**3/s", "um3/s": "um**3/s", "m3": "m**3",
             "kg/m3": "kg/m**3", "g/cm3": "g/cm**3", "Pa*s/m3": "Pa*s/m**3",
             "dyn*s/cm5": "dyn*s/cm**5", "PRU": "mmHg*s/mL", "WU": "mmHg*min/L",
             "m3/Pa": "m**3/Pa", "bpm": "1/min", "%": "percent", "": "dimensionless",
             "P": "poise"}

CASES = [(kind, unit) for kind, table in KINDS.items() for unit in table]


@pytest.mark.parametrize(("kind", "unit"), CASES, ids=[f"{k}:{u or '-'}" for k, u in CASES])
def test_factor_matches_pint(kind, unit):
    """Every factor of the table equals pint's conversion to SI base units."""
    expected = REGISTRY(PINT_NAME.get(unit, unit)).to_base_units().magnitude
    assert KINDS[kind][unit] == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize(("text", "kind", "si"), [
    ("95 mmHg", "pressure", 95 * 133.322387415),
    ("3.2 um", "radius", 3.2e-6),
    ("3.2 µm", "radius", 3.2e-6),
    ("5 L/min", "flow", 5e-3 / 60),
    ("1 mmHg·s/mL", "resistance", 133.322387415e6),
    ("2e-3 Pa*s", "viscosity", 2e-3),
    ("1060 kg/m^3", "density", 1060.0),
    ("70 bpm", "heart_rate", 70 / 60),
    ("45%", "fraction", 0.45),
    ("0.3 s", "time", 0.3),
])
def test_parse_strings(text, kind, si):
    assert to_si_value(text, kind) == pytest.approx(si, rel=1e-12)


@pytest.mark.parametrize(("value", "kind", "si"), [
    (95, "pressure", 95 * 133.322387415),    # SPEC section 1 defaults
    (3.0, "radius", 3e-3), (25, "length", 0.25), (300, "flow", 5e-6),
    (3.5, "viscosity", 3.5e-3), (0.8, "modulus", 8e5), (1, "volume", 1e-6),
])
def test_bare_numbers_use_spec_defaults(value, kind, si):
    assert to_si_value(value, kind) == pytest.approx(si, rel=1e-12)


@pytest.mark.parametrize(("text", "kind", "message"), [
    ("3 mmHg", "radius", "unit of pressure, not of radius"),
    ("3 furlong", "length", "unknown unit 'furlong'"),
    ("3 mmm", "radius", "did you mean 'mm'"),
    ("fast", "flow", "expected a number"),
    ("nan mmHg", "pressure", "expected a number"),
])
def test_bad_quantities(text, kind, message):
    with pytest.raises(UnitError, match=message):
        to_si_value(text, kind)


def test_round_trip_display():
    assert from_si(to_si_value("123.4 mL/min", "flow"), "flow", "mL/min") == pytest.approx(123.4)
