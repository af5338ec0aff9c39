"""Graph questions on the vessel network: connected parts and pressure references.

A connected part is determined only if it reaches a pressure reference: a
node with a fixed pressure or a bed draining to an outflow pressure.
Otherwise its pressures float and the nodal matrix is singular.

Examples
--------
>>> from vesselnet.model import Network
>>> net = Network.build(nodes={"r": {"pressure_pa": 1e4}},
...     vessels=[{"id": "a", "from": "r", "to": "s", "length_m": 0.1, "radius_m": 1e-3},
...              {"id": "b", "from": "x", "to": "y", "length_m": 0.1, "radius_m": 1e-3}])
>>> parts = connected_parts(net)
>>> parts.count, [net.nodes.ids[i] for i in parts.unreferenced_nodes()]
(2, ['x', 'y'])
"""

from __future__ import annotations

import weakref
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from .errors import Problem
from .model import Network

MAX_NAMED = 8
_PARTS: "weakref.WeakKeyDictionary[Network, Parts]" = weakref.WeakKeyDictionary()
"""Parts of each network already labelled: the reader's check and the solve share them
(networks are frozen, so their parts never change)."""


@dataclass(frozen=True)
class Parts:
    """Connected parts of a network (occluded vessels excluded).

    ``label`` gives each node's part; ``referenced[k]`` tells whether part
    ``k`` reaches a pressure reference.
    """

    count: int
    label: np.ndarray
    referenced: np.ndarray

    def unreferenced_nodes(self) -> np.ndarray:
        """Rows of the nodes in parts without a pressure reference."""
        return np.flatnonzero(~self.referenced[self.label])


def element_terminals(network: Network) -> tuple[np.ndarray, np.ndarray]:
    """Node pairs joined by open vessels and by beds that drain into a node."""
    v, beds = network.vessels, network.beds
    open_ = ~v.occluded
    series = beds.outflow_node >= 0
    a = np.concatenate([v.from_node[open_], beds.node[series]])
    b = np.concatenate([v.to_node[open_], beds.outflow_node[series]])
    return a, b


def connected_parts(network: Network) -> Parts:
    """Label the connected parts and find which reach a pressure reference.

    Uses :func:`scipy.sparse.csgraph.connected_components` on the undirected
    graph of open vessels and series beds.  Computed once per network.
    """
    known = _PARTS.get(network)
    if known is not None:
        return known
    n = len(network.nodes)
    a, b = element_terminals(network)
    graph = sp.coo_matrix((np.ones(len(a)), (a, b)), shape=(n, n))
    count, label = connected_components(graph, directed=False)
    has_reference = ~np.isnan(network.nodes.pressure_pa)
    beds = network.beds
    to_pressure = beds.outflow_node < 0
    has_reference[beds.node[to_pressure]] = True
    referenced = np.zeros(count, dtype=bool)
    referenced[label[has_reference]] = True
    label.flags.writeable = False
    referenced.flags.writeable = False
    parts = _PARTS[network] = Parts(count=count, label=label, referenced=referenced)
    return parts


def topology_problems(network: Network) -> list[Problem]:
    """Problems that make the network unsolvable as read: parts with no pressure reference.

    Returns
    -------
    list of Problem
        One per unreferenced part, naming up to eight of its nodes.
    """
    parts = connected_parts(network)
    problems = []
    nodes = network.nodes
    if not (~np.isnan(nodes.pressure_pa)).any() and not (network.beds.outflow_node < 0).any():
        return [Problem(network.source, 0, 0, "network",
                        "no pressure reference: no node has a fixed pressure and no bed "
                        "drains to an outflow pressure",
                        "give a node 'pressure:' or add a bed")]
    for k in np.flatnonzero(~parts.referenced):
        rows = np.flatnonzero(parts.label == k)
        names = ", ".join(f"'{nodes.ids[i]}'" for i in rows[:MAX_NAMED])
        more = f" and {len(rows) - MAX_NAMED} more" if len(rows) > MAX_NAMED else ""
        line = int(_first_line(network, rows))
        problems.append(Problem(
            network.source, line, 0, f"nodes {names}{more}",
            "this connected part reaches no pressure reference (no fixed pressure, no bed), "
            "so its pressures are undetermined",
            "connect it to the rest, give one of its nodes a 'pressure:', or add a bed"))
    return problems


def _first_line(network: Network, node_rows: np.ndarray) -> int:
    v = network.vessels
    touching = np.isin(v.from_node, node_rows) | np.isin(v.to_node, node_rows)
    lines = v.line[touching]
    return int(lines.min()) if len(lines) else 0
