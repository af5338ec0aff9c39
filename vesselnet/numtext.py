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
>>> join_rows([np.array(["a", "b"]), significant_bytes([1.0, 2.5])])
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

    Returns an array of ``str``; :func:`significant_bytes` gives the same as
    ASCII bytes, the faster form for :func:`join_rows`.  See there.
    """
    return significant_bytes(values, digits).astype(str)


def significant_bytes(values, digits: int = 10) -> np.ndarray:
    """ASCII text (``bytes`` array) of floats rounded to ``digits`` significant digits.

    Parameters
    ----------
    values : array_like of float, shape (n,)
    digits : int
        Significant digits kept (1 to 17; above 15 Python formats every value).

    Returns
    -------
    ndarray of bytes, shape (n,)
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
    out = np.zeros(n, dtype=f"S{max(digits + 10, 20)}")
    a = np.abs(v)
    zero = a == 0
    out[zero] = np.where(np.signbit(v[zero]), b"-0.0", b"0.0")
    fast = np.isfinite(a) & (a > 1e-290) & (a < 1e290) & (digits <= 15)
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
    out[rows] = _layout(mantissa, e, v[rows] < 0, digits)
    slow = np.flatnonzero(np.isfinite(v) & ~fast & ~zero)
    slow = np.concatenate([slow, rows[tie]])
    for i in slow.tolist():
        out[i] = _python_text(float(v[i]), digits).encode()
    return out


_TABLE: list[np.ndarray] = []
_CHARS = b".0e-+"
_DOT, _ZERO, _E, _MINUS, _PLUS, _EXP, _NUL = 0, 1, 2, 3, 4, 5, 8
"""Character sources after the digits: '.', '0', 'e', '-', '+', 3 exponent digits, empty."""


def _digit_chars(m: np.ndarray, digits: int) -> np.ndarray:
    """ASCII digits of non-negative integers below 10^digits, zero-padded, shape (n, digits)."""
    if not _TABLE:
        k = np.arange(100000)
        _TABLE.append(np.stack([(k // 10 ** p) % 10 + 48 for p in range(4, -1, -1)],
                               axis=1).astype(np.uint8))
    chunks = []
    m = m.astype(float)                       # exact below 2^53; float division is quicker
    for _ in range(-(-digits // 5)):
        high = np.floor(m / 100000.0)
        chunks.append(_TABLE[0][(m - high * 100000.0).astype(np.int32)])
        m = high
    return np.concatenate(chunks[::-1], axis=1)[:, -digits:]


def _template(e: int, n_digits: int, negative: bool, digits: int, width: int) -> list[int]:
    """Where each output character comes from, for one exponent, digit count and sign.

    Sources: 0 .. digits-1 the digits, then (offset by ``digits``) '.', '0',
    'e', '-', '+', three exponent digits and the empty byte (``repr``
    layout: positional for -4 <= e < 16, else d.ddde+XX).
    """
    dot, zero, e_char, minus, plus, exp, nul = (digits + k for k in (_DOT, _ZERO, _E, _MINUS,
                                                                   _PLUS, _EXP, _NUL))
    out = [minus] if negative else []
    digit = list(range(n_digits))
    if -4 <= e < 16:
        if e >= 0:
            whole = e + 1
            out += digit[:whole] + [zero] * max(0, whole - n_digits) + [dot]
            out += digit[whole:] or [zero]
        else:
            out += [zero, dot] + [zero] * (-e - 1) + digit
    else:
        out += digit[:1] + ([dot] + digit[1:] if n_digits > 1 else [])
        out += [e_char, minus if e < 0 else plus]
        out += [exp, exp + 1, exp + 2] if abs(e) >= 100 else [exp + 1, exp + 2]
    return out + [nul] * (width - len(out))


def _layout(mantissa: np.ndarray, e: np.ndarray, negative: np.ndarray, digits: int) -> np.ndarray:
    """Text of ``mantissa`` (``digits`` digits) x 10^(e - digits + 1), laid out as ``repr`` does.

    Values sharing exponent, significant-digit count and sign share one
    template of character sources; each group is one gather.
    """
    n = len(mantissa)
    width = max(digits + 10, 20)
    if not n:
        return np.zeros(0, dtype=f"S{width}")
    chars = np.zeros((n, digits + _NUL + 1), dtype=np.uint8)
    chars[:, :digits] = _digit_chars(mantissa, digits)
    chars[:, digits + _DOT:digits + _EXP] = np.frombuffer(_CHARS, dtype=np.uint8)
    magnitude = np.abs(e)
    chars[:, digits + _EXP] = magnitude // 100 + 48
    chars[:, digits + _EXP + 1] = magnitude // 10 % 10 + 48
    chars[:, digits + _EXP + 2] = magnitude % 10 + 48
    significant = chars[:, :digits] != 48
    n_digits = digits - np.argmax(significant[:, ::-1], axis=1)
    key = ((e + 400) * (digits + 1) + n_digits) * 2 + negative
    key = key.astype(np.uint16 if key.max(initial=0) < 2 ** 16 else np.int64)  # radix sort
    order = np.argsort(key, kind="stable")
    sorted_key = key[order]
    bounds = np.append(np.flatnonzero(np.concatenate([[True], sorted_key[1:] != sorted_key[:-1]])),
                       n)
    chars = chars[order]
    grouped = np.zeros((n, width), dtype=np.uint8)
    for lo, hi in zip(bounds[:-1].tolist(), bounds[1:].tolist()):
        k = int(sorted_key[lo])
        sign, k = k % 2, k // 2
        nd, exponent = k % (digits + 1), k // (digits + 1) - 400
        grouped[lo:hi] = chars[lo:hi, _template(exponent, nd, bool(sign), digits, width)]
    out = np.empty_like(grouped)
    out[order] = grouped
    return out.view(f"S{width}").reshape(-1)


def join_rows(columns, sep: str = ",", *, encoded: bool = False) -> str | bytes:
    """Rows of text columns joined by ``sep``, one line each, every line ending in a newline.

    Parameters
    ----------
    columns : sequence of ndarray of str or bytes (UTF-8), or lists of str, each of length n

    encoded : bool
        Return the UTF-8 bytes instead of text.

    Returns
    -------
    str or bytes

    Notes
    -----
    The cells of a block of rows are laid side by side as fixed-width bytes
    (padded with zero bytes), with the separators and newlines as columns of
    their own; dropping the zero bytes leaves the text.  Cells never contain
    a zero byte (text with one is written through Python instead).
    """
    columns = [_narrow(as_bytes(c)) for c in columns]
    n = len(columns[0]) if columns else 0
    separator = np.frombuffer(sep.encode(), dtype=np.uint8)
    newline = np.frombuffer(b"\n", dtype=np.uint8)
    parts = []
    for start in range(0, n, _ROWS_PER_CHUNK):
        stop = min(start + _ROWS_PER_CHUNK, n)
        pieces = []
        for k, c in enumerate(columns):
            block = c[start:stop]
            width = block.dtype.itemsize
            pieces.append(np.ascontiguousarray(block).view(np.uint8).reshape(stop - start, width))
            mark = separator if k < len(columns) - 1 else newline
            pieces.append(np.broadcast_to(mark, (stop - start, len(mark))))
        flat = np.concatenate(pieces, axis=1).reshape(-1)
        parts.append(flat[flat != 0].tobytes())
    out = b"".join(parts)
    return out if encoded else out.decode("utf-8")


def _narrow(column: np.ndarray) -> np.ndarray:
    """The column at the width of its longest cell (less to copy when joining)."""
    if not len(column):
        return column
    width = int(np.strings.str_len(column).max())
    return column if width >= column.dtype.itemsize else column.astype(f"S{max(width, 1)}")


def ascii_bytes(text: np.ndarray) -> np.ndarray | None:
    """A numpy text (``U``) array as bytes (``S``) when every character is ASCII, else None.

    Code point by code point into single bytes: tens of times faster than
    ``astype(bytes)``, which encodes item by item.

    >>> ascii_bytes(np.array(["a", "bc"])).tolist(), ascii_bytes(np.array(["é"]))
    ([b'a', b'bc'], None)
    """
    width = max(text.dtype.itemsize // 4, 1)
    if not len(text):
        return np.zeros(0, dtype=f"S{width}")
    points = np.ascontiguousarray(text).view("<u4").reshape(len(text), -1)
    if (points > 127).any():
        return None
    return points.astype(np.uint8).view(f"S{width}").reshape(len(text))


def ascii_text(raw: np.ndarray) -> np.ndarray:
    """A bytes (``S``) array as numpy text (``U``), read-only; the inverse of :func:`ascii_bytes`.

    ASCII goes byte by byte into code points; any other byte sends the array
    through UTF-8 decoding (invalid sequences become U+FFFD, never an error).

    >>> ascii_text(np.array([b"a", b"bc"])).tolist(), ascii_text(np.array(["é".encode()])).tolist()
    (['a', 'bc'], ['é'])
    """
    width = max(raw.dtype.itemsize, 1)
    octets = np.ascontiguousarray(raw).view(np.uint8).reshape(len(raw), raw.dtype.itemsize)
    if (octets > 127).any():
        out = np.char.decode(raw, "utf-8", "replace")
        out.flags.writeable = False
        return out
    wide = np.zeros((len(raw), width), dtype="<u4")
    wide[:, :octets.shape[1]] = octets
    out = wide.view(f"<U{width}").reshape(len(raw))
    out.flags.writeable = False
    return out


def compact_text(text: np.ndarray) -> np.ndarray:
    """ASCII text as bytes (a quarter of the size of numpy's UCS-4 text), other text unchanged."""
    narrow = ascii_bytes(text) if text.dtype.kind == "U" else None
    return text if narrow is None else narrow


def as_bytes(column) -> np.ndarray:
    """A text column (array or list of str, or bytes array) as a bytes array (UTF-8).

    >>> as_bytes(["a", "é"]).tolist()
    [b'a', b'\\xc3\\xa9']
    """
    if isinstance(column, np.ndarray) and column.dtype.kind == "S":
        return column
    if isinstance(column, np.ndarray) and column.dtype.kind == "U":
        narrow = ascii_bytes(column)
        if narrow is not None:
            return narrow
    items = column.tolist() if isinstance(column, np.ndarray) else list(column)
    if not items:
        return np.zeros(0, dtype="S1")
    try:
        joined = "\n".join(items)
    except TypeError:
        items = list(map(str, items))
        joined = "\n".join(items)
    if "\x00" in joined:
        raise ValueError("join_rows: a text cell holds a zero byte; write it through the csv module")
    if joined.count("\n") == len(items) - 1:
        return np.array(joined.encode("utf-8").split(b"\n"), dtype="S")
    return np.array([x.encode("utf-8") for x in items], dtype="S")
