"""Graft plan files (SPEC section 3): a network, its diseased state, targets and candidate grafts.

```yaml
vesselnet: 1
name: Femoral occlusion, bypass options
network: leg.yaml                # relative to this file
units: {length: cm}              # optional: units of the numbers below
territory: infrainguinal         # optional: which graft-flow thresholds apply (graftflags)
condition:                       # the diseased state: changes of SPEC section 3
  - occlude: {vessels: [sfa_mid, sfa_dist]}
targets: [foot, calf_muscle_deep]    # beds whose flow the graft should restore
candidates:                      # each an add_vessel mapping with an id, plus:
  - id: cfa_to_popliteal_vein
    from: {vessel: common_femoral, at: 0.7}
    to: {vessel: popliteal_ak, at: 0.5}
    radius: 2.0
    routing_factor: 1.1          # length = straight distance between the ends x 1.1
    conduit: vein-autologous     # wall from a preset (conduits.CONDUITS)
robustness: {samples: 200, seed: 4711}   # optional
```

A candidate gives ``length`` or ``routing_factor`` (>= 1, with node
positions in the network; a part-way end lies on the straight line between
its vessel's end nodes).  ``conduit`` fills the wall thickness and modulus
unless the candidate's ``wall`` gives them.  Reading applies the condition
and then each candidate to it, so every id is checked and problems are
reported at their lines.

Examples
--------
>>> from vesselnet.demos import demo_path
>>> plan = load_plan(demo_path("leg_graft_plan"))
>>> len(plan.condition) > 0, len(plan.candidates) >= 4, plan.territory
(True, True, 'infrainguinal')
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from . import yamlread
from .changefile import Change, apply_changes, read_changes, read_new_vessel
from .changes import Join
from .conduits import CONDUITS, conduit_wall
from .errors import NetworkSpecError
from .fields import FieldReader, near_miss
from .graftflags import TERRITORIES
from .model import Network
from .reader import begin_file, load_network
from .yamlread import LocatedDict

TOP_KEYS = ("vesselnet", "name", "description", "units", "network", "territory", "condition",
            "targets", "candidates", "robustness")
CANDIDATE_KEYS = ("conduit", "routing_factor", "description")
"""Candidate keys beyond those of an ``add_vessel`` mapping."""

GRAFT_TAG = "graft"
"""Tag every candidate vessel carries (besides its own tags)."""

DEFAULT_SAMPLES = 200
DEFAULT_SEED = 20240917
"""Robustness sampling defaults (a plan's ``robustness:`` or the command line override them)."""


@dataclass(frozen=True)
class Candidate:
    """One candidate graft: the ``add_vessel`` change that makes it, and what it is made of.

    ``length_m`` is the given length or the routed one; ``routing_factor``
    is NaN when the length was given.  ``conduit`` is a preset name or ''.
    """

    id: str
    change: Change
    conduit: str = ""
    description: str = ""
    routing_factor: float = math.nan

    @property
    def vessel(self) -> dict:
        """The vessel mapping of the change (SI keys, ends as node ids or :class:`Join`)."""
        return self.change.arguments["vessel"]

    @property
    def length_m(self) -> float:
        """Graft length (m), given or routed."""
        return float(self.vessel["length_m"])

    @property
    def conduit_kind(self) -> str:
        """``vein``, ``artery``, ``synthetic`` or '' (no preset named)."""
        return CONDUITS[self.conduit].kind if self.conduit else ""

    @property
    def min_diameter_m(self) -> float:
        """Smallest lumen diameter along the graft (m)."""
        return 2.0 * min(float(self.vessel["radius_in_m"]), float(self.vessel["radius_out_m"]))


@dataclass(frozen=True, eq=False)
class Plan:
    """A read graft plan (SI).

    Attributes
    ----------
    source, name, description : str
    network : Network
        The healthy network.
    condition : tuple of Change
        The changes that make the diseased state.
    targets : tuple of str
        Bed ids whose flow a graft should restore.
    candidates : tuple of Candidate
        In file order (the ranking does not depend on it).
    territory : str
        Key of :data:`vesselnet.graftflags.TERRITORIES`, or ''.
    samples, seed : int
        Robustness sampling (0 samples: none).
    """

    source: str
    name: str
    network: Network
    condition: tuple[Change, ...]
    targets: tuple[str, ...]
    candidates: tuple[Candidate, ...]
    territory: str = ""
    description: str = ""
    samples: int = DEFAULT_SAMPLES
    seed: int = DEFAULT_SEED
    where: dict = field(default_factory=dict)

    @property
    def target_rows(self) -> np.ndarray:
        """Bed rows of the targets (beds keep their rows under every change)."""
        index = self.network.beds.index
        return np.array([index[t] for t in self.targets], dtype=np.int64)

    def diseased_network(self, baseline_bed_flow_m3_s=None) -> Network:
        """The network with the condition applied (see :func:`vesselnet.changefile.apply_changes`)."""
        return apply_changes(self.network, self.condition, baseline_bed_flow_m3_s=baseline_bed_flow_m3_s)

    def grafted_network(self, candidate: Candidate, baseline_bed_flow_m3_s=None) -> Network:
        """The diseased network with ``candidate`` added."""
        return apply_changes(self.network, self.condition + (candidate.change,),
                             baseline_bed_flow_m3_s=baseline_bed_flow_m3_s)


def load_plan(path) -> Plan:
    """Read a plan file and the network it names.

    Raises
    ------
    NetworkSpecError
        Every problem of the plan (located), or those of the network file.
    """
    path = Path(path)
    return read_plan(yamlread.load_file(path), str(path), path.parent)


def read_plan_text(text: str, file: str = "<input>", base_dir=".") -> Plan:
    """Like :func:`load_plan`, from YAML text (the network path is relative to ``base_dir``)."""
    return read_plan(yamlread.load_text(text, file), file, Path(base_dir))


def read_plan(doc, file: str, base_dir: Path) -> Plan:
    """A plan from a parsed document (see :mod:`vesselnet.yamlread`)."""
    fr = begin_file(doc, file, TOP_KEYS,
                    "start it with 'vesselnet: 1', 'network:', 'condition:', "
                                        "'targets:' and 'candidates:'")
    network_path = fr.text(doc, "network", "network", required=True)
    territory = fr.text(doc, "territory", "territory", default="")
    if territory and territory not in TERRITORIES:
        fr.add(doc.where("territory"), "territory", f"unknown territory '{territory}'",
               near_miss(territory, TERRITORIES) or "use one of " + ", ".join(TERRITORIES))
        territory = ""
    condition = read_changes(fr, doc, "condition", "condition", required=True)
    if isinstance(doc.get("condition"), list) and not doc["condition"]:
        fr.add(doc.where("condition"), "condition", "the condition lists no changes",
               "describe the diseased state, for example '- occlude: {vessel: sfa_mid}'")
    targets = _read_targets(fr, doc)
    samples, seed = _read_robustness(fr, doc)
    candidates = _read_candidates(fr, doc)
    network = None
    if network_path:
        target = base_dir / network_path
        if target.is_file():
            network = load_network(target)
        else:
            fr.add(doc.where("network"), "network", f"network file '{network_path}' not found "
                   f"(looked for {target})", "give the path relative to this plan file")
    if network is not None:
        for k, name in enumerate(targets):
            if name not in network.beds.index:
                fr.add(doc["targets"].where(k) if isinstance(doc["targets"], list) else doc.where("targets"),
                       "targets", f"unknown bed '{name}'",
                       near_miss(name, network.beds.index) or "targets are bed ids of the network")
    fr.raise_if_any()
    diseased = apply_changes(network, tuple(condition))
    candidates = _resolve(fr, candidates, diseased)
    fr.raise_if_any()
    problems = []
    for candidate in candidates:
        try:
            candidate.change.apply(diseased)
        except NetworkSpecError as exc:
            problems.extend(exc.problems)
    if problems:
        raise NetworkSpecError(problems)
    title = fr.text(doc, "name", "name", default=Path(file).stem) or Path(file).stem
    return Plan(source=file, name=title, network=network, condition=tuple(condition),
                targets=tuple(targets), candidates=tuple(candidates), territory=territory,
                description=fr.text(doc, "description", "description", default=""),
                samples=samples, seed=seed, where={"condition": doc.where("condition"),
                                                   "targets": doc.where("targets")})


def _read_targets(fr: FieldReader, doc) -> list[str]:
    value = doc.get("targets")
    if isinstance(value, str):
        return [fr.text(doc, "targets", "targets")]
    items = fr.sequence(doc, "targets", "targets", required=True)
    if items is None:
        return []
    if not items:
        fr.add(doc.where("targets"), "targets", "no target beds", "name the beds a graft should restore")
    out = []
    for k, name in enumerate(items):
        if isinstance(name, bool) or not isinstance(name, (str, int)):
            fr.add(items.where(k), "targets", "a target must be a bed id")
            continue
        if str(name) in out:
            fr.add(items.where(k), "targets", f"bed '{name}' is named twice", "name each bed once")
            continue
        out.append(str(name))
    return out


def _read_robustness(fr: FieldReader, doc) -> tuple[int, int]:
    spec = fr.mapping(doc, "robustness", "robustness")
    if spec is None:
        return DEFAULT_SAMPLES, DEFAULT_SEED
    fr.allow(spec, ("samples", "seed"), "robustness")
    samples = fr.integer(spec, "samples", "robustness", default=DEFAULT_SAMPLES)
    seed = fr.integer(spec, "seed", "robustness", default=DEFAULT_SEED)
    if samples is not None and samples < 0:
        fr.add(spec.where("samples"), "robustness", f"samples must be >= 0, got {samples}",
               "0 switches the robustness check off")
    if seed is not None and seed < 0:
        fr.add(spec.where("seed"), "robustness", f"seed must be >= 0, got {seed}")
    return int(samples or 0), int(seed if seed is not None else DEFAULT_SEED)


@dataclass
class _Read:
    """A candidate as read, before its length is routed."""

    index: int
    label: str
    vessel: dict
    where: tuple[int, int]
    conduit: str
    description: str
    routing_factor: float


def _read_candidates(fr: FieldReader, doc) -> list[_Read]:
    items = fr.sequence(doc, "candidates", "candidates", required=True)
    if items is not None and not items:
        fr.add(doc.where("candidates"), "candidates", "the plan lists no candidates", "add at least one")
    out, seen = [], {}
    for i, item in enumerate(items or ()):
        label = f"candidates[{i}]"
        if not isinstance(item, dict):
            fr.add(items.where(i), label, "a candidate must be an add_vessel mapping with an 'id'")
            continue
        cid = fr.text(item, "id", label, required=True, default="")
        label = f"candidates[{i}] '{cid}'" if cid else label
        if cid in seen:
            fr.add(item.where("id"), label, f"duplicate candidate id (also candidates[{seen[cid]}])",
                   "give each candidate its own id")
        seen.setdefault(cid, i)
        read = _read_candidate(fr, item, i, label)
        if read is not None and cid:
            out.append(read)
    return out


def _read_candidate(fr: FieldReader, item, i: int, label: str) -> _Read | None:
    before = len(fr.problems)
    conduit = fr.text(item, "conduit", label, default="")
    if conduit and conduit not in CONDUITS:
        fr.add(item.where("conduit"), label, f"unknown conduit '{conduit}'",
               near_miss(conduit, CONDUITS) or "presets: " + ", ".join(CONDUITS))
        conduit = ""
    routing = fr.quantity(item, "routing_factor", "fraction", label)
    if "routing_factor" in item and not routing >= 1:
        fr.add(item.where("routing_factor"), label, f"routing_factor must be >= 1, got {item['routing_factor']!r}",
               "the graft is at least as long as the straight line between its ends")
    if ("length" in item) == ("routing_factor" in item):
        fr.add((item.line, item.column), label,
               "give exactly one of 'length' and 'routing_factor'" if "length" in item else
               "missing key 'length'",
               "" if "length" in item else "add 'length:' or 'routing_factor:' (length = straight "
               "distance between the ends x routing_factor)")
    plain = _located_copy(item, drop=CANDIDATE_KEYS)
    if "length" not in plain:
        plain["length"] = 1.0                      # a placeholder, replaced by the routed length
    read = read_new_vessel(fr, plain, label)
    if read is None or len(fr.problems) != before:
        return None
    vessel = read["vessel"]
    if GRAFT_TAG not in vessel["tags"]:
        vessel["tags"] = sorted(vessel["tags"] + [GRAFT_TAG])
    if conduit:
        radius = 0.5 * (vessel["radius_in_m"] + vessel["radius_out_m"])
        for key, value in conduit_wall(conduit, radius_m=radius).items():
            if not np.isfinite(vessel[key]):
                vessel[key] = value
    return _Read(i, label, vessel, (item.line, item.column), conduit,
                 fr.text(item, "description", label, default=""), routing)


def _resolve(fr: FieldReader, reads: list[_Read], diseased: Network) -> list[Candidate]:
    """Candidates with routed lengths, as located add_vessel changes."""
    out = []
    for read in reads:
        vessel = dict(read.vessel)
        if np.isfinite(read.routing_factor):
            ends = [_position(diseased, vessel[key]) for key in ("from", "to")]
            if any(p is None for p in ends):
                continue                           # unknown vessel or node: applying reports it
            missing = [str(vessel[k]) for k, p in zip(("from", "to"), ends) if not np.isfinite(p).all()]
            if missing:
                fr.add(read.where, read.label, "routing_factor needs node positions, and "
                       + " and ".join(f"'{m}'" for m in missing) + " has none",
                       "give 'length:' instead, or positions to the nodes in the network file")
                continue
            distance = float(np.linalg.norm(ends[1] - ends[0]))
            if not distance > 0:
                fr.add(read.where, read.label, "the graft's ends are at the same position, so "
                       "routing_factor gives no length", "give 'length:'")
                continue
            vessel["length_m"] = distance * read.routing_factor
        change = Change("add_vessel", {"vessel": vessel}, fr.file, read.where[0], read.where[1],
                        read.label)
        out.append(Candidate(str(vessel["id"]), change, read.conduit, read.description,
                             read.routing_factor))
    return out


def _position(network: Network, end) -> np.ndarray | None:
    """Position (m) of a node id or of a point part-way along a vessel; None if unknown."""
    nodes = network.nodes
    if isinstance(end, Join):
        row = network.vessels.index.get(end.vessel)
        if row is None:
            return None
        v = network.vessels
        a, b = nodes.position_m[v.from_node[row]], nodes.position_m[v.to_node[row]]
        return a + end.at * (b - a)
    row = nodes.index.get(str(end))
    return None if row is None else np.asarray(nodes.position_m[row], dtype=float)


def _located_copy(mapping, *, drop=()) -> LocatedDict:
    out = LocatedDict({k: v for k, v in mapping.items() if k not in drop})
    out.file, out.line, out.column = mapping.file, mapping.line, mapping.column
    out._where, out._key_where = dict(mapping._where), dict(mapping._key_where)
    return out


def check_plan_file(path) -> str:
    """Validate a plan file: read it and its network, make the condition and every candidate.

    Returns
    -------
    str
        A one-line description of the valid plan.

    Raises
    ------
    NetworkSpecError
        Every problem found, located.
    """
    plan = load_plan(path)
    ids = ", ".join(f"'{c.id}'" for c in plan.candidates[:6])
    more = f" and {len(plan.candidates) - 6} more" if len(plan.candidates) > 6 else ""
    return (f"{path}: valid plan file '{plan.name}' on network '{plan.network.name}': condition of "
            f"{len(plan.condition)} change(s), {len(plan.targets)} target bed(s), "
            f"{len(plan.candidates)} candidate(s): {ids}{more}")
