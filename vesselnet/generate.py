"""Seeded synthetic microvascular networks: arteriolar tree, capillary mesh, venular tree.

The network lies in a plane.  A capillary mesh of degree-3 junctions (a
"brick-wall" lattice, topologically a honeycomb, with the two outer columns
fully joined) covers a square; its nodes are jittered and its segments made
tortuous.  Terminal arterioles enter the mesh at every fourth node in both
directions, terminal venules leave it at the nodes offset by two, so supply
and drainage points interleave.  Each set of terminals is joined into a
binary tree by recursive bisection of the point set (split across the longer
extent at the median), with branch points at the centroid of the terminals
they serve; the arteriolar root is held at an inlet pressure, the venular
root drains to an outlet pressure.  Spare capillary segments (never a segment of a
random spanning tree of the mesh, never one whose removal would leave a dead
end) are removed at random until the count is exactly the one asked for.
The venular root drains through one bed, ``venous_outflow``, the collecting
vein downstream, to the outlet pressure.

Radii follow the generalised Murray law r_parent^k = sum r_child^k, from
terminal radii jittered by 5 %; capillary radii are jittered by 10 %.

Examples
--------
>>> net = microvascular_network(600, seed=20250611)
>>> len(net.vessels), net.blood.viscosity_law, net.blood.separation
(600, 'pries-vivo', 'pries-1990')
>>> radius_um = 1e6 * np.asarray(net.vessels.radius_in_m)
>>> print(round(float(radius_um.min()), 1), round(float(radius_um.max()), 1))
2.1 13.5
"""

from __future__ import annotations

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import minimum_spanning_tree

from .errors import NetworkSpecError, Problem
from .model import Blood, Network
from .units import MMHG_PA

MIN_SEGMENTS = 100
"""Fewest segments :func:`microvascular_network` builds (a mesh of a few dozen nodes)."""

TERMINAL_STRIDE = 4
"""Terminal arterioles (and venules) enter the mesh every this many nodes in x and in y."""


def microvascular_network(n_segments: int, seed: int, *,
                          capillary_radius_m: float = 2.8e-6,
                          arteriole_terminal_radius_m: float = 3.5e-6,
                          venule_terminal_radius_m: float = 5.0e-6,
                          capillary_spacing_m: float = 100e-6,
                          murray_exponent: float = 3.0,
                          inlet_pressure_pa: float = 60 * MMHG_PA,
                          outlet_pressure_pa: float = 15 * MMHG_PA,
                          hematocrit: float = 0.45,
                          viscosity_law: str = "pries-vivo",
                          separation: str = "pries-1990",
                          plasma_viscosity_pa_s: float = 1.2e-3,
                          name: str | None = None) -> Network:
    """A synthetic microvascular network of exactly ``n_segments`` segments.

    Parameters
    ----------
    n_segments : int
        Number of vessel segments, at least :data:`MIN_SEGMENTS`; about 86 %
        of them are capillaries.
    seed : int
        Seed of ``numpy.random.default_rng``: the same seed gives the same network.
    capillary_radius_m : float
        Median capillary radius (m); default 2.8e-6.
    arteriole_terminal_radius_m, venule_terminal_radius_m : float
        Median radius of the terminal arterioles and venules (m), the leaves
        of the Murray trees; defaults 3.5e-6 and 5e-6.
    capillary_spacing_m : float
        Distance between neighbouring mesh nodes before jitter (m); default 100e-6.
    murray_exponent : float
        k in r_parent^k = sum r_child^k; default 3 (Murray 1926; about 3 in
        vessels of 4-100 um, Nakamura & Awa 2014).
    inlet_pressure_pa, outlet_pressure_pa : float
        Fixed pressure at the arteriolar inlet, and the pressure the venular
        outlet drains to through the bed ``venous_outflow`` (Pa); defaults 60
        and 15 mmHg.
    hematocrit : float
        Discharge hematocrit fed at the inlet (fraction).
    viscosity_law, separation : str
        Blood model of the network (see :mod:`vesselnet.viscosity`,
        :mod:`vesselnet.phase_separation`).
    plasma_viscosity_pa_s : float
        Plasma viscosity (Pa*s).
    name : str, optional
        Network name; default ``microvascular-<n>-seed-<seed>``.

    Returns
    -------
    Network
        Nodes ``inlet``, ``outlet``, ``a<k>`` (arteriolar branch points),
        ``c<k>`` (mesh nodes), ``v<k>`` (venular branch points), with
        positions; vessels ``art<k>`` (from parent to child), ``cap<k>``,
        ``ven<k>`` (from child to parent, the direction of flow), tagged
        ``arteriole``, ``capillary``, ``venule``; one bed ``venous_outflow``
        on node ``outlet``.

    Raises
    ------
    NetworkSpecError
        ``n_segments`` below :data:`MIN_SEGMENTS` or not a whole number, or a
        size parameter not finite and > 0.

    Notes
    -----
    Tree segment lengths are the distances between the points they join
    times a tortuosity factor uniform in [1, 1.1], capillary lengths the
    same with [1, 1.3]; no segment is shorter than half the spacing.  The
    mesh spans about sqrt(n_segments / 1.75) nodes a side.  The outflow bed
    has the Poiseuille resistance 8 mu L / (pi r^4) of a collecting vein of
    the venular root's radius r, L = 1 mm long, at mu = 3.5 mPa*s: small
    beside the network's, so the outlet sits near the outlet pressure.

    References
    ----------
    C. D. Murray, Proc Natl Acad Sci USA 12 (1926) 207-214 (volume and pages
    from memory); T. Nakamura, S. Awa, Physiol Rep 2 (2014) e00236 (exponent
    about 3 in peripheral resistive arteries).
    """
    _check_arguments(n_segments, capillary_radius_m, arteriole_terminal_radius_m,
                     venule_terminal_radius_m, capillary_spacing_m, murray_exponent)
    rng = np.random.default_rng(seed)
    nx, ny = _mesh_shape(int(n_segments))
    mesh_a, mesh_b, xy = _mesh(nx, ny, capillary_spacing_m, rng)
    i, j = np.divmod(np.arange(nx * ny), ny)
    art_leaves = np.flatnonzero((i % TERMINAL_STRIDE == 0) & (j % TERMINAL_STRIDE == 0))
    half = TERMINAL_STRIDE // 2
    ven_leaves = np.flatnonzero((i % TERMINAL_STRIDE == half) & (j % TERMINAL_STRIDE == half))
    n_tree = 2 * art_leaves.size - 1 + 2 * ven_leaves.size - 1
    keep = _thin_mesh(mesh_a, mesh_b, nx * ny, int(n_segments) - n_tree, art_leaves, ven_leaves,
                      rng)
    mesh_a, mesh_b = mesh_a[keep], mesh_b[keep]
    centre = xy.mean(axis=0)
    h = capillary_spacing_m
    inlet_xy = np.array([-3.0 * h, centre[1] - 0.5 * h])
    outlet_xy = np.array([-3.0 * h, centre[1] + 0.5 * h])
    art = _tree(xy, art_leaves, inlet_xy, arteriole_terminal_radius_m, murray_exponent, rng)
    ven = _tree(xy, ven_leaves, outlet_xy, venule_terminal_radius_m, murray_exponent, rng,
                shift=np.array([0.0, 0.3 * h]))

    def node_names(tree, prefix, root):
        names = np.array([root] + [f"{prefix}{k}" for k in range(1, len(tree["xy"]))], dtype=object)
        return names

    mesh_names = np.array([f"c{k}" for k in range(nx * ny)], dtype=object)
    art_names, ven_names = node_names(art, "a", "inlet"), node_names(ven, "v", "outlet")

    def endpoint(tree, names, ref):   # >= 0: tree node; < 0: mesh node -(k + 1)
        return np.where(ref >= 0, names[np.maximum(ref, 0)], mesh_names[np.maximum(-ref - 1, 0)])

    art_to = endpoint(art, art_names, art["child"])
    ven_from = endpoint(ven, ven_names, ven["child"])
    mesh_len = np.hypot(*(xy[mesh_a] - xy[mesh_b]).T) * rng.uniform(1.0, 1.3, mesh_a.size)
    cap_r = capillary_radius_m * np.clip(rng.lognormal(0.0, 0.1, mesh_a.size), 0.75, 1.33)
    min_len = 0.5 * h
    n_art, n_cap, n_ven = art["child"].size, mesh_a.size, ven["child"].size
    vessels = {
        "id": ([f"art{k}" for k in range(n_art)] + [f"cap{k}" for k in range(n_cap)]
               + [f"ven{k}" for k in range(n_ven)]),
        "from": np.concatenate([art_names[art["parent"]], mesh_names[mesh_a], ven_from]),
        "to": np.concatenate([art_to, mesh_names[mesh_b], ven_names[ven["parent"]]]),
        "length_m": np.maximum(np.concatenate([art["length_m"], mesh_len, ven["length_m"]]),
                               min_len),
        "radius_m": np.concatenate([art["radius_m"], cap_r, ven["radius_m"]]),
    }
    node_xy = np.concatenate([art["xy"], xy, ven["xy"]])
    node_ids = np.concatenate([art_names, mesh_names, ven_names])
    pressure = np.full(node_ids.size, np.nan)
    pressure[0] = inlet_pressure_pa
    inlet_h = np.full(node_ids.size, np.nan)
    inlet_h[0] = hematocrit
    nodes = {"id": node_ids.tolist(), "pressure_pa": pressure, "hematocrit": inlet_h,
             "position_m": np.column_stack([node_xy, np.zeros(node_ids.size)])}
    tags = {"arteriole": np.arange(n_art), "capillary": n_art + np.arange(n_cap),
            "venule": n_art + n_cap + np.arange(n_ven)}
    blood = Blood(viscosity_law=viscosity_law, separation=separation, hematocrit=hematocrit,
                  plasma_viscosity_pa_s=plasma_viscosity_pa_s)
    vein_radius_m = ven["radius_m"][0]
    beds = {"id": ["venous_outflow"], "node": ["outlet"], "outflow_pressure_pa": [outlet_pressure_pa],
            "resistance_pa_s_m3": [8 * 3.5e-3 * 1e-3 / (np.pi * vein_radius_m**4)]}
    return Network.from_columns(vessels=vessels, nodes=nodes, beds=beds, tags=tags, blood=blood,
                                name=name or f"microvascular-{int(n_segments)}-seed-{seed}")


def describe(network: Network, n_segments: int, seed: int) -> str:
    """A few lines saying what a generated network is, for the head of its file.

    >>> print(describe(microvascular_network(120, 7), 120, 7).splitlines()[0])
    Synthetic microvascular network (vesselnet generate --segments 120 --seed 7).
    """
    tags = network.vessels.tags
    radius_um = 1e6 * np.asarray(network.vessels.radius_in_m)
    inlet = network.nodes.index["inlet"]
    p_in = network.nodes.pressure_pa[inlet]
    p_out = network.beds.outflow_pressure_pa[0]
    return "\n".join([
        f"Synthetic microvascular network (vesselnet generate --segments {n_segments} "
        f"--seed {seed}).",
        "",
        f"An arteriolar tree ({tags['arteriole'].size} segments) feeds a planar capillary mesh "
        f"({tags['capillary'].size} segments,",
        "degree-3 junctions) drained by a venular tree "
        f"({tags['venule'].size} segments). Radii follow Murray's law",
        f"(r^3 = sum of daughters' r^3), {radius_um.min():.1f}-{radius_um.max():.1f} um; "
        "capillary lengths about 50-200 um.",
        f"Inlet 'inlet' held at {p_in / MMHG_PA:g} mmHg; the outlet drains through the bed "
        f"'venous_outflow' to {p_out / MMHG_PA:g} mmHg.",
        "Every number is generated: this describes no real tissue.",
    ])


def _check_arguments(n_segments, *sizes) -> None:
    problems = []
    if isinstance(n_segments, bool) or int(n_segments) != n_segments \
            or n_segments < MIN_SEGMENTS:
        problems.append(Problem("", 0, 0, "n_segments",
                                f"must be a whole number >= {MIN_SEGMENTS}, got {n_segments!r}",
                                f"ask for at least {MIN_SEGMENTS} segments"))
    names = ("capillary_radius_m", "arteriole_terminal_radius_m", "venule_terminal_radius_m",
             "capillary_spacing_m", "murray_exponent")
    for label, value in zip(names, sizes):
        if not (np.isfinite(value) and value > 0):
            problems.append(Problem("", 0, 0, label, f"must be finite and > 0, got {value!r}",
                                    "give a positive value (SI units)"))
    if problems:
        raise NetworkSpecError(problems)


def _segment_count(nx: int, ny: int) -> int:
    """Segments of the unthinned nx * ny mesh and its two trees."""
    n_h = (nx - 1) * ny
    i, j = np.meshgrid(np.arange(nx), np.arange(ny - 1), indexing="ij")
    n_v = int((((i + j) % 2 == 0) | (i == 0) | (i == nx - 1)).sum())
    half = TERMINAL_STRIDE // 2
    t_a = -(-nx // TERMINAL_STRIDE) * -(-ny // TERMINAL_STRIDE)
    t_v = -(-(nx - half) // TERMINAL_STRIDE) * -(-(ny - half) // TERMINAL_STRIDE)
    return n_h + n_v + 2 * t_a - 1 + 2 * t_v - 1


def _mesh_shape(n_segments: int) -> tuple[int, int]:
    """Mesh columns and rows, about square, whose network just reaches n_segments."""
    best = None
    side = int(np.sqrt(n_segments / 1.75))
    for nx in range(max(6, side - 3), side + 4):
        ny = 6
        while _segment_count(nx, ny) < n_segments:
            ny += 1
        surplus = _segment_count(nx, ny) - n_segments
        if abs(nx - ny) <= 3 and (best is None or surplus < best[0]):
            best = (surplus, nx, ny)
    return best[1], best[2]


def _mesh(nx: int, ny: int, spacing_m: float, rng) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Brick-wall lattice on nx * ny nodes (node i * ny + j at column i, row j), jittered."""
    i, j = np.meshgrid(np.arange(nx), np.arange(ny), indexing="ij")
    node = i * ny + j
    h_a, h_b = node[:-1, :].ravel(), node[1:, :].ravel()
    vertical = ((i[:, :-1] + j[:, :-1]) % 2 == 0) | (i[:, :-1] == 0) | (i[:, :-1] == nx - 1)
    v_a, v_b = node[:, :-1][vertical], node[:, 1:][vertical]
    xy = np.column_stack([i.ravel(), j.ravel()]).astype(float) * spacing_m
    xy += rng.uniform(-0.2, 0.2, xy.shape) * spacing_m
    return np.concatenate([h_a, v_a]), np.concatenate([h_b, v_b]), xy


def _thin_mesh(a, b, n_nodes, n_wanted, art_leaves, ven_leaves, rng) -> np.ndarray:
    """Mask of mesh segments to keep: drop spare ones at random down to n_wanted."""
    keep = np.ones(a.size, dtype=bool)
    surplus = a.size - n_wanted
    if surplus <= 0:
        return keep
    weights = rng.uniform(1.0, 2.0, a.size)
    spanning = minimum_spanning_tree(coo_matrix((weights, (a, b)), shape=(n_nodes, n_nodes)))
    rows, cols = spanning.nonzero()
    in_tree = set(zip(np.minimum(rows, cols).tolist(), np.maximum(rows, cols).tolist()))
    degree = np.bincount(a, minlength=n_nodes) + np.bincount(b, minlength=n_nodes)
    degree[art_leaves] += 1
    degree[ven_leaves] += 1
    low, high = np.minimum(a, b).tolist(), np.maximum(a, b).tolist()
    for k in rng.permutation(a.size).tolist():
        if surplus == 0:
            break
        if (low[k], high[k]) in in_tree or degree[a[k]] < 3 or degree[b[k]] < 3:
            continue
        keep[k] = False
        degree[a[k]] -= 1
        degree[b[k]] -= 1
        surplus -= 1
    if surplus:
        raise NetworkSpecError([Problem("", 0, 0, "n_segments",
                                        f"could not thin the mesh to {n_wanted} segments",
                                        "ask for a slightly different number of segments")])
    return keep


def _tree(xy, leaves, root_xy, leaf_radius_m, exponent, rng, shift=np.zeros(2)) -> dict:
    """Binary tree over the mesh nodes ``leaves`` by recursive bisection.

    Tree node 0 is the root (at ``root_xy``); a child reference >= 0 is a tree
    node, < 0 the mesh node -(ref + 1).  Returns parent/child per segment, the
    tree node positions, segment radii (Murray) and lengths.
    """
    positions = [np.asarray(root_xy, dtype=float)]
    parent, child, radius_k = [], [], []
    leaf_r = leaf_radius_m * np.clip(rng.lognormal(0.0, 0.05, leaves.size), 0.85, 1.18)

    def build(members, up) -> float:
        """Add the subtree over ``members`` below tree node ``up``; returns sum r^k."""
        if members.size == 1:
            parent.append(up)
            child.append(-int(leaves[members[0]]) - 1)
            radius_k.append(leaf_r[members[0]] ** exponent)
            return radius_k[-1]
        pts = xy[leaves[members]]
        node = len(positions)
        positions.append(pts.mean(axis=0) + shift)
        slot = len(parent)
        parent.append(up)
        child.append(node)
        radius_k.append(0.0)
        axis = int(np.ptp(pts[:, 1]) > np.ptp(pts[:, 0]))
        order = members[np.argsort(pts[:, axis], kind="stable")]
        total = build(order[: order.size // 2], node) + build(order[order.size // 2:], node)
        radius_k[slot] = total
        return total

    build(np.arange(leaves.size), 0)
    pos = np.array(positions)
    parent_a, child_a = np.array(parent), np.array(child)
    child_xy = np.where((child_a >= 0)[:, None], pos[np.maximum(child_a, 0)],
                        xy[np.maximum(-child_a - 1, 0)])
    length = np.hypot(*(pos[parent_a] - child_xy).T) * rng.uniform(1.0, 1.1, parent_a.size)
    return {"xy": pos, "parent": parent_a, "child": child_a, "length_m": length,
            "radius_m": np.array(radius_k) ** (1.0 / exponent)}
