"""Reading typed, located fields out of parsed YAML, collecting problems.

One :class:`FieldReader` serves every file kind (network, scenario, plan):
it converts quantities to SI with the file's default units, checks ranges,
refuses unknown keys with a near-miss suggestion, and records every problem
with its ``file:line:col`` instead of stopping at the first.

Examples
--------
>>> from vesselnet.yamlread import load_text
>>> doc = load_text("v: {length: 10, radius: 0, colour: red}", "x.yaml")
>>> fr = FieldReader("x.yaml")
>>> fr.allow(doc["v"], ("length", "radius"), "v")
>>> fr.quantity(doc["v"], "length", "length", "v")
0.1
>>> _ = fr.quantity(doc["v"], "radius", "radius", "v", positive=True)
>>> for p in fr.problems: print(p)
x.yaml:1:28 v: unknown key 'colour'; allowed keys: length, radius
x.yaml:1:25 v: radius must be > 0, got 0 mm
"""

from __future__ import annotations

import difflib
import reprlib
from collections.abc import Iterable

from .errors import NetworkSpecError, Problem, UnitError
from .units import DEFAULT_UNITS, to_si_value

MISSING = object()


def has_control(text: str) -> bool:
    """True when ``text`` holds a control character (a line break, a tab, an escape).

    >>> has_control("sfa left"), has_control("sfa\\n")
    (False, True)
    """
    return not text.isprintable() and any(c in _CONTROL for c in text)


_CONTROL = frozenset(chr(c) for c in (*range(32), *range(127, 160)))


def near_miss(word: str, choices: Iterable[str]) -> str:
    """A 'did you mean' hint for ``word`` among ``choices``, or ''.

    >>> near_miss("raduis", ["radius", "length"])
    "did you mean 'radius'?"
    """
    close = difflib.get_close_matches(str(word), [str(c) for c in choices], n=1, cutoff=0.6)
    return f"did you mean '{close[0]}'?" if close else ""


class FieldReader:
    """Collects located problems while reading fields of one file.

    Parameters
    ----------
    file : str
        File name for messages.
    units : dict, optional
        Default unit per kind (SPEC section 1), after the file's ``units:``.
    """

    def __init__(self, file: str, units: dict[str, str] | None = None):
        self.file = file
        self.units = dict(DEFAULT_UNITS, **(units or {}))
        self.problems: list[Problem] = []

    def add(self, where: tuple[int, int], item: str, message: str, fix: str = "") -> None:
        """Record one problem at ``where`` = (line, column)."""
        self.problems.append(Problem(self.file, where[0], where[1], item, message, fix))

    def raise_if_any(self) -> None:
        """Raise :class:`NetworkSpecError` with every problem so far, if any."""
        if self.problems:
            raise NetworkSpecError(self.problems)

    def allow(self, mapping, keys: Iterable[str], item: str) -> None:
        """Record a problem for each key of ``mapping`` not in ``keys``."""
        keys = tuple(keys)
        for key in mapping:
            if key not in keys:
                hint = near_miss(key, keys) or "allowed keys: " + ", ".join(keys)
                self.add(mapping.key_where(key), item, f"unknown key '{key}'", hint)

    def where(self, mapping, key) -> tuple[int, int]:
        """(line, column) of ``mapping[key]``, or of the mapping when absent."""
        return mapping.where(key) if hasattr(mapping, "where") else (0, 0)

    def mapping(self, container, key, item: str, *, required: bool = False):
        """``container[key]`` when it is a mapping; None (and a problem if wrong) otherwise."""
        value = container.get(key, MISSING) if isinstance(container, dict) else MISSING
        if value is MISSING or value is None:
            if required:
                self.add(self.where(container, key), item, f"missing key '{key}'")
            return None
        if not isinstance(value, dict):
            self.add(self.where(container, key), item,
                     f"'{key}' must be a mapping of keys to values, got {_show(value)}")
            return None
        return value

    def sequence(self, container, key, item: str, *, required: bool = False):
        """``container[key]`` when it is a list; None (and a problem if wrong) otherwise."""
        value = container.get(key, MISSING)
        if value is MISSING or value is None:
            if required:
                self.add(self.where(container, key), item, f"missing key '{key}'")
            return None
        if not isinstance(value, list):
            self.add(self.where(container, key), item,
                     f"'{key}' must be a list (items starting with '-'), got {_show(value)}")
            return None
        return value

    def text(self, mapping, key, item: str, *, required: bool = False, default=None):
        """A string field (ids, names); numbers are accepted as their text."""
        value = mapping.get(key, MISSING)
        if value is MISSING or value is None:
            if required:
                self.add(self.where(mapping, key), item, f"missing key '{key}'")
            return default
        if isinstance(value, bool) or not isinstance(value, (str, int, float)):
            self.add(self.where(mapping, key), item, f"'{key}' must be a name, got {_show(value)}")
            return default
        text = str(value).strip()
        if not text:
            self.add(self.where(mapping, key), item, f"'{key}' must not be empty")
            return default
        if has_control(text):
            self.add(self.where(mapping, key), item, f"'{key}' must not contain control "
                     f"characters (line breaks, tabs, escapes), got {reprlib.repr(text)}")
            return default
        return text

    def flag(self, mapping, key, item: str, default: bool = False) -> bool:
        """A true/false field."""
        value = mapping.get(key, default)
        if not isinstance(value, bool):
            self.add(self.where(mapping, key), item, f"'{key}' must be true or false, got {_show(value)}")
            return default
        return value

    def quantity(self, mapping, key, kind: str, item: str, *, required: bool = False,
                 default=float("nan"), positive: bool = False, nonnegative: bool = False,
                 between: tuple[float, float] | None = None, below_one: bool = False) -> float:
        """A quantity field converted to SI; ``default`` when absent and not required.

        ``positive``/``nonnegative`` check the sign; ``between`` a closed
        range; ``below_one`` a fraction in [0, 1).
        """
        value = mapping.get(key, MISSING) if isinstance(mapping, dict) else MISSING
        if value is MISSING or value is None:
            if required:
                unit = self.units.get(kind, "")
                example = f" (a number in {unit}, or a string like \"3 {unit}\")" if unit else ""
                self.add(self.where(mapping, key), item, f"missing key '{key}'",
                         f"add '{key}:'{example}")
            return default
        where = self.where(mapping, key)
        try:
            si = to_si_value(value, kind, self.units.get(kind))
        except UnitError as exc:
            self.add(where, item, f"{key}: {exc}")
            return default
        shown = value if isinstance(value, str) else f"{value} {self.units.get(kind, '')}".strip()
        if positive and not si > 0:
            self.add(where, item, f"{key} must be > 0, got {shown}")
            return default
        if nonnegative and not si >= 0:
            self.add(where, item, f"{key} must be >= 0, got {shown}")
            return default
        if between is not None and not between[0] <= si <= between[1]:
            hint = _fraction_hint(kind, value)
            self.add(where, item, f"{key} must be between {between[0]:g} and {between[1]:g},"
                     f" got {shown}", hint)
            return default
        if below_one and not 0 <= si < 1:
            self.add(where, item, f"{key} must be at least 0 and below 1, got {shown}",
                     _fraction_hint(kind, value))
            return default
        return si

    def integer(self, mapping, key, item: str, *, required: bool = False, default=None):
        """A whole-number field."""
        value = mapping.get(key, MISSING)
        if value is MISSING:
            if required:
                self.add(self.where(mapping, key), item, f"missing key '{key}'")
            return default
        if isinstance(value, bool) or not isinstance(value, int):
            self.add(self.where(mapping, key), item, f"'{key}' must be a whole number, got {_show(value)}")
            return default
        return value


def _fraction_hint(kind: str, value) -> str:
    if kind == "fraction" and isinstance(value, (int, float)) and 1 < value <= 100:
        return f"write {value}% or {value / 100:g}"
    return ""


def _show(value) -> str:
    if isinstance(value, dict):
        return "a mapping"
    if isinstance(value, list):
        return "a list"
    if value is None:
        return "nothing"
    return reprlib.repr(value)
