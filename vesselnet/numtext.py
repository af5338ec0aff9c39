"""Numbers to text a whole column at a time, for large tables.

Writing 10^6-row tables one Python ``format`` call per cell costs seconds;
here a float column becomes text with a handful of numpy operations and
gives, byte for byte, what ``repr(float(f"{x:.10g}"))`` gives for each
value: the shortest text that reads back as the value rounded to ten
significant digits (``0.3``, ``123.0``, ``1.5e-05``).

Examples
--------
>>> format_significant([0.1 + 0.2, 123.0, -1.5e-5, float("nan"), 0.0]).tolist()
['0.3', '123.0', '-1.5e-05', '', '0.0']
>>> join_rows([np.array(["a", "b"]), format_significant([1.0, 2.5])])
'a,1.0\\nb,2.5\\n'
"""

from __future__ import annotations

import numpy as np

_TIE_MARGIN = 1e-3
"""Scaled values this close to a rounding tie are formatted by Python itself."""

_ROWS_PER_CHUNK = 65536


def _python_text(x: float, digits: int) -> str:
    return repr(float(f"{x:.{digits}g}"))


def format_significant(values, digits: int = 10) -> np.ndarray:
    """Text of floats rounded to ``digits`` significant digits, as Python's ``repr`` writes them.

    Parameters
    ----------
    values : array_like of float, shape (n,)
    digits : int
        Significant digits kept (1 to 15).

    Returns
    -------
    ndarray of str, shape (n,)
        ``repr(float(f"{x:.{digits}g}"))`` of each value; NaN and
        infinities give ``''`` (the caller chooses how to write them).

    Notes
    -----
    With ``e = floor(log10|x|)`` the integer ``M = round(|x| 10^(digits-1-e))``
    holds the kept digits.  The float product is off by at most a few units
    in the last place, so ``M`` is exact unless the scaled value lies within
    ``1e-3`` of a rounding tie; those few values (about 0.2 %), and values
    beyond 1e+-290, are formatted by Python.  Trailing zeros are dropped and
    the digits laid out the way ``repr`` does: positional for
    ``-4 <= e < 16`` (at least one digit after the point), else
    ``d.ddde+XX``.
    """
    v = np.asarray(values, dtype=float).reshape(-1)
    n = len(v)
    out = np.zeros(n, dtype=f"U{digits + 10}")
    a = np.abs(v)
    zero = a == 0
    out[zero] = np.where(np.signbit(v[zero]), "-0.0", "0.0")
    fast = np.isfinite(a) & (a > 1e-290) & (a < 1e290)
    rows = np.flatnonzero(fast)
    a = a[rows]
    e = np.floor(np.log10(a)).astype(np.int64)
    scaled = a * 10.0 ** (digits - 1 - e)
    low = scaled < 10.0 ** (digits - 1)
    e[low] -= 1
    high = scaled >= 10.0 ** digits
    e[high] += 1
    fix = low | high
    scaled[fix] = a[fix] * 10.0 ** (digits - 1 - e[fix])
    frac = scaled - np.floor(scaled)
    tie = np.abs(frac - 0.5) < _TIE_MARGIN
    mantissa = np.rint(scaled).astype(np.int64)
    carry = mantissa >= 10 ** digits
    mantissa[carry] //= 10
    e[carry] += 1
    text = _layout(mantissa, e, digits)
    text = np.where(v[rows] < 0, np.strings.add("-", text), text)
    out[rows] = text
    slow = np.flatnonzero(np.isfinite(v) & ~fast & ~zero)
    slow = np.concatenate([slow, rows[tie]])
    for i in slow.tolist():
        out[i] = _python_text(float(v[i]), digits)
    return out


def _layout(mantissa: np.ndarray, e: np.ndarray, digits: int) -> np.ndarray:
    """Digits ``mantissa`` (exactly ``digits`` long) times 10^e, laid out as ``repr`` does."""
    n_digits = np.full(len(mantissa), digits, dtype=np.int64)
    for _ in range(digits - 1):
        zero = (mantissa % 10 == 0) & (n_digits > 1)
        mantissa = np.where(zero, mantissa // 10, mantissa)
        n_digits -= zero
    s = mantissa.astype(f"U{digits}")
    out = np.zeros(len(s), dtype=f"U{digits + 10}")
    plain = (e >= -4) & (e < 16)
    big = plain & (e >= 0)
    k = np.flatnonzero(big)
    if len(k):
        width = e[k] + 1
        whole = n_digits[k] <= width
        padded = np.strings.add(np.strings.ljust(s[k], width, "0"), ".0")
        split = np.strings.add(np.strings.add(np.strings.slice(s[k], 0, width), "."),
                               np.strings.slice(s[k], width, n_digits[k]))
        out[k] = np.where(whole, padded, split)
    k = np.flatnonzero(plain & ~big)
    if len(k):
        out[k] = np.strings.add("0.", np.strings.rjust(s[k], n_digits[k] - e[k] - 1, "0"))
    k = np.flatnonzero(~plain)
    if len(k):
        head = np.where(n_digits[k] > 1,
                        np.strings.add(np.strings.add(np.strings.slice(s[k], 0, 1), "."),
                                       np.strings.slice(s[k], 1, n_digits[k])),
                        s[k])
        power = np.strings.rjust(np.abs(e[k]).astype("U3"), 2, "0")
        power = np.strings.add(np.where(e[k] < 0, "e-", "e+"), power)
        out[k] = np.strings.add(head, power)
    return out


def join_rows(columns, sep: str = ",") -> str:
    """Rows of text columns joined by ``sep``, one line each, every line ending in a newline.

    Parameters
    ----------
    columns : sequence of ndarray of str, each shape (n,)

    Returns
    -------
    str
    """
    columns = [np.asarray(c, dtype=str) for c in columns]
    n = len(columns[0]) if columns else 0
    parts = []
    for start in range(0, n, _ROWS_PER_CHUNK):
        stop = min(start + _ROWS_PER_CHUNK, n)
        line = columns[0][start:stop]
        for c in columns[1:]:
            line = np.strings.add(np.strings.add(line, sep), c[start:stop])
        parts.append("\n".join(line.tolist()))
        parts.append("\n")
    return "".join(parts)
