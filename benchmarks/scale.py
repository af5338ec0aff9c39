"""Scale benchmark: seeded networks of 10^4 to 10^6 segments, the whole path, against a baseline.

For each topology (a tree; a tree with local loops; a tree with long-range
loops) and size it writes the network as CSV tables (with a small YAML
file) and as ``.npz``, then, each in a fresh process so that peak memory is
its own:

- vesselnet: ``load_network`` (read and check), ``solve`` split into the
  linear solve and everything else (assembly, Newton bookkeeping, result),
  and ``write_tables`` (the CSV results of ``solve -o``);
- the baseline: the same conductance system assembled the simplest
  vectorised way (COO triplets -> CSR, free rows sliced out) and solved by
  plain ``scipy.sparse.linalg.spsolve`` with its defaults.

Every figure is printed beside the baseline's assemble + solve time, so it
is also a ratio.  Run from the repository root::

    python benchmarks/scale.py                      # 1e4, 1e5, 1e6: about 10 minutes
    python benchmarks/scale.py --sizes 1e4,1e5      # quick
    python benchmarks/scale.py --topologies local --sizes 1e6 --solver superlu
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
SEED = 20240611
BASELINE_TIMEOUT_S = 600


def write_inputs(directory: Path, topology: str, n: int) -> dict[str, Path]:
    """The seeded network as CSV tables + YAML, and as .npz (not timed)."""
    import numpy as np

    from vesselnet.model import Network
    from vesselnet.netfiles import write_network
    from vesselnet.numtext import format_significant, join_rows
    from vesselnet.synthetic import VISCOSITY_PA_S, synthetic_columns

    cols = synthetic_columns(n, topology, seed=SEED + n)
    v, b = cols["vessels"], cols["beds"]
    directory.mkdir(parents=True, exist_ok=True)
    exact = 17  # digits that round-trip every float
    (directory / "vessels.csv").write_text(
        "id,from,to,length[m],radius[m]\n" + join_rows(
            [np.array(v["id"]), np.array(v["from"]), np.array(v["to"]),
             format_significant(v["length_m"], exact), format_significant(v["radius_m"], exact)]))
    (directory / "beds.csv").write_text(
        "id,node,resistance[Pa*s/m3]\n" + join_rows(
            [np.array(b["id"]), np.array(b["node"]),
             format_significant(b["resistance_pa_s_m3"], exact)]))
    (directory / "network.yaml").write_text(
        f"vesselnet: 1\nname: synthetic {topology} {n}\n"
        f"blood: {{viscosity: {VISCOSITY_PA_S * 1e3} cP}}\n"
        f"nodes: {{n0: {{pressure: {float(cols['nodes']['pressure_pa'][0])!r} Pa}}}}\n"
        "vessels_table: vessels.csv\nbeds_table: beds.csv\n")
    from vesselnet.reader import load_network

    net = load_network(directory / "network.yaml")
    write_network(net, directory / "network.npz")
    assert isinstance(net, Network)
    return {"csv": directory / "network.yaml", "npz": directory / "network.npz"}


def run_case(path: str, solver: str, out_dir: str) -> dict:
    """vesselnet's whole path on one input, timed by phase (run in a child process)."""
    t0 = time.perf_counter()
    from vesselnet import writers
    from vesselnet.linsolve import Factorization
    from vesselnet.reader import load_network
    from vesselnet.solve import solve

    class Timed(Factorization):
        spent = 0.0

        def solve(self, A, rhs, structure=None):
            start = time.perf_counter()
            try:
                return super().solve(A, rhs, structure)
            finally:
                self.spent += time.perf_counter() - start

    t_import = time.perf_counter() - t0
    t = time.perf_counter()
    net = load_network(path)
    t_read = time.perf_counter() - t
    linear = Timed(solver)
    t = time.perf_counter()
    result = solve(net, factorization=linear)
    t_solve_all = time.perf_counter() - t
    t = time.perf_counter()
    writers.write_tables(result, out_dir)
    t_write = time.perf_counter() - t
    t = time.perf_counter()
    writers.write_arrays(result, Path(out_dir) / "results.npz")
    t_write_npz = time.perf_counter() - t
    again = Timed(solver)
    solve(net, factorization=again)
    t = time.perf_counter()
    solve(net, factorization=again)   # a second sample of the same topology: analysis reused
    t_reuse = time.perf_counter() - t
    core = t_read + t_solve_all
    return {"import": t_import, "read": t_read, "assemble": t_solve_all - linear.spent,
            "solve": linear.spent, "write": t_write, "write_npz": t_write_npz,
            "e2e": core + t_write, "e2e_npz": core + t_write_npz,
            "after_read": t_solve_all + t_write_npz, "reuse_solve": again.spent / 2,
            "reuse_total": t_reuse,
            "solver": result.solver, "reason": result.solver_reason,
            "mass_balance": result.mass_balance, "peak_mib": _peak_mib(),
            "pressure_sum": float(result.pressure_pa.sum())}


def run_baseline(path: str) -> dict:
    """The plain scipy baseline on the network's arrays (run in a child process)."""
    import numpy as np
    import scipy.sparse as sp
    import scipy.sparse.linalg as spla

    from vesselnet.reader import load_network

    net = load_network(path)
    v, beds, nodes = net.vessels, net.beds, net.nodes
    t = time.perf_counter()
    g = np.pi * v.radius_in_m ** 4 / (8 * net.blood.viscosity_pa_s * v.length_m)
    gb = 1.0 / beds.resistance_pa_s_m3
    n = len(nodes)
    i = np.concatenate([v.from_node, v.to_node, v.from_node, v.to_node, beds.node])
    j = np.concatenate([v.from_node, v.to_node, v.to_node, v.from_node, beds.node])
    A = sp.coo_matrix((np.concatenate([g, g, -g, -g, gb]), (i, j)), shape=(n, n)).tocsr()
    rhs = np.bincount(beds.node, gb * beds.outflow_pressure_pa, n)
    fixed = np.flatnonzero(~np.isnan(nodes.pressure_pa))
    free = np.flatnonzero(np.isnan(nodes.pressure_pa))
    rows = A[free]
    A_ff = rows[:, free].tocsc()
    b = rhs[free] - rows[:, fixed] @ nodes.pressure_pa[fixed]
    t_assemble = time.perf_counter() - t
    t = time.perf_counter()
    x = spla.spsolve(A_ff, b)
    t_solve = time.perf_counter() - t
    return {"assemble": t_assemble, "solve": t_solve, "total": t_assemble + t_solve,
            "peak_mib": _peak_mib(),
            "pressure_sum": float(x.sum() + nodes.pressure_pa[fixed].sum())}


def _peak_mib() -> float:
    """Peak resident memory of this process (VmHWM; ru_maxrss would include the parent's
    peak, which survives exec)."""
    try:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                return float(line.split()[1]) / 1024
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def best_of(repeats: int, args: list[str], timeout: float | None = None) -> dict | None:
    """Each figure the minimum over ``repeats`` fresh processes (peak memory: the maximum)."""
    runs = []
    for _ in range(repeats):
        r = child(args, timeout)
        if r is None:
            return None
        runs.append(r)
    best = dict(runs[0])
    for key, value in runs[0].items():
        if isinstance(value, float):
            values = [r[key] for r in runs]
            best[key] = max(values) if key == "peak_mib" else min(values)
    return best


def child(args: list[str], timeout: float | None = None) -> dict | None:
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    try:
        done = subprocess.run([sys.executable, __file__, *args], capture_output=True, text=True,
                              timeout=timeout, env=env, check=True)
    except subprocess.TimeoutExpired:
        return None
    except subprocess.CalledProcessError as exc:
        raise SystemExit(f"benchmark child failed: {' '.join(args)}\n{exc.stderr}") from None
    return json.loads(done.stdout.strip().splitlines()[-1])


def command_seconds(args: list[str], repeats: int) -> list[float]:
    """Wall times of ``python -m vesselnet ARGS``, one a fresh process (run from a temporary folder)."""
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        subprocess.run([sys.executable, "-m", "vesselnet", *args], capture_output=True, check=True,
                       cwd=tempfile.gettempdir())
        times.append(time.perf_counter() - t)
    return times


def cli_seconds(path: Path, out: Path, repeats: int) -> float:
    """Best wall time of the command ``vesselnet solve FILE -o OUT.npz`` (interpreter start,
    imports, the terminal report included)."""
    return min(command_seconds(["solve", str(path), "-o", str(out)], repeats))


def help_seconds() -> float:
    """Median wall time of ``python -m vesselnet --help`` over five runs."""
    return sorted(command_seconds(["--help"], 5))[2]


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--sizes", default="1e4,1e5,1e6", help="segment counts, comma-separated")
    parser.add_argument("--topologies", default="tree,local,long")
    parser.add_argument("--formats", default="csv,npz", help="input forms to time: csv, npz")
    parser.add_argument("--solver", default="auto")
    parser.add_argument("--repeats", type=int, default=3,
                        help="fresh processes per figure; the minimum time is reported (default 3)")
    parser.add_argument("--workdir", help="keep the generated files here (default: a temporary folder)")
    parser.add_argument("--baseline-timeout", type=float, default=BASELINE_TIMEOUT_S,
                        help=f"seconds before the baseline solve is given up (default {BASELINE_TIMEOUT_S})")
    parser.add_argument("--cli", action="store_true",
                        help="also time the command 'vesselnet solve FILE -o OUT.npz' as a whole")
    parser.add_argument("--case", nargs=3, help=argparse.SUPPRESS)
    parser.add_argument("--baseline", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.case:
        print(json.dumps(run_case(*args.case)))
        return 0
    if args.baseline:
        print(json.dumps(run_baseline(args.baseline)))
        return 0
    sys.path.insert(0, str(ROOT))
    sizes = [int(float(s)) for s in args.sizes.split(",")]
    work = Path(args.workdir or tempfile.mkdtemp(prefix="vesselnet-scale-"))
    print(f"vesselnet scale benchmark: seed {SEED}, solver {args.solver}, "
          f"python {sys.version.split()[0]}, {os.cpu_count()} cores; seconds (best of "
          f"{args.repeats} fresh processes), peak MiB per process")
    print("e2e = read + assemble + solve + write (csv: the tables of solve -o; npz: write_arrays); "
          "after read = assemble + solve + write npz; base = baseline assemble + solve "
          "(COO -> CSR, spsolve defaults); reuse solve = linear solve of a second sample; "
          "cli npz = the command 'vesselnet solve FILE -o OUT.npz' (with --cli)")
    header = ("topology", "N", "input", "read", "assemble", "solve", "write csv", "write npz",
              "e2e csv", "e2e npz", "after read", "peak MiB", "base asm", "base solve", "base",
              "base MiB", "e2e csv/base", "e2e npz/base", "reuse solve", "cli npz", "solver")
    print(" | ".join(header))
    print(" | ".join("---" for _ in header))
    for topology in args.topologies.split(","):
        for n in sizes:
            paths = write_inputs(work / f"{topology}-{n}", topology, n)
            base = best_of(args.repeats, ["--baseline", str(paths["npz"])], timeout=args.baseline_timeout)
            for form in args.formats.split(","):
                out = work / f"{topology}-{n}" / f"out-{form}"
                r = best_of(args.repeats, ["--case", str(paths[form]), args.solver, str(out)])
                b = base["total"] if base else None
                never = f"> {args.baseline_timeout:g}"
                cells = [topology, f"{n:.0e}", form] + [f"{r[k]:.3f}" for k in (
                    "read", "assemble", "solve", "write", "write_npz", "e2e", "e2e_npz", "after_read")]
                cells += [f"{r['peak_mib']:.0f}",
                          f"{base['assemble']:.3f}" if base else "-",
                          f"{base['solve']:.3f}" if base else never,
                          f"{b:.3f}" if base else never,
                          f"{base['peak_mib']:.0f}" if base else "-",
                          f"{r['e2e'] / b:.2f}" if base else "-",
                          f"{r['e2e_npz'] / b:.2f}" if base else "-",
                          f"{r['reuse_solve']:.3f}",
                          f"{cli_seconds(paths[form], out / 'cli.npz', args.repeats):.2f}"
                          if args.cli else "-", r["solver"]]
                if base and abs(r["pressure_sum"] - base["pressure_sum"]) > 1e-9 * abs(base["pressure_sum"]):
                    cells[-1] += " (DISAGREES with the baseline)"
                print(" | ".join(cells), flush=True)
    print(f"vesselnet --help: {help_seconds():.3f} s (median of 5)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
