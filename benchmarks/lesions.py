"""Newton iterations and seconds for a 10^4-vessel network with 50 lesions.

A seeded random arterial tree (Murray-law radii, 2 % loop-closing
collaterals between nearby branches, beds at the leaves) is solved three
ways, side by side in the same run:

* baseline: no lesion (a linear network: one Newton step);
* 50 lesions (Young-Tsai, 50-90 % diameter reduction) on random vessels;
* the same 50 lesions with every bed autoregulating (reserve 4, holding
  its baseline flow).

Run:  python benchmarks/lesions.py [--vessels N] [--lesions K] [--repeat R]
Prints the median wall time of each solve, its Newton steps and the final
mass balance.  Seeds are fixed, so runs are comparable.
"""

from __future__ import annotations

import argparse
import statistics
import time

import numpy as np

from vesselnet import changes
from vesselnet.autoregulation import bed_states, with_targets
from vesselnet.model import Network
from vesselnet.solve import solve

MMHG = 133.322387415
SEED = 20260417


def random_tree(n_vessels: int, seed: int = SEED) -> Network:
    """A random tree of about ``n_vessels`` vessels with 2 % collaterals, root at 100 mmHg."""
    rng = np.random.default_rng(seed)
    n_loops = n_vessels // 50
    n_tree = n_vessels - n_loops
    parent = np.zeros(n_tree + 1, dtype=np.int64)
    depth = np.zeros(n_tree + 1, dtype=np.int64)
    children = np.zeros(n_tree + 1, dtype=np.int64)
    frontier = [0]
    for child in range(1, n_tree + 1):          # grow breadth-first, two or three children
        p = frontier[int(rng.integers(0, min(len(frontier), 8)))]
        parent[child], depth[child] = p, depth[p] + 1
        children[p] += 1
        frontier.append(child)
        if children[p] >= (2 if rng.random() < 0.8 else 3):
            frontier.remove(p)
    radius = 4e-3 * 2.0 ** (-depth[1:] / 3.0) * rng.uniform(0.85, 1.15, n_tree)
    length = np.clip(radius * rng.uniform(15, 40, n_tree), 2e-4, 0.2)
    a, b = parent[1:], np.arange(1, n_tree + 1)
    order = np.argsort(depth[1:], kind="stable")   # collaterals between nodes of similar depth
    picks = rng.integers(0, n_tree - 5, n_loops)
    la, lb = b[order[picks]], b[order[picks + rng.integers(1, 5, n_loops)]]
    r_loop = np.minimum(radius[la - 1], radius[lb - 1]) * 0.5
    ids = [f"v{k}" for k in range(n_vessels)]
    vessels = {"id": ids, "from": [f"n{x}" for x in np.concatenate([a, la])],
               "to": [f"n{x}" for x in np.concatenate([b, lb])],
               "length_m": np.concatenate([length, r_loop * 30]),
               "radius_m": np.concatenate([radius, r_loop])}
    leaves = np.flatnonzero(children == 0)
    r_leaf = 1.0e11 * (radius[leaves - 1] / radius[leaves - 1].mean()) ** -3 * rng.uniform(0.7, 1.3, len(leaves))
    beds = {"id": [f"bed{k}" for k in range(len(leaves))], "node": [f"n{x}" for x in leaves],
            "resistance_pa_s_m3": r_leaf, "outflow_pressure_pa": np.full(len(leaves), 5 * MMHG)}
    nodes = {"id": ["n0"], "pressure_pa": [100 * MMHG]}
    return Network.from_columns(vessels=vessels, nodes=nodes, beds=beds, name=f"random tree {n_vessels}")


def with_lesions(net: Network, count: int, seed: int = SEED + 1) -> Network:
    """``count`` random lesions, 50-90 % diameter reduction, half the vessel long at most 1 cm."""
    rng = np.random.default_rng(seed)
    rows = rng.choice(len(net.vessels), count, replace=False)
    for row in rows:
        net = changes.narrow(net, vessel=net.vessels.ids[row], reduction=float(rng.uniform(0.5, 0.9)),
                             length_m=float(min(0.01, net.vessels.length_m[row] / 2)),
                             at=float(rng.uniform(0, 1)))
    return net


def timed(net: Network, repeat: int):
    times, result = [], None
    for _ in range(repeat):
        start = time.perf_counter()
        result = solve(net)
        times.append(time.perf_counter() - start)
    return statistics.median(times), result


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--vessels", type=int, default=10_000)
    parser.add_argument("--lesions", type=int, default=50)
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args(argv)
    base = random_tree(args.vessels)
    lesioned = with_lesions(base, args.lesions)
    t0, baseline = timed(base, args.repeat)
    auto = with_targets(changes.autoregulate(lesioned, beds=list(base.beds.ids), reserve=4.0),
                        baseline.bed_flow_m3_s)
    print(f"network: {len(base.vessels)} vessels, {len(base.nodes)} nodes, {len(base.beds)} beds, "
          f"{args.lesions} lesions; median of {args.repeat} runs")
    print(f"{'case':34s} {'seconds':>8s} {'Newton steps':>12s} {'mass balance':>12s}")
    for name, net in (("baseline (no lesion)", base), (f"{args.lesions} lesions", lesioned),
                      (f"{args.lesions} lesions, beds autoregulating", auto)):
        seconds, result = (t0, baseline) if net is base else timed(net, args.repeat)
        print(f"{name:34s} {seconds:8.3f} {result.iterations:12d} {result.mass_balance:12.1e}")
        if net is auto:
            states = bed_states(result)
            print(f"  beds holding {int((states == 'holding').sum())}, exhausted {int((states == 'exhausted').sum())}")
        print("  residuals " + " ".join(f"{h:.1e}" for h in result.residual_history))


if __name__ == "__main__":
    main()
