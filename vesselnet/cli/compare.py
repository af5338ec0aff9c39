"""``vesselnet compare SCENARIOS``: each scenario against the baseline."""

from __future__ import annotations


def add_parser(sub) -> None:
    p = sub.add_parser("compare", help="each scenario of a scenario file against the baseline",
                       description="Solve the baseline network and every scenario of a scenario file "
                                   "and report bed flows and their change, bed states, lesions and "
                                   "reversed flow.")
    p.add_argument("file", help="the scenario YAML file (or the name of a bundled one)")
    p.add_argument("--json", action="store_true", help="print the JSON result (and nothing else) on stdout")
    p.add_argument("-o", "--output", metavar="DIR",
                   help="write compare.json, beds.csv and lesions.csv (one row per scenario and item) into DIR")
    p.add_argument("--summary", action="store_true", help="print only the scenarios-at-a-glance table")
    p.add_argument("--max-iterations", type=int, default=None, metavar="N",
                   help="Newton step cap per solve (default 50)")
    p.set_defaults(run=run)


def run(args) -> int:
    from pathlib import Path

    from .. import writers
    from ..compare import compare_file, comparison_json
    from ..comparetext import comparison_report
    from ..solve import DEFAULT_MAX_ITERATIONS
    from .steady import emit, print_warnings

    path = Path(args.file)
    if not path.exists():
        path = _bundled(args.file) or path
    comparison = compare_file(path, max_iterations=args.max_iterations or DEFAULT_MAX_ITERATIONS)
    if args.output:
        paths = write_outputs(comparison, args.output)
    if args.json:
        emit(writers.dumps(comparison_json(comparison)))
        for outcome in comparison.scenarios:
            print_warnings(f"scenario '{outcome.name}': {w}" for w in outcome.result.warnings)
    else:
        emit(comparison_report(comparison, summary_only=args.summary))
        if args.output:
            emit("wrote " + ", ".join(str(p) for p in paths))
    return 0


def _bundled(name: str):
    from ..demos import demo_folder

    candidate = demo_folder() / (name if name.endswith(".yaml") else name + ".yaml")
    return candidate if candidate.is_file() and "/" not in name else None


def write_outputs(comparison, directory):
    """compare.json, beds.csv and lesions.csv (long tables: one row per scenario and item)."""
    from pathlib import Path

    import numpy as np

    from .. import writers
    from ..autoregulation import bed_states
    from ..compare import comparison_json
    from ..lesions import lesion_table
    from ..units import DISPLAY_UNITS, from_si

    directory = Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    flow, pressure = DISPLAY_UNITS["flow"], DISPLAY_UNITS["pressure"]
    bed_ids, bed_text, bed_cols = [], {"scenario": [], "state": []}, {}
    lesion_ids, lesion_text, lesion_cols = [], {"scenario": []}, {}
    for outcome in comparison.scenarios:
        result = outcome.result
        bed_ids += list(result.network.beds.ids)
        bed_text["scenario"] += [outcome.name] * len(result.network.beds)
        bed_text["state"] += [str(s) for s in bed_states(result)]
        for name, values in (("flow", from_si(result.bed_flow_m3_s, "flow", flow)),
                             ("share", result.bed_share),
                             ("flow_change", from_si(outcome.bed_flow_change_m3_s, "flow", flow)),
                             ("flow_change_percent", outcome.bed_flow_change_percent),
                             ("perfusion_pressure", from_si(result.bed_perfusion_pressure_pa, "pressure",
                                                            pressure))):
            bed_cols.setdefault(name, []).append(values)
        table = lesion_table(result)
        lesion_ids += table["vessel"].tolist()
        lesion_text["scenario"] += [outcome.name] * len(table["row"])
        for name, values in (("reduction", table["reduction"]),
                             ("flow", from_si(table["flow_m3_s"], "flow", flow)),
                             ("pressure_drop", from_si(table["pressure_drop_pa"], "pressure", pressure)),
                             ("pressure_ratio", table["pressure_ratio"])):
            lesion_cols.setdefault(name, []).append(values)
    units = {"flow": flow, "flow_change": flow, "perfusion_pressure": pressure, "pressure_drop": pressure}
    texts = {
        "compare.json": writers.dumps(comparison_json(comparison)),
        "beds.csv": writers.csv_text(bed_ids, bed_text, {k: np.concatenate(v) for k, v in bed_cols.items()},
                                     units),
        "lesions.csv": writers.csv_text(lesion_ids, lesion_text,
                                        {k: np.concatenate(v) if v else np.zeros(0)
                                         for k, v in lesion_cols.items()} if lesion_cols else {}, units),
    }
    paths = []
    for name, text in texts.items():
        writers.atomic_write(directory / name, text)
        paths.append(directory / name)
    return paths
