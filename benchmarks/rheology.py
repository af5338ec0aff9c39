"""Benchmark: the coupled microvascular rheology solve on a generated network.

Generates a synthetic microvascular network (default 10^5 segments, in-vivo
viscosity, 1990 phase separation), then times, in the same run:

* the baseline, one constant-viscosity flow solve of the same network;
* the parts of one flow solve that the coupled iteration could share
  (the sparse pattern, built anew by every solve) against the whole solve;
* one hematocrit march;
* the coupled solve to the default tolerance: iterations, seconds, and the
  seconds per iteration as a multiple of the baseline solve.

Peak memory is the process's resident-set high-water mark (getrusage), after
the generation and after the coupled solve.

Usage::

    python benchmarks/rheology.py [--segments 100000] [--seed 20250611]
"""

from __future__ import annotations

import argparse
import dataclasses
import resource
import sys
import time

import numpy as np


def peak_rss_mib() -> float:
    """Resident-set high-water mark of this process (MiB; Linux reports KiB)."""
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--segments", type=int, default=100_000)
    parser.add_argument("--seed", type=int, default=20250611)
    parser.add_argument("--relaxation", type=float, default=None)
    parser.add_argument("--anderson", type=int, default=None, help="Anderson memory (0: plain)")
    args = parser.parse_args(argv)

    from vesselnet.assembly import NodalPattern
    from vesselnet.generate import microvascular_network
    from vesselnet.rheology import solve_rheology, _boundary_inflow
    from vesselnet.hematocrit import march_hematocrit
    from vesselnet.solve import element_groups, solve

    rss_start = peak_rss_mib()
    t0 = time.perf_counter()
    net = microvascular_network(args.segments, seed=args.seed)
    t_generate = time.perf_counter() - t0
    rss_generated = peak_rss_mib()
    print(f"network: {len(net.vessels)} segments, {len(net.nodes)} nodes "
          f"(generated in {t_generate:.2f} s); viscosity {net.blood.viscosity_law}, "
          f"separation {net.blood.separation}")

    constant = dataclasses.replace(net, blood=dataclasses.replace(
        net.blood, viscosity_law="constant", separation="none"))
    t0 = time.perf_counter()
    base = solve(constant)
    t_base = time.perf_counter() - t0
    print(f"baseline: one constant-viscosity flow solve {t_base:.2f} s "
          f"({base.iterations} Newton step)")

    groups = element_groups(constant, base.vessel_viscosity_pa_s)
    a = np.concatenate([g.a for g in groups])
    b = np.concatenate([g.b for g in groups])
    t0 = time.perf_counter()
    NodalPattern(len(net.nodes), a, b, np.isnan(net.nodes.pressure_pa))
    t_pattern = time.perf_counter() - t0
    print(f"sparse pattern build {t_pattern:.3f} s = {100 * t_pattern / t_base:.1f} % of a solve "
          "(what reusing one pattern across iterations would save)")

    v = net.vessels
    t0 = time.perf_counter()
    march_hematocrit(len(net.nodes), v.from_node, v.to_node, base.vessel_flow_m3_s,
                     v.radius_in_m + v.radius_out_m, np.full(len(net.nodes), 0.45),
                     _boundary_inflow(net, base), law=net.blood.separation)
    t_march = time.perf_counter() - t0
    print(f"one hematocrit march {t_march:.3f} s")

    options = {k: val for k, val in (("relaxation", args.relaxation),
                                     ("anderson_memory", args.anderson)) if val is not None}
    t0 = time.perf_counter()
    result = solve_rheology(net, **options)
    t_coupled = time.perf_counter() - t0
    checks = result.extra_checks["rheology"]
    k = checks["iterations"]
    print(f"coupled solve: {k} iterations, {t_coupled:.1f} s "
          f"({t_coupled / k:.2f} s per iteration = {t_coupled / k / t_base:.2f} x baseline); "
          f"relaxation {checks['relaxation']}, Anderson memory {checks['anderson_memory']}, "
          f"final hematocrit change {checks['hematocrit_residual']:.1e}, "
          f"flow change {checks['flow_residual']:.1e}")
    h = result.vessel_extra["hematocrit"]
    print(f"discharge hematocrit: min {h.min():.3f}, median {np.median(h):.3f}, "
          f"max {h.max():.3f}; {checks['plasma_only_vessels']} plasma-only vessels; "
          f"{len(result.warnings)} warning(s)")
    print(f"peak memory (RSS high-water): {rss_start:.0f} MiB after imports, "
          f"{rss_generated:.0f} MiB after generation, {peak_rss_mib():.0f} MiB after the "
          "coupled solve")
    return 0


if __name__ == "__main__":
    sys.exit(main())
