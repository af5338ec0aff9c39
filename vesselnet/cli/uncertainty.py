"""``vesselnet uncertainty FILE UNCERTAINTY``: Monte Carlo percentile bands of shares and pressures."""

from __future__ import annotations


def add_parser(sub) -> None:
    p = sub.add_parser(
        "uncertainty", help="Monte Carlo over declared input uncertainties: percentile bands",
        description="Draw networks from the uncertainties declared in a YAML file (radius, "
                    "length, bed resistance, lesion severity), solve each, and report percentile "
                    "bands of bed shares and pressures. Reproducible by seed; identical numbers "
                    "in-process, with --workers and with --scheduler.")
    p.add_argument("file", help="the network YAML file")
    p.add_argument("uncertainty", help="the uncertainty YAML file")
    add_execution_options(p)
    p.add_argument("--samples", type=int, metavar="N", help="number of samples (default: the file's, else 500)")
    p.add_argument("--seed", type=int, metavar="S", help="random seed (default: the file's, else a fresh one, printed)")
    p.add_argument("--json", action="store_true", help="print the JSON result (and nothing else) on stdout")
    p.add_argument("-o", "--output", metavar="DIR", help="write bands.csv and samples.csv into DIR")
    p.add_argument("--html", metavar="PATH", help="write an interactive band plot (HTML)")
    p.set_defaults(run=run)


def add_execution_options(p) -> None:
    """--workers / --scheduler / --chunk, shared with the sweep command."""
    where = p.add_mutually_exclusive_group()
    where.add_argument("--workers", type=int, metavar="N", help="run on N local processes")
    where.add_argument("--scheduler", metavar="ADDRESS",
                       help="run on an existing Dask cluster (dask.distributed scheduler address, "
                            "for example tcp://10.0.0.5:8786)")
    p.add_argument("--chunk", type=int, metavar="K", help="items per task (default: automatic)")


def execution_of(args):
    """The :class:`~vesselnet.engine.Execution` the options ask for (exit 2 if wrong)."""
    from ..engine import Execution
    from ..errors import NetworkSpecError, Problem

    if args.workers is not None and args.workers < 1:
        raise NetworkSpecError([Problem("", 0, 0, "--workers", f"must be at least 1, got {args.workers}")])
    if args.chunk is not None and args.chunk < 1:
        raise NetworkSpecError([Problem("", 0, 0, "--chunk", f"must be at least 1, got {args.chunk}")])
    if args.scheduler:
        try:
            import distributed  # noqa: F401
        except ImportError:
            raise NetworkSpecError([Problem("", 0, 0, "--scheduler",
                                            "dask.distributed is not installed",
                                            "pip install 'vesselnet[cluster]'")]) from None
    return Execution(workers=args.workers, scheduler=args.scheduler)


def run(args) -> int:
    import secrets
    import sys
    import time

    from .. import writers
    from ..errors import NetworkSpecError, Problem
    from ..reader import load_network
    from ..uncertainty import DEFAULT_SAMPLES, load_uncertainty, run_uncertainty
    from .progress import ProgressBar
    from .steady import emit

    network = load_network(args.file)
    spec = load_uncertainty(args.uncertainty, network)
    execution = execution_of(args)
    if args.samples is not None and args.samples < 1:
        raise NetworkSpecError([Problem("", 0, 0, "--samples", f"must be at least 1, got {args.samples}")])
    samples = args.samples or spec.samples or DEFAULT_SAMPLES
    seed = args.seed if args.seed is not None else spec.seed
    fresh = seed is None
    if fresh:
        seed = secrets.randbelow(2**31)
    bar = ProgressBar(samples, "uncertainty")
    start = time.perf_counter()
    try:
        mc = run_uncertainty(network, spec, samples=samples, seed=seed, execution=execution,
                             chunk_size=args.chunk, progress=bar)
    finally:
        bar.close()
    seconds = time.perf_counter() - start
    if fresh:
        print(f"vesselnet: seed {seed} (pass --seed {seed} to repeat this run)", file=sys.stderr)
    written = []
    if args.output:
        written += write_band_tables(mc, args.output)
    if args.html:
        from viz.bands import write_band_page

        written.append(write_band_page(mc, args.html))
    if args.json:
        emit(writers.dumps(uncertainty_json(mc)))
    else:
        emit(uncertainty_report(mc, seconds))
        if written:
            emit("wrote " + ", ".join(str(p) for p in written))
    return 0


def uncertainty_report(mc, seconds: float) -> str:
    """Bed table: nominal share and the percentile band, pressure band."""
    import numpy as np

    from ..textreport import format_table
    from ..units import MMHG_PA

    t = mc.bed_bands()
    ps = [f"p{p:g}" for p in mc.percentiles]
    order = np.argsort(-t["share_nominal"], kind="stable")
    rows = []
    for i in order:
        rows.append([t["id"][i], 100 * t["share_nominal"][i]]
                    + [100 * t[f"share_{p}"][i] for p in ps]
                    + [t["pressure_nominal_pa"][i] / MMHG_PA]
                    + [t[f"pressure_{p}_pa"][i] / MMHG_PA for p in ps])
    headers = (["bed", "share [%]"] + [f"{p} [%]" for p in ps] + ["pressure [mmHg]"]
               + [f"{p} [mmHg]" for p in ps])
    rate = mc.samples / max(seconds, 1e-9)
    head = (f"{mc.network.name}: Monte Carlo, {mc.samples} samples, seed {mc.seed}, "
            f"{mc.execution}, {seconds:.1f} s ({rate:.0f} samples/s)")
    inflow = mc.band(mc.inflow_m3_s) * 6e7
    tail = ("total inflow [mL/min]: nominal " + f"{mc.nominal.inflow_m3_s * 6e7:.1f}, "
            + ", ".join(f"{p} {v:.1f}" for p, v in zip(ps, inflow)))
    return "\n".join([head, "", format_table(headers, rows, digits=2), "", tail])


def uncertainty_json(mc) -> dict:
    """The ``uncertainty --json`` document: bands per bed (and per node when kept)."""
    from .. import writers
    from ..units import MMHG_PA

    ps = [f"p{p:g}" for p in mc.percentiles]
    share_band = mc.band(mc.bed_share)
    pressure_band = mc.band(mc.bed_pressure_pa) / MMHG_PA
    flow_band = mc.band(mc.bed_flow_m3_s) * 6e7
    beds = []
    for i, bed in enumerate(mc.network.beds.ids):
        beds.append({"id": bed, "share": writers.number(mc.nominal.bed_share[i]),
                     "share_band": {p: writers.number(v) for p, v in zip(ps, share_band[:, i])},
                     "flow_band": {p: writers.number(v) for p, v in zip(ps, flow_band[:, i])},
                     "pressure": writers.number(mc.nominal.bed_pressure_pa[i] / MMHG_PA),
                     "pressure_band": {p: writers.number(v) for p, v in zip(ps, pressure_band[:, i])}})
    doc = {"vesselnet": writers.FORMAT_VERSION, "network": mc.network.name,
           "units": {"flow": "mL/min", "pressure": "mmHg"}, "samples": mc.samples, "seed": mc.seed,
           "execution": mc.execution, "percentiles": list(mc.percentiles),
           "uncertainties": [e.label for e in mc.spec.entries], "beds": beds}
    if mc.node_pressure_pa is not None:
        band = mc.band(mc.node_pressure_pa) / MMHG_PA
        doc["nodes"] = [{"id": node, "pressure": writers.number(mc.nominal.pressure_pa[k] / MMHG_PA),
                         "pressure_band": {p: writers.number(v) for p, v in zip(ps, band[:, k])}}
                        for k, node in enumerate(mc.network.nodes.ids)]
    return doc


def write_band_tables(mc, directory) -> list:
    """``bands.csv`` (one row per bed) and ``samples.csv`` (one row per sample) into ``directory``."""
    from pathlib import Path

    import numpy as np

    from .. import writers
    from ..units import MMHG_PA

    directory = Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    t = mc.bed_bands()
    columns, units = {}, {}
    for key, values in t.items():
        if key == "id":
            continue
        name = key.removesuffix("_pa")
        columns[name] = values / MMHG_PA if key.endswith("_pa") else values
        if key.endswith("_pa"):
            units[name] = "mmHg"
    bands = writers.csv_text(t["id"], {}, columns, units)
    sample_cols = {"inflow": mc.inflow_m3_s * 6e7}
    sample_units = {"inflow": "mL/min"}
    for i, bed in enumerate(mc.network.beds.ids):
        sample_cols[f"share:{bed}"] = mc.bed_share[:, i]
    samples = writers.csv_text(np.arange(mc.samples), {}, sample_cols, sample_units)
    paths = [directory / "bands.csv", directory / "samples.csv"]
    writers.atomic_write(paths[0], bands)
    writers.atomic_write(paths[1], samples.replace("id,", "sample,", 1))
    return paths
