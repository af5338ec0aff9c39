"""Changes as written in files (SPEC section 3), read with locations and applied.

A change is a mapping with one verb key; its arguments use the file's
units.  Reading checks the syntax and units of every change and collects
the problems; applying checks the ids against the network the change meets
(after the changes before it) and reports problems at the change's line.

Examples
--------
>>> from vesselnet.fields import FieldReader
>>> from vesselnet.yamlread import load_text
>>> doc = load_text("changes:\\n  - narrow: {vessel: a, reduction: 75%, length: 2}\\n", "s.yaml")
>>> [change] = read_changes(FieldReader("s.yaml"), doc, "changes", "changes")
>>> change.verb, change.arguments["reduction"], round(change.arguments["length_m"], 3), change.line
('narrow', 0.75, 0.02, 2)
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np

from . import changes as verbs
from .autoregulation import with_targets
from .errors import NetworkSpecError, Problem
from .fields import FieldReader, near_miss
from .model import Network
from .reader import read_vessels
from .yamlread import LocatedDict

TARGETS = ("vessel", "vessels", "tag")
BED_TARGETS = ("bed", "beds")

# verb -> (function, file key -> (keyword, unit kind or None for names, reading options))
VERBS = {
    "narrow": (verbs.narrow, {"reduction": ("reduction", "fraction", {"required": True, "below_one": True}),
                              "length": ("length_m", "length", {"required": True, "positive": True}),
                              "at": ("at", "fraction", {"between": (0.0, 1.0)})}),
    "occlude": (verbs.occlude, {}),
    "scale_radius": (verbs.scale_radius, {"factor": ("factor", "fraction", {"required": True,
                                                                            "positive": True})}),
    "scale_bed": (verbs.scale_bed, {"factor": ("factor", "fraction", {"required": True, "positive": True})}),
    "autoregulate": (verbs.autoregulate, {
        "min_resistance": ("min_resistance_pa_s_m3", "resistance", {"positive": True}),
        "reserve": ("reserve", "fraction", {"positive": True}),
        "target_flow": ("target_flow_m3_s", "flow", {"positive": True})}),
    "remove_vessel": (verbs.remove_vessel, {}),
    "set_boundary": (verbs.set_boundary, {"pressure": ("pressure_pa", "pressure", {}),
                                          "inflow": ("inflow_m3_s", "flow", {})}),
    "add_vessel": (verbs.add_vessel, {}),
}
"""The change verbs: SPEC section 3, and ``autoregulate`` (our extension)."""

BED_VERBS = ("scale_bed", "autoregulate")


@dataclass(frozen=True)
class Change:
    """One change: a verb, its keyword arguments in SI, and where it was written.

    ``arguments`` are those of the verb's function in :mod:`vesselnet.changes`.
    """

    verb: str
    arguments: Mapping[str, object] = field(default_factory=dict)
    file: str = ""
    line: int = 0
    column: int = 0
    item: str = ""

    def apply(self, network: Network) -> Network:
        """The network with this change made; problems carry this change's location."""
        function = VERBS[self.verb][0]
        try:
            return function(network, **self.arguments)
        except NetworkSpecError as exc:
            raise NetworkSpecError([self.locate(p) for p in exc.problems]) from None

    def locate(self, problem: Problem) -> Problem:
        """``problem`` placed at this change (when it has no place of its own)."""
        if problem.file or problem.line:
            return problem
        item = f"{self.item} {problem.item}".strip()
        return dataclasses.replace(problem, file=self.file, line=self.line, column=self.column, item=item)


def apply_changes(network: Network, changes: Sequence[Change], *,
                  baseline_bed_flow_m3_s: np.ndarray | None = None) -> Network:
    """Make ``changes`` in order; the base network is not modified.

    Parameters
    ----------
    network : Network
    changes : sequence of Change
    baseline_bed_flow_m3_s : ndarray, optional
        Baseline flow of every bed: autoregulating beds without an explicit
        target hold it (filled in before each change, so later changes such
        as ``scale_bed`` act on it).

    Raises
    ------
    NetworkSpecError
        A change names an unknown item or cannot be made, or the changed
        network has no pressure reference at all.
    """
    for change in changes:
        if baseline_bed_flow_m3_s is not None:
            network = with_targets(network, baseline_bed_flow_m3_s)
        network = change.apply(network)
    if baseline_bed_flow_m3_s is not None:
        network = with_targets(network, baseline_bed_flow_m3_s)
    fixed = ~np.isnan(network.nodes.pressure_pa)
    if changes and not fixed.any() and not (network.beds.outflow_node < 0).any():
        raise NetworkSpecError([changes[-1].locate(Problem(
            "", 0, 0, "", "after these changes no node has a fixed pressure and no bed drains to "
            "an outflow pressure, so no pressure is determined", "keep or set one fixed pressure"))])
    return network


def read_changes(fr: FieldReader, container, key: str, label: str, *, required: bool = True) -> list[Change]:
    """The list of changes under ``container[key]``; problems go to ``fr``."""
    items = fr.sequence(container, key, label, required=required)
    out = []
    for j, mapping in enumerate(items or ()):
        change = read_change(fr, mapping, f"{label}[{j}]", where=items.where(j))
        if change is not None:
            out.append(change)
    return out


def read_change(fr: FieldReader, mapping, label: str, *, where=(0, 0)) -> Change | None:
    """One change mapping ``{verb: {arguments}}``, or None (with problems recorded)."""
    if not isinstance(mapping, dict) or len(mapping) != 1:
        fr.add(where, label, "a change must be a mapping with exactly one verb, like "
               "'- narrow: {vessel: sfa, reduction: 70%, length: 2}'",
               "verbs: " + ", ".join(VERBS))
        return None
    [(verb, args)] = mapping.items()
    if verb not in VERBS:
        fr.add(mapping.key_where(verb), label, f"unknown change '{verb}'",
               near_miss(verb, VERBS) or "verbs: " + ", ".join(VERBS))
        return None
    label = f"{label} {verb}"
    line, column = mapping.key_where(verb)
    if not isinstance(args, dict):
        fr.add(mapping.where(verb), label, f"the arguments of '{verb}' must be a mapping, like "
               f"'{verb}: {{vessel: sfa, ...}}'")
        return None
    if verb == "add_vessel":
        arguments = read_new_vessel(fr, args, label)
    else:
        arguments = read_arguments(fr, verb, args, label)
    if arguments is None:
        return None
    return Change(verb, arguments, fr.file, line, column, label)


def read_arguments(fr: FieldReader, verb: str, args, label: str) -> dict | None:
    """Keyword arguments of a verb other than ``add_vessel``, in SI."""
    _, spec = VERBS[verb]
    names = BED_TARGETS if verb in BED_VERBS else ("node",) if verb == "set_boundary" else TARGETS
    before = len(fr.problems)
    fr.allow(args, names + tuple(spec), label)
    out: dict[str, object] = {}
    for key in names:
        if key not in args:
            continue
        if key in ("vessels", "beds"):
            value = args[key]
            if not isinstance(value, list) or not all(isinstance(x, (str, int)) and not isinstance(x, bool)
                                                      for x in value):
                fr.add(args.where(key), label, f"'{key}' must be a list of ids, like [a, b]")
                continue
            out[key] = [str(x) for x in value]
        else:
            out[key] = fr.text(args, key, label)
    if verb == "set_boundary" and "node" not in args:
        fr.add((args.line, args.column), label, "missing key 'node'")
    for key, (keyword, kind, options) in spec.items():
        value = fr.quantity(args, key, kind, label, **options)
        if key in args or options.get("required"):
            out[keyword] = value
    return out if len(fr.problems) == before else None


def read_new_vessel(fr: FieldReader, spec, label: str) -> dict | None:
    """The vessel mapping of ``add_vessel`` in SI; ``from``/``to`` may be ``{vessel: ID, at: f}``."""
    before = len(fr.problems)
    ends, plain = {}, _located_copy(spec)
    for key in ("from", "to"):
        value = spec.get(key)
        if isinstance(value, dict):
            item = f"{label} {key}"
            fr.allow(value, ("vessel", "at"), item)
            vessel = fr.text(value, "vessel", item, required=True, default="")
            at = fr.quantity(value, "at", "fraction", item, required=True, between=(0.0, 1.0))
            ends[key] = verbs.Join(vessel, at)
            plain[key] = f"<{key}>"
    first = len(fr.problems)
    columns, tags = read_vessels(fr, {"vessels": [plain]})
    fr.problems[first:] = [dataclasses.replace(p, item=p.item.replace("vessels[0]", label, 1))
                           for p in fr.problems[first:]]
    if len(fr.problems) != before or not columns["id"]:
        return None
    vessel = {k: values[0] for k, values in columns.items()}
    vessel.update(ends)
    vessel["tags"] = sorted(tags)
    return {"vessel": vessel}


def _located_copy(mapping) -> LocatedDict:
    out = LocatedDict(mapping)
    out.file, out.line, out.column = mapping.file, mapping.line, mapping.column
    out._where, out._key_where = dict(mapping._where), dict(mapping._key_where)
    return out
