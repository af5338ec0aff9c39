"""Time the pulsatile analysis of a generated arterial tree against the steady solve of the same tree.

Usage::

    python benchmarks/pulse.py [--vessels 10000] [--harmonics 20] [--repeat 3]

The tree is a random asymmetric binary tree grown breadth first from a 12 mm root, Murray's
law at every branch (r_parent^3 = sum r_child^3), lengths 20 radii, walls h = 0.1 r with a
modulus rising from 0.4 MPa (aorta) to 1.6 MPa (small arteries), a third of the segments
linearly tapered, the terminal segments rigid (lumped, no wall data), a bed on every leaf,
and an ejection inflow (70 mL, 70 bpm) at the root.  The Windkessels get a total compliance
of 1.5 mL/mmHg or 1.25 times the tree's own, whichever is larger.  Each figure is the median of
``--repeat`` runs in this process, after one warm-up run; one BLAS thread is advised
(OMP_NUM_THREADS=1).
"""

from __future__ import annotations

import argparse
import statistics
import time

import numpy as np

from vesselnet.model import Network
from vesselnet.pulse import solve_pulse
from vesselnet.pulsesetup import conduit_compliance, setup_windkessels
from vesselnet.solve import solve
from vesselnet.waveforms import DEFAULT_HARMONICS


def generated_tree(n_vessels: int, seed: int = 271828) -> Network:
    """The benchmark tree with ``n_vessels`` segments (rounded up to an odd count)."""
    rng = np.random.default_rng(seed)
    frm, to, radius = [0], [1], [12e-3]
    frontier = [0]                       # vessel rows whose end node has no children yet
    n_nodes = 2
    while len(frm) < n_vessels:
        parent = frontier.pop(0)
        share = rng.uniform(0.25, 0.5)   # flow split, smaller daughter
        for s in (share, 1 - share):
            frm.append(to[parent])
            to.append(n_nodes)
            radius.append(radius[parent] * s ** (1 / 3))
            frontier.append(len(frm) - 1)
            n_nodes += 1
    r = np.array(radius)
    leaf = np.zeros(len(r), dtype=bool)
    leaf[frontier] = True
    taper = rng.random(len(r)) < 1 / 3
    modulus = np.clip(0.4e6 * (12e-3 / r) ** 0.5, 0.4e6, 1.6e6)
    vessels = {"id": [f"v{i}" for i in range(len(r))], "from": [f"n{k}" for k in frm],
               "to": [f"n{k}" for k in to], "length_m": 20 * r, "radius_in_m": r,
               "radius_out_m": np.where(taper, 0.9 * r, r),
               "wall_thickness_m": np.where(leaf, np.nan, 0.1 * r),
               "wall_modulus_pa": np.where(leaf, np.nan, modulus)}
    leaves = np.flatnonzero(leaf)
    # bed resistance in inverse proportion to r^3 (Murray flow share); total about 1 mmHg*s/mL
    g = r[leaves] ** 3
    resistance = 1.0e8 * g.sum() / g
    beds = {"id": [f"b{i}" for i in leaves], "node": [f"n{to[i]}" for i in leaves],
            "resistance_pa_s_m3": resistance}
    return Network.from_columns(
        vessels=vessels, beds=beds, nodes={"id": ["n0"], "inflow_m3_s": [70e-6 * 70 / 60]},
        name=f"generated tree, {len(r)} vessels",
        inflow_waveforms={"n0": {"stroke_volume_m3": 70e-6, "heart_rate_hz": 70 / 60,
                                 "ejection_time_s": 0.3}})


def median_seconds(fn, repeat: int) -> tuple[float, object]:
    fn()
    times, out = [], None
    for _ in range(repeat):
        start = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - start)
    return statistics.median(times), out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--vessels", type=int, default=10_000)
    parser.add_argument("--harmonics", type=int, default=DEFAULT_HARMONICS)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    net = generated_tree(args.vessels)
    print(f"{net.name}: {len(net.nodes)} nodes, {len(net.beds)} beds, {args.harmonics} harmonics")
    t_steady, steady = median_seconds(lambda: solve(net), args.repeat)
    total = max(1.5e-6 / 133.322387415, 1.25 * conduit_compliance(net))
    t_setup, setup = median_seconds(lambda: setup_windkessels(net, steady=steady,
                                                              total_compliance_m3_pa=total), args.repeat)
    wk = setup.network
    t_pulse, result = median_seconds(
        lambda: solve_pulse(wk, steady=steady, n_harmonics=args.harmonics), args.repeat)
    t_wave, _ = median_seconds(lambda: (result.node_pressure_waveform_pa.sum(),
                                        result.vessel_flow_waveform_m3_s.sum()), args.repeat)
    t_all, _ = median_seconds(lambda: _fresh(wk, steady, args.harmonics), args.repeat)
    t_coarse, coarse = median_seconds(
        lambda: solve_pulse(wk, steady=steady, n_harmonics=args.harmonics, taper_subsegments=4), args.repeat)
    change = float(np.nanmax(np.abs(coarse.node_pulse_pressure_pa - result.node_pulse_pressure_pa)
                             / result.node_pulse_pressure_pa))
    print(f"steady solve (baseline)               {t_steady:8.3f} s")
    print(f"Windkessel set-up                     {t_setup:8.3f} s")
    print(f"solve_pulse ({args.harmonics + 1} harmonic solves)     {t_pulse:8.3f} s"
          f"   ({t_pulse / t_steady:.1f} x the steady solve)")
    print(f"waveforms of every node and vessel    {t_wave:8.3f} s")
    print(f"solve_pulse and every index           {t_all:8.3f} s")
    print(f"solve_pulse, 4 pieces per taper       {t_coarse:8.3f} s   (pulse pressures change "
          f"by at most {100 * change:.2f} %)")
    print(f"checks: 0 Hz vs steady {result.zero_harmonic_difference:.1e}, "
          f"harmonic residual {result.harmonic_residual:.1e}, root pulse pressure "
          f"{result.node_pulse_pressure_pa[0] / 133.322387415:.1f} mmHg")


def _fresh(network, steady, harmonics):
    r = solve_pulse(network, steady=steady, n_harmonics=harmonics)
    return (r.node_pulse_pressure_pa.sum(), r.vessel_pulsatility_index.sum(),
            r.vessel_reversed_fraction.sum(), r.bed_pulsatility_index.sum())


if __name__ == "__main__":
    main()
