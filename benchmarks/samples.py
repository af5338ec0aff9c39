"""Monte Carlo samples per second for a 10^4-vessel network: in-process, 2 local processes, Dask.

A seeded random arterial tree (Murray-law radii, 2 % loop-closing vessels between nearby
branches, a bed on every leaf, root at 100 mmHg) with every radius uncertain (lognormal 5 %)
and every bed resistance uncertain (lognormal 10 %).  Side by side in the same run:

* baseline: the obvious loop, ``solve(sample_network(...))`` per sample;
* in-process: the engine with the prepared solver (structure and ordering reused);
* 2 local processes (``--workers 2``), wall time including the pool's start, and the
  start-up alone (a 2-sample run), so the throughput after start-up can be read off;
* with ``--dask``: a Dask LocalCluster of 2 single-threaded worker processes (cluster
  start timed separately).

All modes must give identical numbers; the script checks it.

Run:  python benchmarks/samples.py [--vessels N] [--samples S] [--dask]
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from vesselnet.engine import Execution
from vesselnet.model import Network
from vesselnet.solve import solve
from vesselnet.uncertainty import read_uncertainty, run_uncertainty, sample_network
from vesselnet.yamlread import load_text

MMHG = 133.322387415
SEED = 20260611
UNCERTAINTY = """vesselnet: 1
uncertainty:
  - {vessels: all, quantity: radius, distribution: lognormal, relative: 5%}
  - {beds: all, quantity: resistance, distribution: lognormal, relative: 10%}
"""


def random_tree(n_vessels: int, seed: int = SEED) -> Network:
    """About ``n_vessels`` vessels: a binary Murray tree plus 2 % local loop-closing vessels."""
    rng = np.random.default_rng(seed)
    n_loops = n_vessels // 50
    frm, to, radius, leaves = [0], [1], [0.01], [0]
    n_nodes = 2
    while len(frm) + 2 <= n_vessels - n_loops:
        e = leaves.pop(int(rng.integers(len(leaves))))
        a = rng.uniform(0.3, 0.7)
        scale = (a**3 + (1 - a) ** 3) ** (1 / 3)             # Murray: r^3 = r1^3 + r2^3
        for part in (a, 1 - a):
            frm.append(to[e])
            to.append(n_nodes)
            radius.append(radius[e] * part / scale)
            leaves.append(len(frm) - 1)
            n_nodes += 1
    radius = np.array(radius)
    inner = np.array(sorted(set(frm)))
    a = rng.choice(inner, n_loops)
    b = np.clip(a + rng.integers(2, 40, n_loops), 1, n_nodes - 1)
    keep = a != b
    ids = np.array([f"n{i}" for i in range(n_nodes)])
    vessels = {"id": [f"v{i}" for i in range(len(frm) + int(keep.sum()))],
               "from": list(ids[frm]) + list(ids[a[keep]]), "to": list(ids[to]) + list(ids[b[keep]]),
               "length_m": np.concatenate([radius * 20 * rng.uniform(0.8, 1.2, len(frm)),
                                           np.full(int(keep.sum()), 0.01)]),
               "radius_m": np.concatenate([radius, np.full(int(keep.sum()), 3e-4)])}
    leaf_nodes = ids[[to[e] for e in leaves]]
    beds = {"id": [f"b{i}" for i in range(len(leaf_nodes))], "node": list(leaf_nodes),
            "resistance_pa_s_m3": 1e10 * len(leaf_nodes) * rng.uniform(0.5, 1.5, len(leaf_nodes))}
    return Network.from_columns(vessels=vessels, nodes={"id": ["n0"], "pressure_pa": [100 * MMHG]},
                                beds=beds, name=f"random tree, {len(vessels['id'])} vessels")


def timed(label, count, function):
    start = time.perf_counter()
    out = function()
    seconds = time.perf_counter() - start
    print(f"{label:48s} {seconds:7.2f} s  {count / seconds:8.1f} samples/s")
    return out, seconds


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--vessels", type=int, default=10_000)
    parser.add_argument("--samples", type=int, default=400)
    parser.add_argument("--dask", action="store_true", help="also on a Dask LocalCluster of 2 workers")
    args = parser.parse_args()
    net = random_tree(args.vessels)
    spec = read_uncertainty(load_text(UNCERTAINTY, "bench.yaml"), net, "bench.yaml")
    n = args.samples
    print(f"{net.name}, {len(net.nodes)} nodes, {len(net.beds)} beds; {n} samples")

    def baseline():
        return np.array([solve(sample_network(net, spec, SEED, i)).bed_share for i in range(n)])

    base, base_s = timed("baseline: solve() per sample", n, baseline)
    here, here_s = timed("in-process, prepared solver", n, lambda: run_uncertainty(net, spec, samples=n, seed=SEED))
    # two solvers round differently; shares near 1e-16 keep no relative digits
    np.testing.assert_allclose(here.bed_share, base, rtol=1e-8, atol=1e-10 * float(np.abs(base).max()))
    _, start_s = timed("2 local processes, start-up only (2 samples)", 2,
                       lambda: run_uncertainty(net, spec, samples=2, seed=SEED, execution=Execution(workers=2)))
    pool, pool_s = timed("2 local processes, wall", n,
                         lambda: run_uncertainty(net, spec, samples=n, seed=SEED, execution=Execution(workers=2)))
    assert np.array_equal(pool.bed_share, here.bed_share), "processes differ from in-process"
    print(f"{'2 local processes, after start-up':48s} {pool_s - start_s:7.2f} s  "
          f"{n / max(pool_s - start_s, 1e-9):8.1f} samples/s")
    if args.dask:
        from distributed import LocalCluster

        start = time.perf_counter()
        cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                               silence_logs=40)
        print(f"{'Dask LocalCluster start (2 workers)':48s} {time.perf_counter() - start:7.2f} s")
        try:
            dask, _ = timed("Dask, 2 workers", n, lambda: run_uncertainty(
                net, spec, samples=n, seed=SEED, execution=Execution(scheduler=cluster.scheduler_address)))
        finally:
            cluster.close()
        assert np.array_equal(dask.bed_share, here.bed_share), "Dask differs from in-process"
    print(f"speed-up of the prepared solver over the baseline: {base_s / here_s:.1f}x; "
          "identical numbers in every mode")


if __name__ == "__main__":
    main()
