"""Seeded synthetic vessel networks for benchmarks and tests, built as arrays.

A random binary tree grown level by level: each vessel end splits in two
with probability ``split_probability`` (at least one per level, so the tree
keeps growing), with Murray's law at every split (r^3 = r1^3 + r2^3, a
random flow fraction in [0.25, 0.75] to the first child), lengths
proportional to radius, and a terminal bed on every end that does not
split.  Loops are added as extra vessels, in one of two layouts:

- ``local``: collaterals between neighbouring branches (a node and the
  next node of the same generation, mostly a sibling or a cousin);
- ``long``: collaterals between random nodes anywhere in the tree (the
  worst case for fill-in in a direct factorisation).

Everything is numpy; a 10^6-segment network builds in about a second.

Examples
--------
>>> cols = synthetic_columns(200, "local", seed=2024)
>>> len(cols["vessels"]["id"]), cols["vessels"]["id"][:2]
(200, ['v0', 'v1'])
>>> net = synthetic_network(200, "tree", seed=2024)
>>> len(net.vessels), len(net.beds) > 50
(200, True)
"""

from __future__ import annotations

import numpy as np

from .model import Network
from .units import MMHG_PA

TOPOLOGIES = ("tree", "local", "long")
ROOT_RADIUS_M = 0.5e-3
LENGTH_PER_RADIUS = 20.0
BED_RESISTANCE_FACTOR = 10.0
"""Each terminal bed's resistance, in units of the Poiseuille resistance of its feeding vessel."""
VISCOSITY_PA_S = 3.5e-3


def synthetic_columns(n_segments: int, topology: str = "tree", *, seed: int,
                      loop_fraction: float = 0.02, split_probability: float = 0.8) -> dict:
    """Columns (SI, string ids) of a seeded synthetic network.

    Parameters
    ----------
    n_segments : int
        Vessels in all (tree segments plus loop vessels), at least 2.
    topology : {'tree', 'local', 'long'}
        No loops; loops between neighbouring branches; loops between random nodes.
    seed : int
        Seed of ``numpy.random.default_rng``.
    loop_fraction : float
        Loop vessels as a fraction of ``n_segments`` (ignored for ``tree``).
    split_probability : float
        Chance that a vessel end splits.

    Returns
    -------
    dict
        ``vessels``, ``nodes`` and ``beds`` column mappings for
        :meth:`vesselnet.model.Network.from_columns`: node ``n0`` is the
        inlet at 100 mmHg, beds drain to the default venous pressure.
    """
    if topology not in TOPOLOGIES:
        raise ValueError(f"synthetic_columns: unknown topology {topology!r}; use one of {TOPOLOGIES}")
    rng = np.random.default_rng(seed)
    n_loops = 0 if topology == "tree" else int(round(loop_fraction * n_segments))
    n_tree = max(int(n_segments) - n_loops, 1)
    frm, to, radius = [np.array([0])], [np.array([1])], [np.array([ROOT_RADIUS_M])]
    levels = [np.array([1])]
    level_radius = np.array([ROOT_RADIUS_M])
    count, next_node = 1, 2
    while count < n_tree:
        ends = levels[-1]
        split = rng.random(len(ends)) < split_probability
        if not split.any():
            split[rng.integers(len(ends))] = True
        parents = ends[split]
        r = level_radius[split]
        f = rng.uniform(0.25, 0.75, len(parents))
        child_r = np.column_stack([r * np.cbrt(f), r * np.cbrt(1 - f)]).reshape(-1)
        child_from = np.repeat(parents, 2)
        k = min(len(child_from), n_tree - count)
        child_from, child_r = child_from[:k], child_r[:k]
        children = next_node + np.arange(k)
        frm.append(child_from)
        to.append(children)
        radius.append(child_r)
        levels.append(children)
        level_radius = child_r
        count += k
        next_node += k
    frm, to, radius = np.concatenate(frm), np.concatenate(to), np.concatenate(radius)
    n_nodes = next_node
    if n_loops:
        a, b, r_loop = _loops(rng, topology, n_loops, levels, to, radius, n_nodes)
        frm, to = np.concatenate([frm, a]), np.concatenate([to, b])
        radius = np.concatenate([radius, r_loop])
    length = LENGTH_PER_RADIUS * radius * rng.uniform(0.5, 1.5, len(radius))
    degree = np.bincount(frm, minlength=n_nodes) + np.bincount(to, minlength=n_nodes)
    feeding = np.zeros(n_nodes, dtype=np.int64)
    feeding[to[:n_tree]] = np.arange(n_tree)
    tips = np.flatnonzero(degree == 1)
    tips = tips[tips != 0]
    feed = feeding[tips]
    poiseuille = 8 * VISCOSITY_PA_S * length[feed] / (np.pi * radius[feed] ** 4)
    node_ids = np.char.add("n", np.arange(n_nodes).astype(str))
    return {
        "vessels": {"id": _ids("v", len(frm)), "from": node_ids[frm].tolist(),
                    "to": node_ids[to].tolist(), "length_m": length, "radius_m": radius},
        "nodes": {"id": ["n0"], "pressure_pa": np.array([100 * MMHG_PA])},
        "beds": {"id": _ids("b", len(tips)), "node": node_ids[tips].tolist(),
                 "resistance_pa_s_m3": BED_RESISTANCE_FACTOR * poiseuille},
    }


def _ids(prefix: str, n: int) -> list[str]:
    return [f"{prefix}{i}" for i in range(n)]


def _loops(rng, topology, n_loops, levels, to, radius, n_nodes):
    """Extra vessels: neighbours in a generation (``local``) or random pairs (``long``)."""
    node_radius = np.zeros(n_nodes)
    node_radius[to] = radius
    if topology == "local":
        starts = np.concatenate([lv[:-1] for lv in levels if len(lv) > 1])
        nexts = np.concatenate([lv[1:] for lv in levels if len(lv) > 1])
        pick = rng.choice(len(starts), size=min(n_loops, len(starts)), replace=False)
        a, b = starts[pick], nexts[pick]
    else:
        a = rng.integers(1, n_nodes, n_loops)
        b = rng.integers(1, n_nodes, n_loops)
        keep = a != b
        a, b = a[keep], b[keep]
    return a, b, np.minimum(node_radius[a], node_radius[b])


def synthetic_network(n_segments: int, topology: str = "tree", *, seed: int, **options) -> Network:
    """A seeded synthetic :class:`~vesselnet.model.Network` (see :func:`synthetic_columns`)."""
    cols = synthetic_columns(n_segments, topology, seed=seed, **options)
    return Network.from_columns(vessels=cols["vessels"], nodes=cols["nodes"], beds=cols["beds"],
                                name=f"synthetic {topology} {n_segments}",
                                blood=_blood())


def _blood():
    from .model import Blood

    return Blood(viscosity_pa_s=VISCOSITY_PA_S)
