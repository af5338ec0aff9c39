"""A fuzzing harness for the readers: one generator per file kind, mutations, an outcome tally.

Each generator is a hypothesis strategy that draws a *case*: the files to
write (name -> bytes), the file to hand to the command line, and the
commands to run on it.  A case starts as a structured, mostly valid file
(a small network, tables, a scenario file), which is then mutated: keys
deleted or renamed, values swapped for other types, huge, tiny, negative
and non-finite numbers, random unit strings and unicode ids, and finally
text damage (truncation, random characters and bytes, stray tags, aliases
and nesting).  :func:`run_case` runs every command in-process and checks
the promise of SPEC section 4: exit 0, or 2 with a one-paragraph message,
or 1 for a numerical failure with its reason; never a traceback, an
internal error or a hang.

To fuzz a new file kind, write a strategy returning a :class:`Case` and
add it to :data:`GENERATORS` (and a property to ``test_fuzz_readers.py``).
"""

from __future__ import annotations

import contextlib
import functools
import io
import json
import signal
import warnings
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path

import yaml
from hypothesis import strategies as st

from vesselnet.cli import main

TALLY: Counter = Counter()
"""Outcomes of every fuzzed input, keyed ``kind / command / outcome``."""

INPUTS: Counter = Counter()
"""Number of fuzzed inputs (cases) per file kind."""

TIME_LIMIT_S = 20.0
"""A single command taking longer than this counts as a hang."""

GOOD_UNITS = {
    "length": ["cm", "mm", "um", "µm", "m"], "radius": ["mm", "um", "cm", "m"],
    "pressure": ["mmHg", "Pa", "kPa", "cmH2O", "dyn/cm^2"], "flow": ["mL/min", "mL/s", "L/min", "m^3/s"],
    "viscosity": ["cP", "mPa*s", "Pa*s"], "resistance": ["mmHg*s/mL", "mmHg*min/L", "Pa*s/m^3", "dyn*s/cm^5"],
    "fraction": ["%", ""], "density": ["kg/m^3", "g/cm^3"], "modulus": ["MPa", "kPa", "Pa"],
    "compliance": ["mL/mmHg", "m^3/Pa"], "time": ["s", "ms"], "volume": ["mL", "L"],
}
ODD_UNITS = ["furlong", "mmHg", "", "m^^3", "ｍｍ", "1/0", "cm cm", "mL/min/", "%%", "e5", "nan",
             "mm\x00", "\u202e mm", "m" * 200, "kg", "bpm", "Pa*s*s", "💧"]
DEFAULT_UNIT = {"length": "cm", "radius": "mm", "pressure": "mmHg", "flow": "mL/min",
                "viscosity": "cP", "resistance": "mmHg*s/mL", "modulus": "MPa", "fraction": ""}
NAMES = ["root", "a", "b", "knee", "tip", "sfa", "j1", "j2", "organ", "x"]
ODD_TEXT = ["", " ", "=HYPERLINK(\"http://x\")", "+1", "-x", "@x", "a\nb", "a\x1b[31m", "ü", "名前",
            "\u202e", "a,b", "\"q\"", "null", "true", "1e3", "#", "- x", "{a: 1}", "&a", "*a", "!!str"]


@dataclass
class Case:
    """Files to write, the file given to the commands, and the commands (argument lists)."""

    kind: str
    files: dict[str, bytes]
    target: str
    commands: list[list[str]]
    mutations: list[str] = field(default_factory=list)


# ---------------------------------------------------------------- values

@functools.lru_cache(maxsize=None)
def numbers(low: float, high: float, clean: bool = False):
    """In-range positive numbers; unless ``clean``, sometimes extreme, negative or non-finite."""
    usual = st.floats(min_value=low, max_value=high, allow_nan=False, allow_infinity=False)
    if clean:
        return usual
    odd = st.sampled_from([0, -1, -0.0, 1e-300, 1e300, 5e-324, 1.7976931348623157e308,
                           float("nan"), float("inf"), -float("inf"), 10**400, -(10**30), 2**63])
    return st.one_of(usual, usual, usual, st.integers(1, 500), odd)


@functools.lru_cache(maxsize=None)
def quantity(kind: str, low: float, high: float, clean: bool = False):
    """A bare number, or a string with a unit (unless ``clean``, sometimes an odd one)."""
    value = numbers(low, high, clean)
    if clean:
        return st.one_of(value, value, value.map(lambda x: f"{x} {DEFAULT_UNIT[kind]}"))
    with_unit = st.tuples(value, st.sampled_from(GOOD_UNITS.get(kind, [""]) + ODD_UNITS[:4])).map(
        lambda t: f"{t[0]} {t[1]}".strip())
    return st.one_of(value, value, with_unit, st.sampled_from(ODD_UNITS))


@functools.lru_cache(maxsize=None)
def odd_value():
    """Any value of the wrong type, or of the right type with a wrong value."""
    return st.one_of(
        st.none(), st.booleans(), st.integers(-(10**400), 10**400),
        st.floats(allow_nan=True, allow_infinity=True), st.text(max_size=12),
        st.sampled_from(ODD_TEXT + ODD_UNITS),
        st.lists(st.one_of(st.integers(), st.text(max_size=3)), max_size=3),
        st.dictionaries(st.text(max_size=4), st.integers(), max_size=2))


@functools.lru_cache(maxsize=None)
def ids(clean: bool = False):
    """Names: plain ones, unicode ones, and (unless ``clean``) hostile ones."""
    plain = st.one_of(st.sampled_from(NAMES), st.text("abcxyzéü名_0123456789", min_size=1, max_size=6))
    if clean:
        return plain
    return st.one_of(plain, plain, st.text(min_size=1, max_size=8), st.sampled_from(ODD_TEXT),
                     st.integers(-5, 5))


MUTATIONS = st.sampled_from([0, 0, 1, 2, 3])
DAMAGE = st.sampled_from([0, 0, 0, 1, 2])


# ---------------------------------------------------------------- structured documents

@st.composite
def network_doc(draw, max_vessels: int = 6, clean: bool | None = None) -> dict:
    """A small network as Python data: a tree from a fixed-pressure root, beds on the leaves,
    optional loops, lesions, walls, tags, node properties, units and blood.  A ``clean``
    network (drawn half the time when not given) has only valid values."""
    if clean is None:
        clean = draw(st.booleans())
    n = draw(st.integers(1, max_vessels))

    def quantity(kind, low, high):
        return globals()["quantity"](kind, low, high, clean)

    def ids():
        return globals()["ids"](clean)

    def numbers(low, high):
        return globals()["numbers"](low, high, clean)

    names = draw(st.lists(ids(), min_size=n + 1, max_size=n + 1, unique_by=str))
    names = [str(x) for x in names]
    vessels, children = [], {0}
    for i in range(1, n + 1):
        parent = draw(st.integers(0, i - 1))
        children.discard(parent)
        children.add(i)
        vessel = {"id": f"v{i}" if draw(st.booleans()) else draw(ids()), "from": names[parent],
                  "to": names[i], "length": draw(quantity("length", 1e-3, 100.0))}
        shape = draw(st.integers(0, 4))
        if shape == 0:
            vessel["diameter"] = draw(quantity("radius", 1e-3, 30.0))
        elif shape == 1:
            vessel["radius"] = {"in": draw(quantity("radius", 1e-3, 15.0)),
                                "out": draw(quantity("radius", 1e-3, 15.0))}
        else:
            vessel["radius"] = draw(quantity("radius", 1e-3, 15.0))
        if draw(st.integers(0, 5)) == 0:
            reduction = st.floats(0, 0.99) if clean else st.one_of(st.floats(0, 0.99), st.sampled_from(
                ["50%", "99%", 70, 1.0, "-5%"]))
            vessel["stenosis"] = {"reduction": draw(reduction), "length": draw(quantity(
                "length", 1e-3, 1e-3 if clean else 2.0))}
        if draw(st.integers(0, 6)) == 0:
            vessel["wall"] = {"thickness": draw(quantity("radius", 0.01, 2.0)),
                              "modulus": draw(quantity("modulus", 0.05, 5.0))}
            if draw(st.booleans()):
                vessel["wall"]["distensible"] = True
        if draw(st.integers(0, 4)) == 0:
            vessel["tags"] = draw(st.lists(st.sampled_from(["leg", "left", "skin", "graft"]), max_size=2))
        vessels.append(vessel)
    for _ in range(draw(st.integers(0, 2)) if n >= 2 else 0):
        a, b = draw(st.integers(0, n)), draw(st.integers(0, n))
        if clean and a == b:
            continue
        vessels.append({"id": f"loop{len(vessels)}", "from": names[a], "to": names[b],
                        "length": draw(quantity("length", 1e-3, 100.0)),
                        "radius": draw(quantity("radius", 1e-3, 15.0))})
    nodes = {names[0]: {"pressure": draw(quantity("pressure", 1.0, 200.0))}}
    if draw(st.integers(0, 3)) == 0 and n >= 2:
        nodes[names[1]] = {"inflow": draw(quantity("flow", 0.1, 5000.0))}
    if draw(st.integers(0, 4)) == 0:
        nodes.setdefault(names[-1], {})["position"] = draw(st.lists(numbers(-100, 100), min_size=2,
                                                                     max_size=3))
    beds = []
    for k in sorted(children):
        bed = {"id": f"bed{k}", "node": names[k], "resistance": draw(quantity("resistance", 0.1, 500.0))}
        if draw(st.integers(0, 3)) == 0:
            bed["outflow_pressure"] = draw(quantity("pressure", 0.0, 20.0))
        if draw(st.integers(0, 5)) == 0:
            bed["share"] = draw(st.floats(0, 1) if clean else st.one_of(st.floats(0, 1), st.sampled_from(
                ["30%", 30, -0.1])))
        beds.append(bed)
    doc = {"vesselnet": 1, "name": draw(st.one_of(st.just("fuzz"), st.text(max_size=10))),
           "nodes": nodes, "vessels": vessels}
    if beds and draw(st.integers(0, 5)):
        doc["beds"] = beds
    if draw(st.integers(0, 3)) == 0:
        doc["units"] = {kind: draw(st.sampled_from(GOOD_UNITS[kind] + ([] if clean else ODD_UNITS[:3])))
                        for kind in draw(st.lists(st.sampled_from(["length", "radius", "pressure",
                                                                   "flow", "resistance"]),
                                                  unique=True, max_size=3))}
    if draw(st.integers(0, 3)) == 0:
        doc["blood"] = {"viscosity": draw(st.one_of(quantity("viscosity", 1.0, 5.0), st.just(
            {"law": "pries-vivo"}), st.just({"law": "pries-vitro", "plasma": "1.2 cP"}))),
            "hematocrit": draw(st.floats(0, 0.7) if clean else st.one_of(st.floats(0, 0.7), st.sampled_from(
                ["45%", 45, 1.2])))}
    if draw(st.integers(0, 3)) == 0:
        doc["venous_pressure"] = draw(quantity("pressure", 0.0, 20.0))
    return doc


def _slots(value, out, depth=0):
    """Every (container, key) pair of a nested document, for mutations."""
    if depth > 8:
        return out
    items = value.items() if isinstance(value, dict) else enumerate(value) if isinstance(value, list) else ()
    for key, child in list(items):
        out.append((value, key))
        _slots(child, out, depth + 1)
    return out


@st.composite
def mutated(draw, doc: dict, max_mutations: int = 3):
    """``doc`` with up to ``max_mutations`` structural mutations; returns (doc, names of mutations)."""
    done = []
    for _ in range(min(draw(MUTATIONS), max_mutations)):
        slots = _slots(doc, [])
        if not slots:
            break
        container, key = slots[draw(st.integers(0, len(slots) - 1))]
        op = draw(st.sampled_from(["delete", "replace", "replace", "rename", "duplicate", "wrap"]))
        if op == "delete":
            del container[key]
        elif op == "replace":
            container[key] = draw(odd_value())
        elif op == "rename" and isinstance(container, dict):
            new = draw(st.one_of(st.text(max_size=8), st.sampled_from(
                ["lenght", "raduis", "diameter", "from", "to", "pressure", "inflow", "id", "<<"])))
            container[new] = container.pop(key)
        elif op == "duplicate" and isinstance(container, list):
            container.insert(key, json.loads(json.dumps(container[key], default=str)))
        elif op == "wrap":
            container[key] = [container[key]]
        done.append(op)
    return doc, done


def dump(doc) -> str:
    """YAML text of a document (block style with flow leaves, unicode kept)."""
    return yaml.dump(doc, Dumper=DUMPER, allow_unicode=True, sort_keys=False, default_flow_style=None,
                     width=120)


DUMPER = getattr(yaml, "CSafeDumper", yaml.SafeDumper)


@st.composite
def damaged(draw, text: str):
    """``text`` as bytes after up to two kinds of damage; returns (bytes, names of damage)."""
    data = text.encode("utf-8")
    done = []
    for _ in range(draw(DAMAGE)):
        op = draw(st.sampled_from(["truncate", "insert", "bytes", "delete", "snippet", "bom", "dupline"]))
        pos = draw(st.integers(0, len(data)))
        if op == "truncate":
            data = data[:pos]
        elif op == "insert":
            data = data[:pos] + draw(st.text(max_size=6)).encode("utf-8") + data[pos:]
        elif op == "bytes":
            data = data[:pos] + draw(st.binary(min_size=1, max_size=6)) + data[pos:]
        elif op == "delete":
            data = data[:pos] + data[pos + draw(st.integers(1, 20)):]
        elif op == "snippet":
            snippet = draw(st.sampled_from([
                "\nx: !!python/object/apply:os.system [ls]\n", "\n  - &a [*a]\n", "\n  foo: *nowhere\n",
                "\n<<: {a: 1}\n", "\nb: " + "[" * 300 + "]" * 300 + "\n", "\t", ": :", "\n---\n", "'",
                "\"\\x\"", "\n%YAML 1.1\n", "\nvesselnet: 1\n", "{", "\n? [a, b]\n: c\n",
                "\nlength: " + "9" * 5000 + "\n", "\u2028", "\x00"]))
            data = data[:pos] + snippet.encode("utf-8") + data[pos:]
        elif op == "bom":
            data = b"\xef\xbb\xbf" + data
        elif op == "dupline":
            lines = data.split(b"\n")
            k = draw(st.integers(0, len(lines) - 1))
            lines.insert(k, lines[k])
            data = b"\n".join(lines)
        done.append(op)
    return data, done


# ---------------------------------------------------------------- generators, one per file kind

@st.composite
def network_files(draw) -> Case:
    """A network YAML file: structured, mutated, then maybe damaged as text."""
    doc, mutations = draw(mutated(draw(network_doc())))
    data, damage = draw(damaged(dump(doc)))
    return Case("network", {"net.yaml": data}, "net.yaml",
                [["check", "net.yaml"], ["solve", "net.yaml", "--json"]], mutations + damage)


@st.composite
def raw_files(draw) -> Case:
    """Whatever bytes: random text, random binary, YAML fragments."""
    data = draw(st.one_of(st.binary(max_size=200), st.text(max_size=200).map(str.encode),
                          st.sampled_from(ODD_TEXT).map(str.encode)))
    return Case("raw", {"net.yaml": data}, "net.yaml", [["check", "net.yaml"]], ["raw"])


def _csv_cell(value) -> str:
    text = str(value)
    return '"' + text.replace('"', '""') + '"' if any(c in text for c in ',"\n\r') else text


def _csv(header, rows) -> str:
    return "\n".join(",".join(_csv_cell(c) for c in row) for row in [header] + rows) + "\n"


@st.composite
def table_files(draw) -> Case:
    """A small YAML file naming vessels, beds and nodes CSV tables, the tables fuzzed."""
    clean = draw(st.booleans())
    doc = draw(network_doc(max_vessels=5, clean=True))
    vessels = doc["vessels"]
    for v in vessels:
        v["length"], v["radius"] = draw(numbers(1e-3, 100, clean)), draw(numbers(1e-3, 15, clean))
    units = draw(st.sampled_from(["", "[cm]", "[mm]", "[um]"] + ([] if clean else ["[furlong]", "[]", "[mmHg]"])))
    header = ["id", "from", "to", "length" + units, draw(st.sampled_from(
        ["radius", "diameter", "radius[um]", "radius[mm]"] + ([] if clean else ["raduis"])))]
    if draw(st.booleans()):
        header.append("tags")
    rows = [[v["id"], v["from"], v["to"], v["length"], v["radius"]] + (["a;b"] if len(header) > 5 else [])
            for v in vessels]
    rows = draw(_table_mutations(rows, len(header), clean))
    bed_rows = [[b["id"], b["node"], draw(numbers(0.1, 500, clean))] for b in doc.get("beds", [])]
    bed_header = ["id", "node", draw(st.sampled_from(["resistance", "resistance[mmHg*s/mL]",
                                                      "resistance[Pa*s/m^3]"] + ([] if clean else ["resistance[kg]"])))]
    bed_rows = draw(_table_mutations(bed_rows, 3, clean))
    node_header = ["id", "pressure" + draw(st.sampled_from(["", "[mmHg]", "[kPa]"] + ([] if clean else ["[cm]"]))),
                   "x", "y"]
    node_rows = draw(_table_mutations([[vessels[0]["from"] if vessels else "root", 100, 0, 0]], 4, clean))
    top = {"vesselnet": 1, "name": "tables", "vessels_table": "vessels.csv"}
    if vessels and draw(st.booleans()):
        top["nodes_table"] = "nodes.csv"
    else:
        top["nodes"] = {str(vessels[0]["from"]) if vessels else "root": {"pressure": 100}}
    if bed_rows or draw(st.booleans()):
        top["beds_table"] = "beds.csv"
    files = {"net.yaml": dump(top).encode(), "vessels.csv": _csv(header, rows).encode(),
             "beds.csv": _csv(bed_header, bed_rows).encode(), "nodes.csv": _csv(node_header, node_rows).encode()}
    name = draw(st.sampled_from(["vessels.csv", "beds.csv", "nodes.csv"]))
    files[name], damage = draw(damaged(files[name].decode())) if not clean else (files[name], [])
    return Case("tables", files, "net.yaml", [["check", "net.yaml"], ["solve", "net.yaml", "-o", "out"]],
                damage)


@st.composite
def _table_mutations(draw, rows, width, clean=False):
    rows = [list(r) for r in rows]
    for _ in range(0 if clean else draw(MUTATIONS)):
        op = draw(st.sampled_from(["cell", "cell", "short", "long", "blank", "dup"]))
        if not rows:
            rows.append([draw(ids()) for _ in range(width)])
            continue
        r = draw(st.integers(0, len(rows) - 1))
        if op == "cell":
            c = draw(st.integers(0, len(rows[r]) - 1)) if rows[r] else 0
            if rows[r]:
                rows[r][c] = draw(st.one_of(odd_value().map(str), st.sampled_from(ODD_TEXT)))
        elif op == "short":
            rows[r] = rows[r][:-1]
        elif op == "long":
            rows[r] = rows[r] + ["extra"]
        elif op == "blank":
            rows[r] = ["" for _ in rows[r]]
        else:
            rows.insert(r, list(rows[r]))
    return rows


BASE_NETWORK = """vesselnet: 1
name: base
nodes:
  root: {pressure: 100}
vessels:
  - {id: a, from: root, to: j, length: 10, radius: 3, tags: [leg]}
  - {id: b, from: j, to: t1, length: 10, radius: 2}
  - {id: c, from: j, to: t2, length: 10, radius: 2, tags: [leg, skin]}
beds:
  - {id: bed1, node: t1, resistance: 40}
  - {id: bed2, node: t2, resistance: 60}
"""
VESSELS, BEDS = ["a", "b", "c"], ["bed1", "bed2"]


@st.composite
def change(draw, clean: bool = False) -> dict:
    """One change of SPEC section 3 (or the autoregulate extension); ``clean`` ones are valid."""
    verb = draw(st.sampled_from(["narrow", "occlude", "scale_radius", "scale_bed", "add_vessel",
                                 "remove_vessel", "set_boundary", "autoregulate"]))
    vessel = draw(st.sampled_from(VESSELS) if clean else st.one_of(st.sampled_from(VESSELS), ids()))
    bed = draw(st.sampled_from(BEDS) if clean else st.one_of(st.sampled_from(BEDS), ids()))
    if verb == "narrow":
        reduction = st.floats(0, 0.95) if clean else st.one_of(st.floats(0, 0.99), st.sampled_from(
            ["75%", "100%", 2, -1]))
        args = {"vessel": vessel, "reduction": draw(reduction),
                "length": draw(quantity("length", 0.1, 5.0, clean))}
        if draw(st.booleans()):
            args["at"] = draw(st.floats(0, 1) if clean else st.one_of(st.floats(0, 1), st.just(1.5)))
    elif verb in ("occlude", "remove_vessel"):
        args = {"vessel": vessel if not clean else draw(st.sampled_from(["b", "c"]))}
    elif verb == "scale_radius":
        target = draw(st.sampled_from(["vessel", "vessels", "tag"]))
        args = {target: [vessel, "b"] if target == "vessels" else "leg" if target == "tag" else vessel,
                "factor": draw(numbers(0.1, 3.0, clean))}
    elif verb == "scale_bed":
        args = {"bed": bed, "factor": draw(numbers(0.1, 3.0, clean))}
    elif verb == "autoregulate":
        args = {"bed": bed, "reserve": draw(numbers(1.0, 5.0, clean))}
    elif verb == "set_boundary":
        args = {"node": draw(st.sampled_from(["root"]) if clean else st.one_of(
                    st.sampled_from(["root", "j", "t1"]), ids())),
                "pressure": draw(quantity("pressure", 1.0, 150.0, clean))}
        if not clean and draw(st.booleans()):
            args["inflow"] = args.pop("pressure")
    else:
        end = draw(st.one_of(st.sampled_from(["root", "j"]), st.builds(
            lambda v, at: {"vessel": v, "at": at}, st.sampled_from(VESSELS), st.floats(0.05, 0.95))))
        args = {"id": draw(st.just("graft") if clean else st.one_of(st.just("graft"), ids())), "from": end,
                "to": draw(st.sampled_from(["t1", "t2"])), "length": draw(quantity("length", 1.0, 30.0, clean)),
                "radius": draw(quantity("radius", 0.5, 4.0, clean))}
    return {verb: args}


@st.composite
def scenario_files(draw) -> Case:
    """A scenario file on a small fixed network (SPEC section 3); half are clean, the rest noisy,
    mutated and damaged."""
    clean = draw(st.booleans())
    scenarios = [{"name": f"s{k}" if clean else draw(st.one_of(st.just(f"s{k}"), st.text(max_size=8))),
                  "changes": draw(st.lists(change(clean), min_size=0, max_size=1 if clean else 3))}
                 for k in range(draw(st.integers(1, 3)))]
    network = "base.yaml" if clean else draw(st.sampled_from(["base.yaml"] * 4 + ["missing.yaml", "", "."]))
    doc = {"vesselnet": 1, "network": network, "scenarios": scenarios}
    if draw(st.booleans()):
        doc["units"] = {"length": draw(st.sampled_from(["cm", "mm"] + ([] if clean else ["furlong"])))}
    mutations, damage = [], []
    if not clean:
        doc, mutations = draw(mutated(doc))
    data, damage = draw(damaged(dump(doc))) if not clean else (dump(doc).encode(), [])
    return Case("scenario", {"scen.yaml": data, "base.yaml": BASE_NETWORK.encode()}, "scen.yaml",
                [["check", "scen.yaml"], ["compare", "scen.yaml", "--json"]], mutations + damage)


@st.composite
def sweep_files(draw) -> Case:
    """A sweep file on the small fixed network: one or two swept change arguments, or a list of
    cases; half clean, the rest with odd ranges (huge or negative steps, reversed or log
    ranges through zero), mutated and damaged."""
    clean = draw(st.booleans())
    doc = {"vesselnet": 1, "network": "base.yaml"}
    if draw(st.integers(0, 3)):
        swept = [({"narrow": {"vessel": "a", "length": 1}}, "reduction",
                  {"from": "0%", "to": draw(st.sampled_from(["80%", "50%"])), "steps": 3}),
                 ({"scale_bed": {"bed": "bed1"}}, "factor", [0.5, 1, 2]),
                 ({"scale_radius": {"vessel": "b"}}, "factor",
                  {"from": 0.5, "to": 2, "steps": 2, "scale": "log"})]
        chosen = draw(st.lists(st.sampled_from(range(3)), min_size=1, max_size=2, unique=True))
        doc["parameters"] = [{"name": f"p{k}", "change": swept[k][0], "vary": swept[k][1],
                              "values": json.loads(json.dumps(swept[k][2]))} for k in chosen]
        if not clean:
            values = doc["parameters"][0]["values"]
            if isinstance(values, dict):
                values[draw(st.sampled_from(["steps", "from", "to", "scale"]))] = draw(st.one_of(
                    st.sampled_from([0, -3, 1.5, 10**9, 10**6, "5", "log", "sideways", "-1%"]), odd_value()))
    else:
        doc["cases"] = [{"name": f"c{k}" if clean else draw(st.one_of(st.just(f"c{k}"), ids())),
                         "changes": draw(st.lists(change(clean), min_size=0, max_size=2))}
                        for k in range(draw(st.integers(1, 3)))]
    if draw(st.booleans()):
        doc["report"] = draw(st.sampled_from([["bed1"], ["bed1", "bed2"]]) if clean
                             else st.lists(st.one_of(st.sampled_from(BEDS), ids()), max_size=3))
    mutations = []
    if not clean:
        doc, mutations = draw(mutated(doc))
    data, damage = draw(damaged(dump(doc))) if not clean else (dump(doc).encode(), [])
    return Case("sweep", {"sweep.yaml": data, "base.yaml": BASE_NETWORK.encode()}, "sweep.yaml",
                [["check", "sweep.yaml"], ["sweep", "sweep.yaml", "--json"]], mutations + damage)


@st.composite
def plan_files(draw) -> Case:
    """A graft plan on the small fixed network: a condition, targets, candidate grafts
    (``add_vessel`` mappings with an id, a conduit or a wall); half clean."""
    clean = draw(st.booleans())
    candidates = []
    for k in range(draw(st.integers(1, 3))):
        candidate = {"id": f"g{k}" if clean else draw(st.one_of(st.just(f"g{k}"), ids())),
                     "from": draw(st.sampled_from(["root", {"vessel": "a", "at": 0.3}])),
                     "to": draw(st.sampled_from(["t1", "t2", {"vessel": "b", "at": 0.6}])),
                     "length": draw(quantity("length", 2.0, 30.0, clean)),
                     "radius": draw(quantity("radius", 0.5, 3.0, clean))}
        if draw(st.booleans()):
            candidate["conduit"] = draw(st.sampled_from(["vein-autologous", "ptfe-tube"]) if clean
                                        else st.sampled_from(["vein-autologous", "ptfe", "", "gold"]))
        candidates.append(candidate)
    doc = {"vesselnet": 1, "network": "base.yaml",
           "condition": draw(st.lists(st.sampled_from([{"occlude": {"vessel": "b"}},
                                                       {"narrow": {"vessel": "a", "reduction": "70%",
                                                                   "length": 2}}]),
                                      min_size=1, max_size=2, unique_by=json.dumps)),
           "targets": draw(st.sampled_from([["bed1"], ["bed1", "bed2"]]) if clean
                           else st.lists(st.one_of(st.sampled_from(BEDS), ids()), max_size=3)),
           "candidates": candidates, "robustness": {"samples": 3, "seed": 11}}
    if draw(st.booleans()):
        doc["territory"] = draw(st.sampled_from(["infrainguinal"] if clean else ["infrainguinal", "moon"]))
    mutations = []
    if not clean:
        doc, mutations = draw(mutated(doc))
    data, damage = draw(damaged(dump(doc))) if not clean else (dump(doc).encode(), [])
    return Case("plan", {"plan.yaml": data, "base.yaml": BASE_NETWORK.encode()}, "plan.yaml",
                [["check", "plan.yaml"], ["grafts", "plan.yaml", "--json", "--samples", "3"]],
                mutations + damage)


GENERATORS = {"network": network_files, "raw": raw_files, "tables": table_files,
              "scenario": scenario_files, "sweep": sweep_files, "plan": plan_files}
"""File kind -> strategy drawing a :class:`Case`."""


# ---------------------------------------------------------------- running and checking

class Hang(BaseException):
    """A command ran past :data:`TIME_LIMIT_S` (not an Exception, so main() cannot swallow it)."""


def _alarm(signum, frame):
    raise Hang(f"a command ran longer than {TIME_LIMIT_S} s")


def run_cli(argv: list[str]) -> tuple[int, str, str]:
    """main(argv) in-process: (exit status, stdout, stderr), with a hang watchdog."""
    out, err = io.StringIO(), io.StringIO()
    previous = signal.signal(signal.SIGALRM, _alarm)
    signal.setitimer(signal.ITIMER_REAL, TIME_LIMIT_S)
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err), \
                warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            status = main(argv)
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)
    noise = [str(w.message) for w in caught if issubclass(w.category, RuntimeWarning)]
    assert not noise, f"floating-point warnings leaked from {argv}: {noise}"
    return status, out.getvalue(), err.getvalue()


def run_case(case: Case, folder: Path) -> list[tuple[int, str, str]]:
    """Write the case's files into ``folder`` (emptied first) and run its commands there.

    Asserts the command-line promise for each command, records the outcome
    in :data:`TALLY`, and returns (status, stdout, stderr) per command.
    """
    for old in sorted(folder.rglob("*"), reverse=True):
        old.unlink() if old.is_file() else old.rmdir()
    for name, data in case.files.items():
        (folder / name).write_bytes(data)
    INPUTS[case.kind] += 1
    outcomes = []
    for command in case.commands:
        argv = [str(folder / a) if a in case.files or a == "out" else a for a in command]
        status, out, err = run_cli(argv)
        context = f"{case.kind} {command} after {case.mutations}:\n{err[-2000:]}"
        assert "Traceback" not in err and "internal error" not in err, context
        assert status in (0, 1, 2), context
        if status == 2:
            assert err.startswith("vesselnet: "), context
            assert "\n\n" not in err.strip(), "more than one paragraph: " + context
            outcome = "invalid input (exit 2)"
        elif status == 1:
            assert "numerical failure:" in err, context
            outcome = "numerical failure (exit 1)"
        else:
            outcome = "ok (exit 0)"
            if "--json" in command:
                check_json(json.loads(out, parse_constant=_no_constant), err, context)
            if "-o" in command:
                check_tables(folder / "out", context)
        TALLY[f"{case.kind} / {command[0]} / {outcome}"] += 1
        outcomes.append((status, out, err))
    return outcomes


def _no_constant(name: str):
    raise AssertionError(f"the JSON output holds {name}, which is not JSON")


def check_json(doc: dict, err: str, context: str) -> None:
    """A successful JSON result tells the truth about its accuracy (NaN and Infinity tokens are
    refused while parsing)."""
    checks = doc.get("checks") or doc.get("baseline", {}).get("checks", {})
    balance = checks.get("mass_balance")
    assert balance is None or balance <= 1e-6 or "lost accuracy" in err, context


def check_tables(folder: Path, context: str) -> None:
    """Written tables are complete CSV (no temporary files left beside them)."""
    import csv

    names = sorted(p.name for p in folder.iterdir())
    assert names == ["beds.csv", "nodes.csv", "vessels.csv"], context + f" wrote {names}"
    for name in names:
        with open(folder / name, newline="", encoding="utf-8") as handle:
            rows = list(csv.reader(handle))
        assert rows and rows[0][0] == "id" and len({len(r) for r in rows}) == 1, context
        for row in rows[1:]:
            assert all(not cell[:1] in ("=", "+", "-", "@") for cell in row[:1]), context


def tally_text() -> str:
    """The tally as lines ``count  kind / command / outcome`` and the totals."""
    lines = [f"{count:6d}  {key}" for key, count in sorted(TALLY.items())]
    total = sum(INPUTS.values())
    lines.append(f"{total:6d}  fuzzed inputs in all ({', '.join(f'{k} {v}' for k, v in sorted(INPUTS.items()))}),"
                 f" {sum(TALLY.values())} command runs")
    return "\n".join(lines)
