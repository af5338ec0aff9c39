"""Where to draw each node: the file's positions, or a layout from the topology.

Positions given in the network file are used as they are (in cm).  When
some nodes lack one, they are placed at the average of their neighbours
(a discrete harmonic fill; dangling branches are then stepped outward by
their vessel lengths).  When a connected part has no position at all, the
whole network is laid out from its topology: a stress-minimising layout
(Kamada and Kawai 1989, through networkx) for small networks, and a radial
tree layout (leaves spread evenly on rings by depth, computed from a
breadth-first spanning tree in linear time) for large ones.

Examples
--------
>>> from vesselnet.model import Network
>>> net = Network.build(
...     nodes={"a": {"position_m": (0.0, 0.0, 0.0)}, "c": {"position_m": (0.0, 0.2, 0.0)}},
...     vessels=[{"id": "u", "from": "a", "to": "b", "length_m": 0.1, "radius_m": 1e-3},
...              {"id": "w", "from": "b", "to": "c", "length_m": 0.1, "radius_m": 1e-3}])
>>> place = place_nodes(net, dims=2)
>>> place.computed, place.axes, place.xyz[1].round(3).tolist()
(False, ('x', 'y'), [0.0, 10.0])
"""

from __future__ import annotations

from collections import deque
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import breadth_first_order, connected_components
from scipy.sparse.linalg import spsolve

from vesselnet.model import Network
from vesselnet.units import from_si

SMALL_LAYOUT_NODES = 400
"""Up to this many nodes a stress-minimising layout; above it the radial tree layout."""

AXES = ("x", "y", "z")
FLAT = 0.05
"""An axis spanning less than this fraction of the largest extent counts as flat."""


@dataclass(frozen=True)
class Placement:
    """Drawing coordinates of every node.

    Attributes
    ----------
    ids : tuple of str
        Node ids, in network row order.
    xyz : ndarray, shape (n_nodes, dims)
        Coordinates: cm when ``computed`` is False, layout units otherwise.
    computed : bool
        True when the coordinates come from the topology, not the file.
    axes : tuple of str
        Which file axes are shown (``('x', 'y')`` for a frontal view).
    unit : str
        ``cm`` for file positions, ``''`` for a computed layout.
    """

    ids: tuple[str, ...]
    xyz: np.ndarray
    computed: bool
    axes: tuple[str, ...]
    unit: str

    @property
    def dims(self) -> int:
        return self.xyz.shape[1]

    def of(self, node_ids) -> dict[str, np.ndarray]:
        """Coordinates keyed by node id (for placing a changed network like this one)."""
        index = {n: i for i, n in enumerate(self.ids)}
        return {n: self.xyz[index[n]] for n in node_ids if n in index}


def _adjacency(network: Network) -> sp.csr_matrix:
    v, beds = network.vessels, network.beds
    series = beds.outflow_node >= 0
    a = np.concatenate([v.from_node, beds.node[series]])
    b = np.concatenate([v.to_node, beds.outflow_node[series]])
    n = len(network.nodes)
    keep = a != b
    a, b = a[keep], b[keep]
    adj = sp.coo_matrix((np.ones(len(a)), (a, b)), shape=(n, n))
    adj = (adj + adj.T).tocsr()
    adj.data[:] = 1.0
    return adj


def place_nodes(network: Network, *, dims: int = 2, like: Placement | None = None) -> Placement:
    """Coordinates to draw every node of ``network`` at.

    Parameters
    ----------
    network : Network
    dims : {2, 3}
        2 for a plane view (the file's x-y plane, see :func:`plane_axes`), 3 for space.
    like : Placement, optional
        A placement of a related network (the baseline of a scenario): nodes
        with the same id take its coordinates, and the others are filled in
        between them, so that both views line up.

    Returns
    -------
    Placement
    """
    if dims not in (2, 3):
        raise ValueError(f"place_nodes: dims must be 2 or 3, got {dims}")
    n = len(network.nodes)
    if like is not None:
        known = like.of(network.nodes.ids)
        xyz = np.full((n, like.dims), np.nan)
        for i, node in enumerate(network.nodes.ids):
            if node in known:
                xyz[i] = known[node]
        filled = _fill(network, xyz) if np.isnan(xyz).any() else xyz
        return Placement(network.nodes.ids, filled, like.computed, like.axes, like.unit)
    xyz = from_si(np.asarray(network.nodes.position_m, dtype=float), "length", "cm")
    given = np.isfinite(xyz).all(axis=1)
    if (n and given.all()) or (given.any() and _every_part_has(network, given)):
        if not given.all():
            xyz = _fill(network, np.where(given[:, None], xyz, np.nan))
        if dims == 3:
            return Placement(network.nodes.ids, xyz, False, AXES, "cm")
        keep = plane_axes(np.ptp(xyz, axis=0) if n else np.zeros(3))
        return Placement(network.nodes.ids, xyz[:, keep], False, tuple(AXES[k] for k in keep), "cm")
    return Placement(network.nodes.ids, computed_layout(network, dims=dims), True,
                     AXES[:dims], "")


def plane_axes(extent: np.ndarray) -> list[int]:
    """The two file axes a plane view shows: x and y, unless one of them is flat.

    Files are drawn in their own x-y plane (with y up) as their authors laid
    them out; when x or y spans less than :data:`FLAT` of the largest extent
    and z spans more, the flat axis gives way to z.

    >>> plane_axes(np.array([13.0, 101.0, 15.5])), plane_axes(np.array([50.0, 0.0, 30.0]))
    ([0, 1], [0, 2])
    """
    keep = [0, 1]
    top = float(np.max(extent)) if len(extent) else 0.0
    for k in (1, 0):
        if extent[k] < FLAT * top and extent[2] > extent[k]:
            keep = sorted({0, 1, 2} - {k})
            break
    return keep


def _every_part_has(network: Network, given: np.ndarray) -> bool:
    _, label = connected_components(_adjacency(network), directed=False)
    return bool(np.isin(label, np.unique(label[given])).all())


def _fill(network: Network, xyz: np.ndarray) -> np.ndarray:
    """Fill NaN rows: harmonic average of neighbours, then step dangling branches outward."""
    adj = _adjacency(network)
    missing = np.isnan(xyz).any(axis=1)
    known = ~missing
    out = xyz.copy()
    lap = sp.diags(np.asarray(adj.sum(axis=1)).ravel()) - adj
    lap = lap.tocsr()
    _, label = connected_components(adj, directed=False)
    reached = np.isin(label, np.unique(label[known]))
    solvable = missing & reached
    if solvable.any():
        # dangling parts (one boundary node) make a singular block: a tiny pull
        # towards the known centroid keeps the system regular
        centre = np.nanmean(xyz[known], axis=0)
        luu = lap[solvable][:, solvable] + 1e-9 * sp.identity(int(solvable.sum()))
        rhs = -(lap[solvable][:, known] @ xyz[known]) + 1e-9 * centre
        out[solvable] = np.column_stack([np.atleast_1d(spsolve(luu.tocsc(), rhs[:, k],
                                                               permc_spec="MMD_AT_PLUS_A"))
                                         for k in range(xyz.shape[1])])
    out[missing & ~reached] = np.nanmean(xyz[known], axis=0) if known.any() else 0.0
    return _step_dangling(network, out, missing)


def _step_dangling(network: Network, xyz: np.ndarray, filled: np.ndarray) -> np.ndarray:
    """Move filled nodes that landed on a neighbour outward, one vessel length a step."""
    v = network.vessels
    length_cm = from_si(v.length_m, "length", "cm")
    neighbours: dict[int, list[tuple[int, float]]] = {}
    for a, b, ell in zip(v.from_node.tolist(), v.to_node.tolist(), length_cm.tolist()):
        neighbours.setdefault(a, []).append((b, ell))
        neighbours.setdefault(b, []).append((a, ell))
    extent = float(np.ptp(xyz, axis=0).max()) if len(xyz) else 1.0
    tol = 1e-6 * max(extent, 1.0)
    centre = xyz[~filled].mean(axis=0) if (~filled).any() else xyz.mean(axis=0)
    out = xyz.copy()
    done = ~filled
    queue = deque(np.flatnonzero(~filled).tolist())
    while queue:
        a = queue.popleft()
        for b, ell in neighbours.get(a, ()):
            if done[b]:
                continue
            done[b] = True
            if np.linalg.norm(out[b] - out[a]) < tol:
                away = out[a] - centre
                norm = np.linalg.norm(away)
                away = away / norm if norm > 0 else np.eye(xyz.shape[1])[0]
                out[b] = out[a] + away * (ell if np.isfinite(ell) and ell > 0 else 1.0)
            queue.append(b)
    return out


def computed_layout(network: Network, *, dims: int = 2) -> np.ndarray:
    """Coordinates from the topology alone, shape (n_nodes, dims).

    Small networks (up to :data:`SMALL_LAYOUT_NODES` nodes) get the
    Kamada-Kawai layout of networkx (deterministic: it starts from a
    circle); larger ones a radial tree layout in linear time.
    """
    n = len(network.nodes)
    if n <= SMALL_LAYOUT_NODES:
        import networkx as nx

        graph = nx.Graph()
        graph.add_nodes_from(range(n))
        adj = _adjacency(network).tocoo()
        graph.add_edges_from(zip(adj.row.tolist(), adj.col.tolist()))
        if n <= 2:
            pos = {i: np.array([float(i), 0.0, 0.0][:dims]) for i in range(n)}
        else:
            pos = nx.kamada_kawai_layout(graph, dim=dims)
        return 10.0 * np.array([pos[i] for i in range(n)], dtype=float).reshape(n, dims)
    xy = radial_tree_layout(network)
    return xy if dims == 2 else np.column_stack([xy, np.zeros(n)])


def radial_tree_layout(network: Network) -> np.ndarray:
    """Radial layout of a breadth-first spanning tree, shape (n_nodes, 2).

    Each connected part is rooted at its first pressure or inflow node (its
    first node when it has none); a node sits on the ring of its depth, at
    the middle of the angles of the leaves below it, leaves spread evenly in
    depth-first order.  Loops are drawn as chords.  Parts sit side by side.
    """
    adj = _adjacency(network)
    n = adj.shape[0]
    count, label = connected_components(adj, directed=False)
    nodes = network.nodes
    boundary = np.isfinite(nodes.pressure_pa) | np.isfinite(nodes.inflow_m3_s)
    out = np.zeros((n, 2))
    offset = 0.0
    for part in range(count):
        members = np.flatnonzero(label == part)
        rooted = members[boundary[members]]
        root = int(rooted[0] if len(rooted) else members[0])
        order, pred = breadth_first_order(adj, root, directed=False, return_predecessors=True)
        parent = pred.tolist()
        children: dict[int, list[int]] = {}
        for node in order[1:].tolist():
            children.setdefault(parent[node], []).append(node)
        depth = {root: 0}
        for node in order[1:].tolist():
            depth[node] = depth[parent[node]] + 1
        preorder, stack = [], [root]
        while stack:
            node = stack.pop()
            preorder.append(node)
            stack.extend(reversed(children.get(node, ())))
        lo, hi, slot = {}, {}, 0
        for node in preorder:
            if node not in children:
                lo[node] = hi[node] = slot
                slot += 1
        for node in reversed(preorder):
            p = parent[node]
            if node != root and p >= 0:
                lo[p] = min(lo.get(p, lo[node]), lo[node])
                hi[p] = max(hi.get(p, hi[node]), hi[node])
        leaves = max(slot, 1)
        ids = np.array(preorder)
        mid = np.array([0.5 * (lo[k] + hi[k]) for k in preorder])
        radius = np.array([depth[k] for k in preorder], dtype=float)
        angle = 2 * np.pi * (mid + 0.5) / leaves if leaves > 1 else np.zeros(len(ids))
        out[ids, 0] = radius * np.cos(angle)
        out[ids, 1] = radius * np.sin(angle)
        if part:
            width = np.ptp(out[members, 0]) if len(members) > 1 else 1.0
            out[members, 0] += offset - out[members, 0].min()
            offset += width + 2.0
        else:
            offset = out[members, 0].max() + 2.0
    return out
