"""Safe YAML reading that keeps the line and column of every value.

The text is composed into PyYAML's node tree (with the C parser when
present), then constructed here into plain dicts, lists and scalars.  Each
mapping and sequence remembers where its items stand, so every later error
can say ``file:line:col``.

Differences from ``yaml.safe_load``, all on purpose:

* scalars follow the YAML 1.2 core schema: ``1e-3`` is a number, ``yes`` and
  ``on`` are strings, only ``true``/``false`` are booleans;
* a duplicate key is an error (PyYAML keeps the last silently);
* tags other than the standard ones are refused, so nothing is constructed
  from a tag;
* alias expansion, nesting depth and file size are bounded, so an alias
  bomb or a deeply nested document is refused quickly instead of
  exhausting memory or the stack;
* the garbage collector is paused while composing and constructing (it
  makes large loads superlinear).

Examples
--------
>>> doc = load_text("a: 1e-3\\nb: [x, 2]\\n", "demo.yaml")
>>> doc["a"], doc["b"]
(0.001, ['x', 2])
>>> doc.where("b"), doc["b"].where(1)
((2, 4), (2, 8))
"""

from __future__ import annotations

import gc
import re

import yaml

from .errors import NetworkSpecError, Problem

MAX_BYTES = 64 * 1024 * 1024
"""Largest YAML text accepted; bigger networks belong in tables."""

MAX_ITEMS = 10_000_000
"""Largest number of values a document may expand to through aliases
(alias-bomb guard; aliased parts are shared, never copied)."""

MAX_DEPTH = 100
"""Deepest nesting of mappings and lists accepted (network files need about six
levels; PyYAML's composer recurses, and overflows the C stack near 10^5)."""

MAX_INT_DIGITS = 300
"""Longer integers are read as floats (Python refuses to convert integer text
beyond 4300 digits, and floats end near 1e308)."""

_Loader = getattr(yaml, "CSafeLoader", yaml.SafeLoader)
_OPEN = (yaml.MappingStartEvent, yaml.SequenceStartEvent)
_CLOSE = (yaml.MappingEndEvent, yaml.SequenceEndEvent)
_INT = re.compile(r"[-+]?[0-9]+")
_FLOAT = re.compile(r"[-+]?(\.[0-9]+|[0-9]+(\.[0-9]*)?)([eE][-+]?[0-9]+)?")
_SPECIAL_FLOAT = {".inf": float("inf"), "+.inf": float("inf"), "-.inf": float("-inf"),
                  ".nan": float("nan"), ".Inf": float("inf"), "-.Inf": float("-inf"),
                  ".NaN": float("nan")}
_STANDARD = "tag:yaml.org,2002:"
_PLAIN_TAGS = {_STANDARD + t for t in ("str", "int", "float", "bool", "null")}


class LocatedDict(dict):
    """A dict that knows where it and each of its values stand in the file."""

    __slots__ = ("file", "line", "column", "_where", "_key_where")

    def where(self, key) -> tuple[int, int]:
        """(line, column) of the value under ``key``, 1-based."""
        return self._where.get(key, (self.line, self.column))

    def key_where(self, key) -> tuple[int, int]:
        """(line, column) of ``key`` itself, 1-based."""
        return self._key_where.get(key, (self.line, self.column))


class LocatedList(list):
    """A list that knows where it and each of its items stand in the file."""

    __slots__ = ("file", "line", "column", "_where")

    def where(self, index: int) -> tuple[int, int]:
        """(line, column) of item ``index``, 1-based."""
        return self._where[index] if 0 <= index < len(self._where) else (self.line, self.column)


def _mark(node) -> tuple[int, int]:
    return node.start_mark.line + 1, node.start_mark.column + 1


class _Builder:
    """Constructs the node tree; a node reached again through an alias is
    shared, not copied, and the size it would expand to is counted."""

    def __init__(self, file: str):
        self.file = file
        self.problems: list[Problem] = []
        self.memo: dict[int, tuple[object, int, int]] = {}
        self.active: set[int] = set()

    def problem(self, node, message: str, fix: str = "") -> None:
        line, col = _mark(node)
        self.problems.append(Problem(self.file, line, col, "", message, fix))

    def build(self, node) -> tuple[object, int, int]:
        """Return (value, number of values it expands to, nesting depth)."""
        if isinstance(node, yaml.ScalarNode):
            return self.scalar(node), 1, 0
        known = self.memo.get(id(node))
        if known is not None:
            return known
        if id(node) in self.active:
            self.problem(node, "an alias refers to a mapping or list that contains it",
                         "write the value out instead of the alias")
            return None, 1, 0
        self.active.add(id(node))
        if isinstance(node, yaml.SequenceNode):
            self.check_tag(node, "seq")
            out, size, depth = LocatedList(), 1, 0
            for item in node.value:
                value, n, d = self.build(item)
                out.append(value)
                size += n
                depth = max(depth, d)
            out.file, (out.line, out.column) = self.file, _mark(node)
            out._where = [_mark(item) for item in node.value]
        else:
            out, size, depth = self.mapping(node)
        depth += 1
        self.active.discard(id(node))
        if size > MAX_ITEMS:
            raise NetworkSpecError([Problem(
                self.file, *_mark(node), "",
                f"aliases expand this document to more than {MAX_ITEMS:,} values",
                "remove the nested aliases, or give large networks as tables")])
        if depth > MAX_DEPTH:
            raise NetworkSpecError([Problem(
                self.file, *_mark(node), "",
                f"aliases nest mappings and lists more than {MAX_DEPTH} levels deep",
                "remove the nested aliases")])
        self.memo[id(node)] = (out, size, depth)
        return out, size, depth

    def mapping(self, node) -> tuple[LocatedDict, int, int]:
        self.check_tag(node, "map")
        out, size, depth = LocatedDict(), 1, 0
        out.file, (out.line, out.column) = self.file, _mark(node)
        out._where, out._key_where = {}, {}
        for key_node, value_node in node.value:
            if key_node.tag == _STANDARD + "merge":
                self.problem(key_node, "merge keys ('<<') are not supported",
                             "write the keys out")
                continue
            if not isinstance(key_node, yaml.ScalarNode):
                self.problem(key_node, "a mapping key must be a plain value")
                continue
            key = self.scalar(key_node)
            if key in out:
                first = out._key_where[key][0]
                self.problem(key_node, f"duplicate key '{key}' (first given on line {first})",
                             "keep one of them")
                continue
            out[key], n, d = self.build(value_node)
            size += n
            depth = max(depth, d)
            out._where[key] = _mark(value_node)
            out._key_where[key] = _mark(key_node)
        return out, size, depth

    def check_tag(self, node, kind: str) -> None:
        if node.tag != _STANDARD + kind:
            self.problem(node, f"tag '{node.tag}' is not allowed", "remove the tag")

    def scalar(self, node):
        text = node.value
        if node.tag not in _PLAIN_TAGS:
            self.problem(node, f"tag '{node.tag}' is not allowed", "remove the tag")
            return text
        if node.style:  # quoted or block scalar: always a string
            return text
        if text in ("", "~", "null", "Null", "NULL"):
            return None
        if text in ("true", "True", "TRUE"):
            return True
        if text in ("false", "False", "FALSE"):
            return False
        if _INT.fullmatch(text):
            return int(text) if len(text) <= MAX_INT_DIGITS else float(text)
        if _FLOAT.fullmatch(text):
            return float(text)
        if text in _SPECIAL_FLOAT:
            return _SPECIAL_FLOAT[text]
        return text


def load_text(text: str, file: str = "<input>"):
    """Parse YAML text into located dicts, lists and scalars.

    Parameters
    ----------
    text : str
        The document.
    file : str
        Name used in error messages.

    Returns
    -------
    LocatedDict, LocatedList or scalar
        The document; None for an empty one.

    Raises
    ------
    NetworkSpecError
        Malformed YAML, a duplicate key, a disallowed tag, too large a document.
    """
    if len(text) > MAX_BYTES:
        raise NetworkSpecError([Problem(file, 0, 0, "", f"the file is larger than "
                                        f"{MAX_BYTES // 2**20} MiB",
                                        "give large networks as tables (vessels_table:)")])
    enabled = gc.isenabled()
    gc.disable()
    try:
        _check_depth(text, file)
        node = yaml.compose(text, Loader=_Loader)
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        line, col = (mark.line + 1, mark.column + 1) if mark else (0, 0)
        what = exc.problem or str(exc)
        if "nesting depth" in what:  # libyaml's own limit, met while it reads ahead
            raise NetworkSpecError([Problem(
                file, line, col, "", f"mappings and lists are nested more than {MAX_DEPTH} levels "
                "deep", "a network file needs only a few levels")]) from None
        raise NetworkSpecError([Problem(file, line, col, "", f"malformed YAML: {what}",
                                        "check indentation, colons and quotes")]) from None
    except yaml.YAMLError as exc:
        raise NetworkSpecError([Problem(file, 0, 0, "", f"malformed YAML: {exc}",
                                        "check the file is YAML text")]) from None
    else:
        if node is None:
            return None
        builder = _Builder(file)
        doc, _, _ = builder.build(node)
    finally:
        if enabled:
            gc.enable()
    if builder.problems:
        raise NetworkSpecError(builder.problems)
    return doc


def _check_depth(text: str, file: str) -> None:
    """Refuse nesting deeper than :data:`MAX_DEPTH` before anything recurses.

    Reads the event stream (libyaml's parser keeps an explicit stack) and
    stops at the first level too deep.
    """
    depth = 0
    for event in yaml.parse(text, Loader=_Loader):
        if isinstance(event, _OPEN):
            depth += 1
            if depth > MAX_DEPTH:
                line, col = event.start_mark.line + 1, event.start_mark.column + 1
                raise NetworkSpecError([Problem(
                    file, line, col, "", f"mappings and lists are nested more than "
                    f"{MAX_DEPTH} levels deep", "a network file needs only a few levels")])
        elif isinstance(event, _CLOSE):
            depth -= 1


def load_file(path) -> object:
    """Read and parse a YAML file; see :func:`load_text`.

    Raises
    ------
    NetworkSpecError
        The file cannot be read, is not UTF-8 text, or is not valid YAML.
    """
    name = str(path)
    try:
        with open(path, "rb") as handle:
            raw = handle.read(MAX_BYTES + 1)
    except OSError as exc:
        raise NetworkSpecError([Problem(name, 0, 0, "", f"cannot read the file: "
                                        f"{exc.strerror or exc}", "check the path")]) from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise NetworkSpecError([Problem(name, 0, 0, "", f"not UTF-8 text (byte {exc.start})",
                                        "save the file as UTF-8")]) from None
    return load_text(text, name)
