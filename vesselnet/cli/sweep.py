"""``vesselnet sweep SWEEP``: bed shares over one or two swept parameters, or a list of cases."""

from __future__ import annotations

TEXT_BEDS = 6
"""Bed columns in the terminal table (the CSV and JSON outputs have every reported bed)."""


def add_parser(sub) -> None:
    from .uncertainty import add_execution_options

    p = sub.add_parser(
        "sweep", help="bed shares over one or two swept parameters, or a list of cases",
        description="Solve the cases of a sweep file (a grid of one or two change arguments, or "
                    "named lists of changes) and tabulate and plot the bed shares.")
    p.add_argument("file", help="the sweep YAML file")
    add_execution_options(p)
    p.add_argument("--json", action="store_true", help="print the JSON result (and nothing else) on stdout")
    p.add_argument("-o", "--output", metavar="DIR", help="write sweep.csv into DIR")
    p.add_argument("--html", metavar="PATH", help="write an interactive plot (HTML)")
    p.set_defaults(run=run)


def run(args) -> int:
    import time

    from .. import writers
    from ..sweep import load_sweep, run_sweep
    from .progress import ProgressBar
    from .steady import emit, print_warnings
    from .uncertainty import execution_of

    spec = load_sweep(args.file)
    execution = execution_of(args)
    bar = ProgressBar(len(spec.cases), "sweep", unit="cases")
    start = time.perf_counter()
    try:
        result = run_sweep(spec, execution=execution, chunk_size=args.chunk, progress=bar)
    finally:
        bar.close()
    seconds = time.perf_counter() - start
    written = []
    if args.output:
        written.append(write_sweep_table(result, args.output))
    if args.html:
        from viz.sweeps import write_sweep_page

        written.append(write_sweep_page(result, args.html))
    if args.json:
        emit(writers.dumps(sweep_json(result)))
    else:
        emit(sweep_report(result, seconds))
        if written:
            emit("wrote " + ", ".join(str(p) for p in written))
    print_warnings([f"case '{name}' failed: {why}" for name, why in
                    zip(spec.case_names, result.failure) if why])
    return 0


def sweep_report(result, seconds: float) -> str:
    """One row per case: parameter values and the share of the largest reported beds."""
    import numpy as np

    from ..caution import CAUTION
    from ..textreport import format_table

    spec = result.spec
    rows = result.report_rows
    if len(rows) > TEXT_BEDS:
        first = np.nan_to_num(result.bed_share[0, rows], nan=-1.0)
        rows = rows[np.sort(np.argsort(-first, kind="stable")[:TEXT_BEDS])]
    beds = result.network.beds
    headers = [] if spec.parameters else ["case"]
    for p in spec.parameters:
        unit, _ = p.display()
        headers.append(f"{p.name} [{unit}]" if unit else p.name)
    headers += [f"{beds.ids[r]} [%]" for r in rows] + ["inflow [mL/min]"]
    table = []
    for i, name in enumerate(spec.case_names):
        line = [] if spec.parameters else [name]
        line += [spec.grid[i, k] * p.display()[1] for k, p in enumerate(spec.parameters)]
        line += [100 * result.bed_share[i, r] for r in rows] + [result.inflow_m3_s[i] * 6e7]
        table.append(line)
    head = (f"{spec.name}: {len(spec.cases)} cases on '{result.network.name}', {result.execution}, "
            f"{seconds:.1f} s")
    more = (f"({len(result.report_rows) - len(rows)} more reported beds in the CSV and JSON outputs)"
            if len(result.report_rows) > len(rows) else "")
    return "\n".join([head, CAUTION, "", format_table(headers, table, digits=2)] + ([more] if more else []))


def sweep_json(result) -> dict:
    """The ``sweep --json`` document: per case its parameter values and bed results."""
    from .. import writers
    from ..caution import CAUTION
    from ..units import MMHG_PA

    spec = result.spec
    params = []
    for p in spec.parameters:
        unit, scale = p.display()
        params.append({"name": p.name, "verb": p.change.verb, "vary": p.vary, "unit": unit,
                       "values": [writers.number(v * scale) for v in p.values]})
    cases = []
    for i, name in enumerate(spec.case_names):
        case = {"name": name}
        if spec.parameters:
            case["values"] = [writers.number(spec.grid[i, k] * p.display()[1])
                              for k, p in enumerate(spec.parameters)]
        case["inflow"] = writers.number(result.inflow_m3_s[i] * 6e7)
        case["beds"] = [{"id": bed, "share": writers.number(result.bed_share[i, r]),
                         "flow": writers.number(result.bed_flow_m3_s[i, r] * 6e7),
                         "pressure": writers.number(result.bed_pressure_pa[i, r] / MMHG_PA)}
                        for bed, r in zip(spec.report, result.report_rows)]
        if result.failure[i]:
            case["failure"] = result.failure[i]
        cases.append(case)
    return {"vesselnet": writers.FORMAT_VERSION, "sweep": spec.name, "network": result.network.name,
            "units": {"flow": "mL/min", "pressure": "mmHg"}, "execution": result.execution,
            "caution": CAUTION, "parameters": params, "cases": cases}


def write_sweep_table(result, directory):
    """``sweep.csv``: one row per case, parameter values and each reported bed's share."""
    from pathlib import Path

    from .. import writers

    directory = Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    spec = result.spec
    columns, units = {}, {}
    for k, p in enumerate(spec.parameters):
        unit, scale = p.display()
        columns[p.name] = spec.grid[:, k] * scale
        if unit:
            units[p.name] = unit
    for bed, r in zip(spec.report, result.report_rows):
        columns[f"share:{bed}"] = result.bed_share[:, r]
    columns["inflow"] = result.inflow_m3_s * 6e7
    units["inflow"] = "mL/min"
    text = writers.csv_text(list(spec.case_names), {}, columns, units).replace("id,", "case,", 1)
    path = directory / "sweep.csv"
    writers.atomic_write(path, text)
    return path
