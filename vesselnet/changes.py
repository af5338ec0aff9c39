"""Changes to a network (SPEC section 3), each giving a new network.

Every function here takes a :class:`~vesselnet.model.Network` and returns a
new one; the input is never modified (its columns are read-only and are
only ever copied).  Vessel verbs target one ``vessel``, a list of
``vessels`` or every vessel with a ``tag``; bed verbs one ``bed`` or a list
of ``beds``.  Unknown ids raise :class:`~vesselnet.errors.NetworkSpecError`
with a near-miss suggestion; :mod:`vesselnet.changefile` adds the file
location when the change came from a file.

Examples
--------
>>> from vesselnet.model import Network
>>> net = Network.build(nodes={"r": {"pressure_pa": 12000.0}},
...     vessels=[{"id": "a", "from": "r", "to": "t", "length_m": 0.1, "radius_m": 0.002}],
...     beds=[{"id": "organ", "node": "t", "resistance_pa_s_m3": 1e9}])
>>> narrowed = narrow(net, vessel="a", reduction=0.7, length_m=0.02)
>>> float(narrowed.vessels.stenosis_reduction[0]), float(net.vessels.stenosis_reduction[0])
(0.7, nan)
>>> grafted = add_vessel(net, {"id": "g", "from": Join("a", 0.25), "to": "t",
...                            "length_m": 0.1, "radius_m": 0.001})
>>> grafted.vessels.ids, [round(float(x), 3) for x in grafted.vessels.length_m]
(('a.1', 'a.2', 'g'), [0.025, 0.075, 0.1])
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from .errors import NetworkSpecError, Problem
from .fields import near_miss
from .model import NAN, Network


NEW_VESSEL_DEFAULTS = {"wall_poisson": 0.5, "stenosis_at": 0.5, "external_pressure_pa": 0.0,
                       "distensible": False, "occluded": False, "line": 0}
"""Values of an added vessel's columns when not given (as in :meth:`Network.build`)."""


@dataclass(frozen=True)
class Join:
    """A point part-way along a vessel: ``at`` (0..1) from its ``from`` end."""

    vessel: str
    at: float


def fail(message: str, fix: str = "", item: str = "") -> NetworkSpecError:
    """The error for a change that cannot be applied (located later by its file)."""
    return NetworkSpecError([Problem("", 0, 0, item, message, fix)])


# --- choosing what a change acts on -------------------------------------------------------

def vessel_rows(network: Network, *, vessel: str | None = None, vessels: Sequence[str] | None = None,
                tag: str | None = None) -> np.ndarray:
    """Rows of the vessels a change targets: exactly one of ``vessel``, ``vessels``, ``tag``."""
    given = [k for k, x in (("vessel", vessel), ("vessels", vessels), ("tag", tag)) if x is not None]
    if len(given) != 1:
        raise fail("give exactly one of 'vessel', 'vessels' and 'tag'" if given else
                   "missing the vessels to change", "name a 'vessel', a list of 'vessels' or a 'tag'")
    v = network.vessels
    if tag is not None:
        if tag not in v.tags:
            raise fail(f"no vessel carries the tag '{tag}'",
                       near_miss(tag, v.tags) or "tags in this network: " + ", ".join(sorted(v.tags)))
        return np.asarray(v.tags[tag], dtype=np.int64)
    names = [vessel] if vessel is not None else [vessels] if isinstance(vessels, str) else list(vessels)
    if not names:
        raise fail("the list of 'vessels' is empty", "name at least one vessel")
    return np.array([_vessel_row(network, str(name)) for name in names], dtype=np.int64)


def _vessel_row(network: Network, name: str) -> int:
    index = network.vessels.index
    if name in index:
        return index[name]
    pieces = [p for p in (f"{name}.1", f"{name}.2") if p in index]
    if pieces:
        raise fail(f"vessel '{name}' was split by an earlier add_vessel",
                   "refer to its pieces " + ", ".join(f"'{p}'" for p in pieces) + ", ...")
    raise fail(f"unknown vessel '{name}'", near_miss(name, index) or "check the vessel ids")


def bed_rows(network: Network, *, bed: str | None = None,
             beds: Sequence[str] | None = None) -> np.ndarray:
    """Rows of the beds a change targets: exactly one of ``bed`` and ``beds``."""
    if (bed is None) == (beds is None):
        raise fail("give exactly one of 'bed' and 'beds'", "name a 'bed' or a list of 'beds'")
    names = [bed] if bed is not None else [beds] if isinstance(beds, str) else list(beds)
    index = network.beds.index
    for name in names:
        if name not in index:
            raise fail(f"unknown bed '{name}'", near_miss(name, index) or "check the bed ids")
    if not names:
        raise fail("the list of 'beds' is empty", "name at least one bed")
    return np.array([index[name] for name in names], dtype=np.int64)


def _node_row(network: Network, name: str) -> int:
    index = network.nodes.index
    if name not in index:
        raise fail(f"unknown node '{name}'", near_miss(name, index) or "check the node ids")
    return index[name]


def _set(column: np.ndarray, rows, values) -> np.ndarray:
    out = np.array(column, copy=True)
    out[rows] = values
    return out


def _with_vessels(network: Network, **columns) -> Network:
    return dataclasses.replace(network, vessels=dataclasses.replace(network.vessels, **columns))


def _with_beds(network: Network, **columns) -> Network:
    return dataclasses.replace(network, beds=dataclasses.replace(network.beds, **columns))


def _positive(name: str, value: float) -> float:
    if not (isinstance(value, (int, float)) and math.isfinite(value) and value > 0):
        raise fail(f"{name} must be a number > 0, got {value!r}")
    return float(value)


# --- the verbs -----------------------------------------------------------------------------

def narrow(network: Network, *, reduction: float, length_m: float, at: float = 0.5,
           vessel=None, vessels=None, tag=None) -> Network:
    """Add or replace a lesion (Young-Tsai, :mod:`vesselnet.stenosis`) on the targeted vessels.

    ``reduction`` is the diameter reduction (0 <= reduction < 1), ``length_m``
    the lesion length (no longer than the vessel), ``at`` the position of its
    centre along the vessel (0 at ``from``, 1 at ``to``).
    """
    rows = vessel_rows(network, vessel=vessel, vessels=vessels, tag=tag)
    if not 0 <= reduction < 1:
        raise fail(f"reduction must be at least 0 and below 1, got {reduction:g}",
                   "a diameter reduction, like 0.7 or 70%; close a vessel with 'occlude'")
    if not 0 <= at <= 1:
        raise fail(f"at must be between 0 and 1, got {at:g}", "a fraction of the vessel's length")
    _positive("length", length_m)
    v = network.vessels
    too_long = rows[v.length_m[rows] < length_m]
    if len(too_long):
        raise fail(f"the lesion ({100 * length_m:g} cm) is longer than vessel "
                   f"'{v.ids[too_long[0]]}' ({100 * v.length_m[too_long[0]]:g} cm)", "shorten it")
    return _with_vessels(network, stenosis_reduction=_set(v.stenosis_reduction, rows, reduction),
                         stenosis_length_m=_set(v.stenosis_length_m, rows, length_m),
                         stenosis_at=_set(v.stenosis_at, rows, at))


def occlude(network: Network, *, vessel=None, vessels=None, tag=None) -> Network:
    """Close the targeted vessels completely (they carry no flow)."""
    rows = vessel_rows(network, vessel=vessel, vessels=vessels, tag=tag)
    return _with_vessels(network, occluded=_set(network.vessels.occluded, rows, True))


def scale_radius(network: Network, *, factor: float, vessel=None, vessels=None, tag=None) -> Network:
    """Constrict (``factor`` < 1) or dilate (> 1) the targeted vessels.

    Both end radii scale; a lesion keeps its diameter reduction, so its
    throat scales too.  Poiseuille resistance scales by factor^-4.
    """
    rows = vessel_rows(network, vessel=vessel, vessels=vessels, tag=tag)
    _positive("factor", factor)
    v = network.vessels
    return _with_vessels(network, radius_in_m=_set(v.radius_in_m, rows, v.radius_in_m[rows] * factor),
                         radius_out_m=_set(v.radius_out_m, rows, v.radius_out_m[rows] * factor))


def scale_bed(network: Network, *, factor: float, bed=None, beds=None) -> Network:
    """Scale the targeted beds' resistance by ``factor``.

    An autoregulating bed scales as a whole: its resting and minimum
    resistances by ``factor`` and an explicit target flow by 1 / ``factor``,
    so that at an unchanged perfusion pressure it draws 1 / ``factor`` the
    flow, as a fixed bed does.
    """
    rows = bed_rows(network, bed=bed, beds=beds)
    _positive("factor", factor)
    b = network.beds
    return _with_beds(network,
                      resistance_pa_s_m3=_set(b.resistance_pa_s_m3, rows, b.resistance_pa_s_m3[rows] * factor),
                      min_resistance_pa_s_m3=_set(b.min_resistance_pa_s_m3, rows,
                                                  b.min_resistance_pa_s_m3[rows] * factor),
                      target_flow_m3_s=_set(b.target_flow_m3_s, rows, b.target_flow_m3_s[rows] / factor))


def autoregulate(network: Network, *, bed=None, beds=None, min_resistance_pa_s_m3: float | None = None,
                 reserve: float | None = None, target_flow_m3_s: float | None = None) -> Network:
    """Make the targeted beds autoregulate (:mod:`vesselnet.autoregulation`).

    Give the fully dilated resistance ``min_resistance_pa_s_m3`` or the
    ``reserve`` (resting over minimum resistance, >= 1).  Without
    ``target_flow_m3_s`` the bed holds its baseline flow (resolved by
    :func:`vesselnet.changefile.apply_changes` from the baseline solve).
    """
    rows = bed_rows(network, bed=bed, beds=beds)
    b = network.beds
    if (min_resistance_pa_s_m3 is None) == (reserve is None):
        raise fail("give exactly one of 'min_resistance' and 'reserve'",
                   "'reserve' is the resting over the fully dilated resistance, for example 4")
    if reserve is not None:
        if not _positive("reserve", reserve) >= 1:
            raise fail(f"reserve must be at least 1, got {reserve:g}")
        minimum = b.resistance_pa_s_m3[rows] / reserve
    else:
        minimum = np.full(len(rows), _positive("min_resistance", min_resistance_pa_s_m3))
        above = rows[minimum > b.resistance_pa_s_m3[rows]]
        if len(above):
            raise fail(f"min_resistance is above the resting resistance of bed '{b.ids[above[0]]}'",
                       "the fully dilated bed resists less than the resting one")
    target = NAN if target_flow_m3_s is None else _positive("target_flow", target_flow_m3_s)
    return _with_beds(network, min_resistance_pa_s_m3=_set(b.min_resistance_pa_s_m3, rows, minimum),
                      target_flow_m3_s=_set(b.target_flow_m3_s, rows, target))


def set_boundary(network: Network, *, node: str, pressure_pa: float | None = None,
                 inflow_m3_s: float | None = None) -> Network:
    """Fix a node's pressure or prescribe its (steady) inflow, replacing what it had."""
    row = _node_row(network, node)
    if (pressure_pa is None) == (inflow_m3_s is None):
        raise fail("give exactly one of 'pressure' and 'inflow'")
    n = network.nodes
    value = pressure_pa if pressure_pa is not None else inflow_m3_s
    if not (isinstance(value, (int, float)) and math.isfinite(value)):
        raise fail(f"the boundary value must be a finite number, got {value!r}")
    pressure = _set(n.pressure_pa, row, NAN if pressure_pa is None else pressure_pa)
    inflow = _set(n.inflow_m3_s, row, NAN if inflow_m3_s is None else inflow_m3_s)
    waves = {k: w for k, w in n.inflow_waveforms.items() if k != row}
    nodes = dataclasses.replace(n, pressure_pa=pressure, inflow_m3_s=inflow, inflow_waveforms=waves)
    return dataclasses.replace(network, nodes=nodes)


def remove_vessel(network: Network, *, vessel=None, vessels=None, tag=None) -> Network:
    """Take the targeted vessels out (their nodes stay, with whatever else joins them)."""
    rows = vessel_rows(network, vessel=vessel, vessels=vessels, tag=tag)
    keep = np.setdiff1d(np.arange(len(network.vessels)), rows)
    return dataclasses.replace(network, vessels=_take_vessels(network.vessels, keep))


def add_vessel(network: Network, vessel: Mapping[str, object]) -> Network:
    """Add a vessel (graft, collateral, shunt); its ends may join part-way along vessels.

    Parameters
    ----------
    network : Network
    vessel : mapping
        Like an item of :meth:`Network.build` (SI keys: ``id``, ``from``,
        ``to``, ``length_m``, ``radius_m`` or ``radius_in_m``/``radius_out_m``,
        optional wall, stenosis and ``tags``).  ``from`` and ``to`` are node
        ids or :class:`Join` points; a join splits its vessel there (see
        :func:`split_vessel`), at 0 or 1 it is the vessel's end node.

    Returns
    -------
    Network
    """
    item = {**NEW_VESSEL_DEFAULTS, **vessel}
    vid = str(item.get("id", ""))
    if not vid:
        raise fail("the new vessel needs an 'id'")
    if vid in network.vessels.index:
        raise fail(f"a vessel '{vid}' already exists", "give the new vessel its own id")
    ends = {"from": item.get("from"), "to": item.get("to")}
    joins: dict[str, list[float]] = {}
    for end in ends.values():
        if isinstance(end, Join):
            _vessel_row(network, end.vessel)
            if not 0 <= end.at <= 1:
                raise fail(f"'at' must be between 0 and 1, got {end.at:g}")
            joins.setdefault(end.vessel, []).append(end.at)
    where: dict[tuple[str, float], str] = {}
    for name, fractions in joins.items():
        v = network.vessels
        row = v.index[name]
        inner = sorted({f for f in fractions if 0 < f < 1})
        ends_of = {0.0: network.nodes.ids[v.from_node[row]], 1.0: network.nodes.ids[v.to_node[row]]}
        if inner:
            network, nodes = split_vessel(network, name, inner)
            ends_of.update(zip(inner, nodes))
        for f in fractions:
            where[(name, f)] = ends_of[f]
    for key, end in ends.items():
        if isinstance(end, Join):
            ends[key] = where[(end.vessel, end.at)]
        elif end is None:
            raise fail(f"the new vessel needs '{key}'")
        else:
            _node_row(network, str(end))
    if ends["from"] == ends["to"]:
        raise fail(f"the new vessel starts and ends at node '{ends['from']}'", "join two different points")
    _positive("length", item.get("length_m", NAN))
    radius = item.pop("radius_m", None)
    r_in = item.get("radius_in_m", radius)
    r_out = item.get("radius_out_m", radius)
    for r in (r_in, r_out):
        _positive("radius", NAN if r is None else r)
    lesion = item.get("stenosis_length_m", NAN)
    if np.isfinite(lesion) and lesion > item["length_m"]:
        raise fail("the new vessel's lesion is longer than the vessel", "shorten the lesion")
    index = network.nodes.index
    row = {**item, "from_node": index[str(ends["from"])], "to_node": index[str(ends["to"])],
           "radius_in_m": r_in, "radius_out_m": r_out}
    tags = tuple(row.pop("tags", ()) or ())
    n = len(network.vessels)
    vessels = _append_rows(network.vessels, 1, {k: [x] for k, x in row.items()
                                                 if k not in ("id", "from", "to")}, (vid,))
    merged = {t: np.append(r, n) if t in tags else r for t, r in vessels.tags.items()}
    merged.update({t: np.array([n], dtype=np.int64) for t in tags if t not in merged})
    vessels = dataclasses.replace(vessels, tags={t: _frozen(r) for t, r in sorted(merged.items())})
    return dataclasses.replace(network, vessels=vessels)


def split_vessel(network: Network, vessel: str, fractions: Sequence[float]) -> tuple[Network, tuple[str, ...]]:
    """Split a vessel at ``fractions`` of its length into pieces ``<id>.1``, ``<id>.2``, ...

    Lengths add up to the original, radii follow its linear taper, and the
    wall, tags and state are copied; a lesion goes to the piece that holds
    it (a split point inside a lesion is an error).  The new nodes are named
    ``<id>@<fraction>`` and placed on the straight line between the ends.
    Splitting alone leaves the steady solution unchanged.

    Returns
    -------
    (Network, tuple of str)
        The new network and the ids of the new nodes, in order along the vessel.
    """
    row = _vessel_row(network, vessel)
    cuts = np.array(sorted(float(f) for f in fractions))
    if not len(cuts) or cuts[0] <= 0 or cuts[-1] >= 1 or np.any(np.diff(cuts) <= 0):
        raise fail(f"split points must be distinct and strictly between 0 and 1, got {list(fractions)}")
    v, nodes = network.vessels, network.nodes
    node_ids = tuple(f"{vessel}@{f:g}" for f in cuts)
    piece_ids = tuple(f"{vessel}.{k + 1}" for k in range(len(cuts) + 1))
    for name in node_ids:
        if name in nodes.index:
            raise fail(f"node '{name}' already exists", "split at another fraction")
    for name in piece_ids:
        if name in v.index:
            raise fail(f"vessel '{name}' already exists", "rename it before splitting")
    length = v.length_m[row]
    bounds = np.concatenate([[0.0], cuts, [1.0]])
    r_in, r_out = v.radius_in_m[row], v.radius_out_m[row]
    radii = r_in + (r_out - r_in) * bounds
    lesion_piece, lesion_at = -1, NAN
    if not np.isnan(v.stenosis_reduction[row]):
        ls = v.stenosis_length_m[row]
        start = min(max(v.stenosis_at[row] * length - ls / 2, 0.0), length - ls)
        inside = (cuts * length > start * (1 + 1e-12)) & (cuts * length < (start + ls) * (1 - 1e-12))
        if inside.any():
            raise fail(f"cannot join at {cuts[inside][0]:g} along '{vessel}': that is inside its lesion "
                       f"({start / length:.3g} to {(start + ls) / length:.3g})",
                       "join before or after the lesion")
        lesion_piece = int(np.searchsorted(bounds * length, start + ls / 2) - 1)
        lesion_at = (start + ls / 2 - bounds[lesion_piece] * length) / (
            (bounds[lesion_piece + 1] - bounds[lesion_piece]) * length)
    n_new = len(cuts)
    p_from, p_to = nodes.position_m[v.from_node[row]], nodes.position_m[v.to_node[row]]
    positions = p_from + np.outer(cuts, p_to - p_from)
    nodes = _append_rows(nodes, n_new, {"pressure_pa": [NAN] * n_new, "inflow_m3_s": [NAN] * n_new,
                                        "position_m": positions, "target_pressure_pa": [NAN] * n_new,
                                        "line": [v.line[row]] * n_new}, node_ids)
    first_node = len(network.nodes)
    k = len(piece_ids)
    source = np.concatenate([np.arange(row), np.full(k, row), np.arange(row + 1, len(v))])
    pieces = _take_vessels(v, source)
    at = slice(row, row + k)
    ends = np.concatenate([[v.from_node[row]], first_node + np.arange(n_new), [v.to_node[row]]])
    reduction = np.full(k, NAN)
    lesion_length = np.full(k, NAN)
    lesion_position = np.full(k, 0.5)
    if lesion_piece >= 0:
        reduction[lesion_piece] = v.stenosis_reduction[row]
        lesion_length[lesion_piece] = min(v.stenosis_length_m[row],
                                          length * (bounds[lesion_piece + 1] - bounds[lesion_piece]))
        lesion_position[lesion_piece] = lesion_at
    columns = {"from_node": ends[:-1], "to_node": ends[1:], "length_m": length * np.diff(bounds),
               "radius_in_m": radii[:-1], "radius_out_m": radii[1:], "stenosis_reduction": reduction,
               "stenosis_length_m": lesion_length, "stenosis_at": lesion_position}
    replaced = {name: _set(getattr(pieces, name), at, values) for name, values in columns.items()}
    ids = pieces.ids[:row] + piece_ids + pieces.ids[row + k:]
    pieces = dataclasses.replace(pieces, ids=ids, **replaced)
    return dataclasses.replace(network, nodes=nodes, vessels=pieces), node_ids


# --- columnar row operations (generic over the section's columns) ---------------------------

def _frozen(rows) -> np.ndarray:
    out = np.array(rows, dtype=np.int64)
    out.flags.writeable = False
    return out


def _take_vessels(vessels, source: np.ndarray):
    """Vessels rows ``source`` (repeats allowed), every column and tag following its rows."""
    columns = {f.name: getattr(vessels, f.name)[source] for f in dataclasses.fields(vessels)
               if isinstance(getattr(vessels, f.name), np.ndarray)}
    tags = {}
    for tag, rows in vessels.tags.items():
        member = np.zeros(len(vessels), dtype=bool)
        member[rows] = True
        kept = np.flatnonzero(member[source])
        if len(kept):
            tags[tag] = _frozen(kept)
    return dataclasses.replace(vessels, ids=tuple(vessels.ids[i] for i in source), tags=tags, **columns)


def _append_rows(section, count: int, values: Mapping[str, Sequence], ids: Sequence[str]):
    """``section`` with ``count`` rows added: given ``values``, neutral defaults elsewhere."""
    columns = {}
    for f in dataclasses.fields(section):
        column = getattr(section, f.name)
        if not isinstance(column, np.ndarray):
            continue
        if f.name in values:
            new = np.asarray(values[f.name], dtype=column.dtype).reshape((count,) + column.shape[1:])
        else:
            fill = NAN if column.dtype.kind == "f" else (-1 if f.name.endswith("node") else 0)
            new = np.full((count,) + column.shape[1:], fill, dtype=column.dtype)
        columns[f.name] = np.concatenate([column, new])
    return dataclasses.replace(section, ids=tuple(section.ids) + tuple(ids), **columns)
