"""Random test networks for calibration, sensitivity and Monte Carlo tests.

A random tree (each new node hangs off a random earlier one), a few extra
vessels closing loops, a bed on every leaf, and either a prescribed inflow
or a fixed pressure at the root.  Sizes and values span the ranges of real
arteries and arterioles; every draw comes from the generator passed in.
"""

import numpy as np

from vesselnet.model import Network
from vesselnet.units import MMHG_PA


def random_network(rng: np.random.Generator, *, nodes: int = 14, loops: int = 2, inlet: str = "inflow",
                   lesions: int = 0, series: bool = False) -> Network:
    """A random connected network with beds on its leaves (SI values).

    Parameters
    ----------
    inlet : {'inflow', 'pressure'}
        The root gets a prescribed inflow (20-200 mL/min) or a fixed pressure (90-100 mmHg).
    lesions : int
        Vessels given a Young-Tsai lesion (30-80 % diameter reduction).
    series : bool
        Make one bed drain into another bed's node (a bed in series).
    """
    parent = [int(rng.integers(0, k)) for k in range(1, nodes)]
    frm, to = list(parent), list(range(1, nodes))
    children = np.bincount(parent, minlength=nodes)
    leaves = [k for k in range(1, nodes) if children[k] == 0]
    inner = [k for k in range(1, nodes) if children[k] > 0]
    for _ in range(loops):
        a, b = rng.choice(np.arange(1, nodes), size=2, replace=False)
        if a not in leaves and b not in leaves:
            frm.append(int(a))
            to.append(int(b))
    m = len(frm)
    radius = rng.uniform(1.5e-3, 4e-3, m)
    vessels = [{"id": f"v{i}", "from": f"n{frm[i]}", "to": f"n{to[i]}",
                "length_m": float(rng.uniform(0.02, 0.1)), "radius_m": float(radius[i])} for i in range(m)]
    for i in rng.choice(m, size=min(lesions, m), replace=False):
        vessels[i]["stenosis_reduction"] = float(rng.uniform(0.3, 0.8))
        vessels[i]["stenosis_length_m"] = float(min(0.01, 0.5 * vessels[i]["length_m"]))
    beds = [{"id": f"b{k}", "node": f"n{k}", "resistance_pa_s_m3": float(rng.uniform(0.5, 5) * 1e9)}
            for k in leaves]
    if series and len(inner) > 1:
        beds.append({"id": "series", "node": f"n{inner[-1]}", "outflow_node": f"n{leaves[0]}",
                     "resistance_pa_s_m3": float(rng.uniform(0.5, 5) * 1e9)})
    root = ({"inflow_m3_s": float(rng.uniform(20, 200)) * 1e-6 / 60} if inlet == "inflow"
            else {"pressure_pa": float(rng.uniform(90, 100)) * MMHG_PA})
    return Network.build(nodes={"n0": root}, vessels=vessels, beds=beds, name="random")


def with_targets(network: Network, rng: np.random.Generator, *, pressure_mmhg: float | None = None,
                 share_rows=None) -> Network:
    """``network`` with random shares (Dirichlet, summing to one over terminal beds) and a
    target pressure at the root."""
    import dataclasses

    beds = network.beds
    terminal = np.flatnonzero(beds.outflow_node < 0)
    share = np.full(len(beds), np.nan)
    share[terminal] = rng.dirichlet(np.full(len(terminal), 3.0))
    series = np.flatnonzero(beds.outflow_node >= 0)
    share[series] = 0.2 * rng.uniform(0.2, 0.9, len(series))
    if share_rows is not None:
        keep = np.zeros(len(beds), dtype=bool)
        keep[share_rows] = True
        share = np.where(keep, share, np.nan)
    target = np.full(len(network.nodes), np.nan)
    if pressure_mmhg is not None:
        target[0] = pressure_mmhg * MMHG_PA
    return dataclasses.replace(network, beds=dataclasses.replace(beds, share=share),
                               nodes=dataclasses.replace(network.nodes, target_pressure_pa=target))
