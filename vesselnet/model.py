"""The network as plain, frozen data in SI units.

A network is columnar: each section (nodes, vessels, beds) is a frozen
dataclass of equally long, read-only columns, one row an item, in input
order.  Columns rather than one object per vessel keep 10^6-segment networks
cheap to build, copy and lower; :meth:`Vessels.row` gives a record view of one
item when that is handier.  Missing optional values are NaN (numbers) or -1
(node references).  Nothing here solves; solvers take a :class:`Network` and
never change it.

Examples
--------
>>> net = Network.build(
...     nodes={"root": {"pressure_pa": 12000.0}},
...     vessels=[{"id": "a", "from": "root", "to": "tip", "length_m": 0.1, "radius_m": 0.002}],
...     beds=[{"id": "organ", "node": "tip", "resistance_pa_s_m3": 1e9}])
>>> net.nodes.ids, net.vessels.ids, net.beds.ids
(('root', 'tip'), ('a',), ('organ',))
>>> net.vessels.row(0)["radius_in_m"]
0.002
"""

from __future__ import annotations

import dataclasses
import functools
import itertools
import operator
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Union

import numpy as np

NAN = float("nan")


class Ids(Sequence):
    """Item ids held as a numpy ``str`` array, a tuple of Python strings only when asked.

    Behaves as the tuple it stands for (``==``, ``hash``, ``repr``, ``+``,
    ``in``, slicing), so code may treat ``section.ids`` as a tuple; but its
    length, single items and ``numpy.asarray`` need no Python strings, and a
    10^6-vessel binary network reads without making any.

    >>> ids = Ids(np.array(["a", "b"]))
    >>> len(ids), ids[1], ids == ("a", "b"), ids
    (2, 'b', True, ('a', 'b'))
    """

    __slots__ = ("array", "_tuple")

    def __init__(self, array: np.ndarray):
        self.array = array
        self._tuple: tuple[str, ...] | None = None

    @property
    def as_tuple(self) -> tuple[str, ...]:
        if self._tuple is None:
            self._tuple = tuple(self.array.tolist())
        return self._tuple

    def __len__(self) -> int:
        return len(self.array)

    def __getitem__(self, i):
        if self._tuple is not None or isinstance(i, slice):
            return self.as_tuple[i]
        return str(self.array[operator.index(i)])     # an integer, as a tuple takes

    def __iter__(self):
        return iter(self.as_tuple)

    def __contains__(self, item) -> bool:
        return item in self.as_tuple

    def __eq__(self, other) -> bool:
        if isinstance(other, Ids):
            other = other.as_tuple
        return self.as_tuple == other if isinstance(other, tuple) else NotImplemented

    def __hash__(self) -> int:
        return hash(self.as_tuple)

    def __repr__(self) -> str:
        return repr(self.as_tuple)

    def __add__(self, other):
        return self.as_tuple + tuple(other)

    def __radd__(self, other):
        return tuple(other) + self.as_tuple

    def index(self, item, *args) -> int:
        return self.as_tuple.index(item, *args)

    def count(self, item) -> int:
        return self.as_tuple.count(item)

    def __array__(self, dtype=None, copy=None):
        return self.array if dtype is None else self.array.astype(dtype)

    def __reduce__(self):
        return Ids, (self.array,)


IdSequence = Union[tuple, Ids]


def _ids(values) -> IdSequence:
    """``Ids`` for a numpy string array, else a tuple of strings."""
    if isinstance(values, np.ndarray) and values.dtype.kind == "U":
        if values.flags.writeable:
            values = values.copy()
            values.flags.writeable = False
        return Ids(values)
    return tuple(map(str, values))


class _LazyIndex(dict):
    """id -> row, built on first lookup (binary input maps no ids at all)."""

    def __init__(self, ids):
        super().__init__()
        self._ids = ids

    def __missing__(self, key):
        if len(self) < len(self._ids):
            self.update(zip(self._ids, range(len(self._ids))))
            return self[key]
        raise KeyError(key)


def _rows(index: Mapping[str, int], ids) -> np.ndarray:
    """Rows of ``ids`` in ``index``: one C-level pass of lookups (``operator.itemgetter``,
    the fastest here; ids that are not text are looked up by their ``str``)."""
    if len(ids) > 1:
        try:
            return np.array(operator.itemgetter(*ids)(index), dtype=np.int64)
        except (KeyError, TypeError):
            pass
    return np.fromiter(map(index.__getitem__, map(str, ids)), dtype=np.int64, count=len(ids))


def _is_rows(values) -> bool:
    """Whether a node column already holds rows (an integer array) rather than ids."""
    return isinstance(values, np.ndarray) and values.dtype.kind in "iu"


def _constant(n: int, value, dtype) -> np.ndarray:
    """A read-only column of one value that takes no memory (a broadcast view)."""
    return np.broadcast_to(np.array(value, dtype=dtype), (n,))


def _frozen_array(values, dtype) -> np.ndarray:
    array = np.array(values, dtype=dtype)
    array.flags.writeable = False
    return array


@dataclass(frozen=True)
class Blood:
    """Blood properties (SI).

    ``viscosity_law`` is ``constant`` (``viscosity_pa_s`` everywhere) or a
    diameter- and hematocrit-dependent law named in the network file.
    """

    viscosity_pa_s: float = 3.5e-3
    viscosity_law: str = "constant"
    plasma_viscosity_pa_s: float = 1.2e-3
    density_kg_m3: float = 1060.0
    hematocrit: float = 0.45
    separation: str = "none"


class _Columns:
    """Shared behaviour of the columnar sections."""

    ids: IdSequence

    def __len__(self) -> int:
        return len(self.ids)

    @functools.cached_property
    def index(self) -> dict[str, int]:
        """Map from id to row."""
        return {item: row for row, item in enumerate(self.ids)}

    @functools.cached_property
    def id_array(self) -> np.ndarray:
        """The ids as a read-only numpy ``str`` array (for writers of large tables)."""
        if isinstance(self.ids, Ids):
            return self.ids.array
        return _frozen_array(self.ids, str) if len(self.ids) else np.zeros(0, dtype="U1")

    def row(self, i: int) -> dict[str, object]:
        """Item ``i`` as a dict: ``id`` and every column's value (Python scalars)."""
        out: dict[str, object] = {"id": self.ids[i]}
        for f in dataclasses.fields(self):
            value = getattr(self, f.name)
            if isinstance(value, np.ndarray):
                out[f.name] = value[i].tolist()
        return out

    def __post_init__(self):
        n = len(self.ids)
        for f in dataclasses.fields(self):
            value = getattr(self, f.name)
            if isinstance(value, np.ndarray):
                if value.shape[:1] != (n,):
                    raise ValueError(f"column {f.name} has {value.shape[0]} rows, expected {n}")
                if value.flags.writeable:
                    value = value.copy()
                    value.flags.writeable = False
                    object.__setattr__(self, f.name, value)


@dataclass(frozen=True, eq=False)
class Nodes(_Columns):
    """Junctions, inlets and outlets.

    Columns: fixed ``pressure_pa`` (NaN: free), prescribed mean ``inflow_m3_s``
    into the network (NaN: none), ``position_m`` (n, 3; NaN: not given),
    calibration ``target_pressure_pa`` (NaN: none), the source ``line``, the
    discharge ``hematocrit`` of blood entering there (NaN: the blood's).
    ``inflow_waveforms`` maps a node row to its pulsatile inflow description.
    """

    ids: IdSequence
    pressure_pa: np.ndarray
    inflow_m3_s: np.ndarray
    position_m: np.ndarray
    target_pressure_pa: np.ndarray
    line: np.ndarray
    hematocrit: np.ndarray
    inflow_waveforms: Mapping[int, Mapping[str, object]] = field(default_factory=dict)


@dataclass(frozen=True, eq=False)
class Vessels(_Columns):
    """Vessel segments, each from node ``from_node`` to node ``to_node`` (rows of Nodes).

    A linear taper runs from ``radius_in_m`` at ``from`` to ``radius_out_m``
    at ``to``.  Wall columns are NaN when not given; a stenosis is present
    where ``stenosis_reduction`` (diameter reduction, 0..1) is not NaN.
    ``occluded`` vessels carry no flow.  ``tags`` maps a tag to the sorted
    rows that carry it.
    """

    ids: IdSequence
    from_node: np.ndarray
    to_node: np.ndarray
    length_m: np.ndarray
    radius_in_m: np.ndarray
    radius_out_m: np.ndarray
    wall_thickness_m: np.ndarray
    wall_modulus_pa: np.ndarray
    wall_poisson: np.ndarray
    distensible: np.ndarray
    external_pressure_pa: np.ndarray
    stenosis_reduction: np.ndarray
    stenosis_length_m: np.ndarray
    stenosis_at: np.ndarray
    occluded: np.ndarray
    line: np.ndarray
    tags: Mapping[str, np.ndarray] = field(default_factory=dict)

    def tags_of(self, i: int) -> tuple[str, ...]:
        """Tags of row ``i``, sorted."""
        return tuple(sorted(t for t, rows in self.tags.items()
                            if np.searchsorted(rows, i) < len(rows)
                            and rows[np.searchsorted(rows, i)] == i))


@dataclass(frozen=True, eq=False)
class Beds(_Columns):
    """Organ or tissue beds: a lumped resistance from ``node`` to an outflow.

    The outflow is the pressure ``outflow_pressure_pa``, or, for a bed in
    series (gut draining into the portal vein), the network node
    ``outflow_node`` (then ``outflow_pressure_pa`` is NaN).  ``share`` is an
    optional target fraction of total inflow; the ``windkessel_*`` columns are
    for pulsatile work.  A bed autoregulates where ``min_resistance_pa_s_m3``
    (its maximal dilation) is given: it holds ``target_flow_m3_s`` (NaN: the
    flow it has at ``resistance_pa_s_m3``, taken from a baseline solve) while
    it can (see :mod:`vesselnet.autoregulation`).
    """

    ids: IdSequence
    node: np.ndarray
    resistance_pa_s_m3: np.ndarray
    outflow_pressure_pa: np.ndarray
    outflow_node: np.ndarray
    share: np.ndarray
    windkessel_proximal_pa_s_m3: np.ndarray
    windkessel_compliance_m3_pa: np.ndarray
    line: np.ndarray
    target_flow_m3_s: np.ndarray
    min_resistance_pa_s_m3: np.ndarray


@dataclass(frozen=True, eq=False)
class Network:
    """A vessel network: nodes, vessels, beds and blood, in SI.

    ``source`` is the file it came from ('' when built in code).
    """

    name: str
    nodes: Nodes
    vessels: Vessels
    beds: Beds
    blood: Blood = Blood()
    venous_pressure_pa: float = 5 * 133.322387415
    source: str = ""

    @classmethod
    def from_columns(cls, *, vessels: Mapping[str, Sequence], nodes: Mapping[str, Sequence] | None = None,
                     beds: Mapping[str, Sequence] | None = None, name: str = "network",
                     blood: Blood = Blood(), venous_pressure_pa: float = 5 * 133.322387415,
                     source: str = "", tags: Mapping[str, Sequence[int]] | None = None,
                     inflow_waveforms: Mapping[str, Mapping[str, object]] | None = None) -> "Network":
        """Build a network from columns in SI, the one way every network is made.

        Parameters
        ----------
        vessels : mapping of column name to sequence
            ``id``, ``from``, ``to`` (node ids) and any :class:`Vessels` column
            by name; ``radius_m`` fills both ends of a taper.  Missing columns
            take their neutral default (NaN, False, Poisson 0.5, stenosis at 0.5).
            Instead of ``from``/``to``, integer ``from_node``/``to_node`` may
            give rows of ``nodes["id"]``, which then lists every node in order
            (bed ``node``/``outflow_node`` may then be rows too, -1 for none).
        nodes : mapping of column name to sequence, optional
            ``id`` and any :class:`Nodes` column; ``position_m`` as (n, 3).
            Nodes are ordered by first use in ``vessels``, then as given here.
        beds : mapping of column name to sequence, optional
            ``id``, ``node``, ``resistance_pa_s_m3``, optionally
            ``outflow_pressure_pa`` (NaN: ``venous_pressure_pa``),
            ``outflow_node`` (a node id or None), ``share``, ``windkessel_*``, ``line``,
            ``target_flow_m3_s`` and ``min_resistance_pa_s_m3`` (autoregulation).
        tags : mapping of tag to vessel rows, optional
        inflow_waveforms : mapping of node id to waveform description, optional

        Raises
        ------
        KeyError
            A bed or node property names a node no vessel reaches (the
            reader reports these as located problems before calling this).
        """
        nodes = dict(nodes or {"id": ()})
        beds = dict(beds or {"id": ()})
        if "from_node" in vessels:     # rows of nodes["id"] already: no mapping
            node_ids = given_ids = _ids(nodes["id"])
            index = _LazyIndex(node_ids)
            from_rows = np.asarray(vessels["from_node"], dtype=np.int64)
            to_rows = np.asarray(vessels["to_node"], dtype=np.int64)
        else:
            given_ids = list(map(str, nodes["id"]))
            order = dict.fromkeys(itertools.chain.from_iterable(
                zip(map(str, vessels["from"]), map(str, vessels["to"]))))
            order.update(dict.fromkeys(given_ids))
            node_ids = tuple(order)
            index = dict(zip(node_ids, range(len(node_ids))))
            from_rows = _rows(index, vessels["from"])
            to_rows = _rows(index, vessels["to"])
        n_nodes = len(node_ids)
        given = np.arange(n_nodes) if "from_node" in vessels else _rows(index, given_ids)

        def node_col(key, default, width=None):
            shape = (n_nodes,) if width is None else (n_nodes, width)
            dtype = float if default is not None else np.int64
            if key not in nodes or not len(given):
                return np.broadcast_to(np.array(default, dtype=dtype), shape)
            if len(given) == n_nodes and "from_node" in vessels:     # every node, in order
                return np.asarray(nodes[key], dtype=dtype).reshape(shape)
            out = np.full(shape, default, dtype=dtype)
            if key in nodes and len(given):
                out[given] = np.asarray(nodes[key], dtype=out.dtype).reshape((len(given),) + shape[1:])
            return out

        node_table = Nodes(
            ids=node_ids, pressure_pa=node_col("pressure_pa", NAN),
            inflow_m3_s=node_col("inflow_m3_s", NAN), position_m=node_col("position_m", NAN, 3),
            target_pressure_pa=node_col("target_pressure_pa", NAN),
            line=node_col("line", 0).astype(np.int64), hematocrit=node_col("hematocrit", NAN),
            inflow_waveforms={index[k]: v for k, v in (inflow_waveforms or {}).items()})

        n = len(vessels["id"])

        def col(key, default, dtype=float):
            if key in vessels:
                return np.asarray(vessels[key], dtype=dtype)
            return _constant(n, default, dtype)

        r_in = col("radius_in_m", NAN) if "radius_in_m" in vessels else col("radius_m", NAN)
        r_out = col("radius_out_m", NAN) if "radius_out_m" in vessels else col("radius_m", NAN)
        vessel_table = Vessels(
            ids=_ids(vessels["id"]),
            from_node=from_rows.reshape(n), to_node=to_rows.reshape(n),
            length_m=col("length_m", NAN), radius_in_m=r_in, radius_out_m=r_out,
            wall_thickness_m=col("wall_thickness_m", NAN), wall_modulus_pa=col("wall_modulus_pa", NAN),
            wall_poisson=col("wall_poisson", 0.5), distensible=col("distensible", False, bool),
            external_pressure_pa=col("external_pressure_pa", 0.0),
            stenosis_reduction=col("stenosis_reduction", NAN),
            stenosis_length_m=col("stenosis_length_m", NAN), stenosis_at=col("stenosis_at", 0.5),
            occluded=col("occluded", False, bool), line=col("line", 0, np.int64),
            tags={t: _frozen_array(np.unique(np.asarray(rows, dtype=np.int64)), np.int64)
                  for t, rows in sorted((tags or {}).items())})

        m = len(beds["id"])

        def bed_col(key, default, dtype=float):
            if key in beds:
                return np.asarray(beds[key], dtype=dtype).reshape(m)
            return _constant(m, default, dtype)

        if _is_rows(beds.get("outflow_node")):
            outflow_node = np.asarray(beds["outflow_node"], dtype=np.int64).reshape(m)
        else:
            outflow_node = np.array([index[str(x)] if x is not None else -1
                                     for x in beds.get("outflow_node", [None] * m)], dtype=np.int64)
        outflow_p = bed_col("outflow_pressure_pa", NAN)
        outflow_p = np.where(outflow_node >= 0, NAN, np.where(np.isnan(outflow_p),
                                                                venous_pressure_pa, outflow_p))
        bed_table = Beds(
            ids=_ids(beds["id"]),
            node=(np.asarray(beds["node"], dtype=np.int64) if _is_rows(beds.get("node"))
                  else _rows(index, beds.get("node", ()))).reshape(m),
            resistance_pa_s_m3=bed_col("resistance_pa_s_m3", NAN), outflow_pressure_pa=outflow_p,
            outflow_node=outflow_node, share=bed_col("share", NAN),
            windkessel_proximal_pa_s_m3=bed_col("windkessel_proximal_pa_s_m3", NAN),
            windkessel_compliance_m3_pa=bed_col("windkessel_compliance_m3_pa", NAN),
            line=bed_col("line", 0, np.int64), target_flow_m3_s=bed_col("target_flow_m3_s", NAN),
            min_resistance_pa_s_m3=bed_col("min_resistance_pa_s_m3", NAN))
        return cls(name=name, nodes=node_table, vessels=vessel_table, beds=bed_table,
                   blood=blood, venous_pressure_pa=venous_pressure_pa, source=source)

    @classmethod
    def build(cls, *, nodes: Mapping[str, Mapping[str, object]] | None = None,
              vessels: Sequence[Mapping[str, object]] = (),
              beds: Sequence[Mapping[str, object]] = (), **options) -> "Network":
        """Build a network from per-item mappings already in SI (for code and tests).

        Each vessel, node and bed mapping uses the column names of
        :meth:`from_columns`; vessels may add ``tags``.  Other keyword options
        go to :meth:`from_columns`.  No validation beyond shapes: use
        :func:`vesselnet.reader.load_network` for checked input.
        """
        def columns(items, defaults):
            keys = dict.fromkeys(k for item in items for k in item if k != "tags")
            return {k: [item.get(k, defaults.get(k, NAN)) for item in items] for k in keys}

        vessel_cols = columns(vessels, {"distensible": False, "occluded": False, "line": 0,
                                        "wall_poisson": 0.5, "stenosis_at": 0.5,
                                        "external_pressure_pa": 0.0})
        if "radius_m" in vessel_cols:
            for end in ("radius_in_m", "radius_out_m"):
                vessel_cols[end] = [item.get(end, item.get("radius_m")) for item in vessels]
            del vessel_cols["radius_m"]
        vessel_cols.setdefault("id", [])
        vessel_cols.setdefault("from", [])
        vessel_cols.setdefault("to", [])
        tags: dict[str, list[int]] = {}
        for i, v in enumerate(vessels):
            for t in v.get("tags", ()):
                tags.setdefault(t, []).append(i)
        node_items = [{"id": k, **v} for k, v in (nodes or {}).items()]
        node_cols = columns(node_items, {"line": 0, "position_m": (NAN, NAN, NAN)})
        node_cols.setdefault("id", [])
        bed_cols = columns(beds, {"line": 0, "outflow_node": None})
        bed_cols.setdefault("id", [])
        return cls.from_columns(vessels=vessel_cols, nodes=node_cols, beds=bed_cols, tags=tags,
                                **options)

    def to_networkx(self):
        """The network as a ``networkx.MultiDiGraph`` with SI attributes.

        Nodes carry their ``Nodes`` columns and the beds on them (``beds``:
        list of bed ids); each vessel is an edge ``from -> to`` keyed by its
        id, carrying its ``Vessels`` columns and ``tags``.  For topology
        questions and user code; the solvers use arrays.

        >>> net = Network.build(vessels=[{"id": "a", "from": "p", "to": "q",
        ...                               "length_m": 0.1, "radius_m": 0.002}])
        >>> g = net.to_networkx()
        >>> list(g.edges(keys=True))
        [('p', 'q', 'a')]
        """
        import networkx as nx

        graph = nx.MultiDiGraph(name=self.name)
        beds_on: dict[int, list[str]] = {}
        for b, node in zip(self.beds.ids, self.beds.node):
            beds_on.setdefault(int(node), []).append(b)
        for i, node_id in enumerate(self.nodes.ids):
            attrs = self.nodes.row(i)
            attrs.pop("id")
            graph.add_node(node_id, **attrs, beds=beds_on.get(i, []))
        v = self.vessels
        for i, vessel_id in enumerate(v.ids):
            attrs = v.row(i)
            attrs.pop("id")
            attrs["tags"] = v.tags_of(i)
            graph.add_edge(self.nodes.ids[v.from_node[i]], self.nodes.ids[v.to_node[i]],
                           key=vessel_id, **attrs)
        return graph
