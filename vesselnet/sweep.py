"""Parameter sweeps: one or two change arguments over ranges, or a list of cases.

A sweep file (our own format) names a network and either ``parameters``
(one or two; the cases are their grid) or ``cases`` (named lists of SPEC
section 3 changes)::

    vesselnet: 1
    name: SFA lesion and foot tone
    network: leg.yaml              # relative to this file
    units: {length: cm}            # defaults for the numbers below
    report: [foot, calf_muscle_superficial]    # beds to report (default: all)
    changes:                       # optional: made before every case
      - scale_radius: {tag: skin, factor: 0.9}
    parameters:
      - name: SFA lesion           # optional label
        change: {narrow: {vessel: sfa_mid, length: 3}}
        vary: reduction            # the argument that takes the values
        values: {from: 0%, to: 90%, steps: 10}     # or a list: [0, 50%, 70%]
      - change: {scale_bed: {bed: foot}}
        vary: factor
        values: {from: 0.5, to: 2, steps: 4, scale: log}

or, instead of ``parameters``::

    cases:
      - {name: baseline, changes: []}
      - {name: SFA occluded, changes: [{occlude: {vessel: sfa_mid}}]}

Every case is solved with :func:`vesselnet.solve.solve`; autoregulating
beds without an explicit target hold their flow in the unchanged network,
as in ``vesselnet compare``.

Examples
--------
>>> from vesselnet.demos import demo_path
>>> text = f'''
... vesselnet: 1
... network: {demo_path("leg")}
... units: {{length: cm}}
... report: [foot]
... parameters:
...   - change: {{narrow: {{vessel: sfa_mid, length: 3}}}}
...     vary: reduction
...     values: [0%, 90%]
... '''
>>> result = run_sweep(read_sweep_text(text, "sweep.yaml"))
>>> shares = result.bed_share[:, result.network.beds.index["foot"]]
>>> bool(shares[1] < shares[0])
True
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from . import yamlread
from .changefile import VERBS, Change, apply_changes, read_change, read_changes
from .engine import Execution, ProgressCallback, run_chunked
from .errors import NetworkSpecError, SolveError
from .fields import FieldReader, near_miss
from .interrupts import Interrupted
from .model import Network
from .reader import begin_file, load_network
from .solve import solve
from .units import DISPLAY_UNITS, from_si

TOP_KEYS = ("vesselnet", "name", "description", "units", "network", "report", "changes",
            "parameters", "cases")
PARAMETER_KEYS = ("name", "change", "vary", "values")
CASE_KEYS = ("name", "changes")
RANGE_KEYS = ("from", "to", "steps", "scale")
MAX_CASES = 100_000


@dataclass(frozen=True)
class SweepParameter:
    """One swept argument: its label, the change it belongs to, its values (SI)."""

    name: str
    change: Change
    vary: str
    keyword: str
    kind: str
    values: tuple[float, ...]

    def display(self) -> tuple[str, float]:
        """(unit label, factor from SI) for tables and axes: % for fractions, none for factors."""
        if self.keyword == "factor":
            return "", 1.0
        if self.kind == "fraction":
            return "%", 100.0
        unit = DISPLAY_UNITS.get(self.kind, "")
        return (unit, float(from_si(1.0, self.kind, unit))) if unit else ("", 1.0)


@dataclass(frozen=True, eq=False)
class SweepSpec:
    """A read sweep file: base network, common changes, parameters or cases."""

    source: str
    name: str
    network: Network
    report: tuple[str, ...]
    common: tuple[Change, ...]
    parameters: tuple[SweepParameter, ...]
    case_names: tuple[str, ...]
    cases: tuple[tuple[Change, ...], ...]
    grid: np.ndarray


def load_sweep(path) -> SweepSpec:
    """Read a sweep file and its network (every problem located)."""
    path = Path(path)
    return read_sweep(yamlread.load_file(path), str(path), path.parent)


def read_sweep_text(text: str, file: str = "<input>", base_dir=".") -> SweepSpec:
    """Like :func:`load_sweep`, from YAML text (the network path is relative to ``base_dir``)."""
    return read_sweep(yamlread.load_text(text, file), file, Path(base_dir))


def read_sweep(doc, file: str, base_dir: Path) -> SweepSpec:
    """A sweep from a parsed document (see :mod:`vesselnet.yamlread`)."""
    fr = begin_file(doc, file, TOP_KEYS,
                    "start it with 'vesselnet: 1', 'network:' and 'parameters:'")
    name = fr.text(doc, "name", "name", default=Path(file).stem) or Path(file).stem
    network_path = fr.text(doc, "network", "network", required=True)
    common = tuple(read_changes(fr, doc, "changes", "changes", required=False))
    parameters, case_names, cases, grid = (), (), (), np.zeros((0, 0))
    if ("parameters" in doc) == ("cases" in doc):
        fr.add((1, 1), "top level", "give either 'parameters' (one or two) or 'cases'",
               "a sweep varies parameters over values, or lists cases of changes")
    elif "parameters" in doc:
        parameters = _read_parameters(fr, doc)
        size = int(np.prod([len(p.values) for p in parameters])) if parameters else 0
        if size > MAX_CASES:  # refused before the grid is built
            fr.add(doc.where("parameters"), "parameters",
                   f"the grid has {size} cases, more than {MAX_CASES}", "use fewer steps")
        elif parameters:
            grid = np.array(np.meshgrid(*[p.values for p in parameters], indexing="ij")).reshape(
                len(parameters), -1).T
            case_names = tuple(_case_name(parameters, row) for row in grid)
            cases = tuple(tuple(dataclasses.replace(p.change, arguments={**p.change.arguments,
                                                                       p.keyword: float(x)})
                                for p, x in zip(parameters, row)) for row in grid)
    else:
        case_names, cases = _read_cases(fr, doc)
    target = base_dir / network_path if network_path else None
    if target is not None and not target.is_file():
        fr.add(doc.where("network"), "network", f"network file '{network_path}' not found "
               f"(looked for {target})", "give the path relative to this sweep file")
    fr.raise_if_any()
    network = load_network(target)
    report = _read_report(fr, doc, network)
    fr.raise_if_any()
    spec = SweepSpec(source=file, name=name, network=network, report=report, common=common,
                     parameters=parameters, case_names=case_names, cases=cases, grid=grid)
    _check_first_cases(spec)
    return spec


def _read_parameters(fr: FieldReader, doc) -> tuple[SweepParameter, ...]:
    items = fr.sequence(doc, "parameters", "parameters", required=True) or []
    if not 1 <= len(items) <= 2:
        fr.add(doc.where("parameters"), "parameters",
               f"a sweep varies one or two parameters, got {len(items)}",
               "list several cases under 'cases:' for anything else")
        return ()
    out = []
    for k, item in enumerate(items):
        label = f"parameters[{k}]"
        if not isinstance(item, dict):
            fr.add(items.where(k), label, "a parameter must be a mapping with change, vary and values")
            continue
        fr.allow(item, PARAMETER_KEYS, label)
        change_map = fr.mapping(item, "change", label, required=True)
        vary = fr.text(item, "vary", label, required=True)
        if change_map is None or vary is None:
            continue
        if len(change_map) != 1:
            fr.add(item.where("change"), label, "'change' must hold exactly one verb, like "
                   "{narrow: {vessel: sfa, length: 3}}")
            continue
        [(verb, args)] = change_map.items()
        spec = VERBS.get(verb, (None, {}))[1]
        if verb in VERBS and vary not in spec:
            fr.add(item.where("vary"), label, f"'{vary}' is not a number argument of '{verb}'",
                   near_miss(vary, spec) or ("arguments: " + ", ".join(spec) if spec else
                                             f"'{verb}' has no number to vary"))
            continue
        if verb not in VERBS or not isinstance(args, dict):
            read_change(fr, change_map, label + " change", where=item.where("change"))
            continue
        keyword, kind, options = spec[vary]
        values = _read_values(fr, item, kind, options, label)
        if not values:
            continue
        filled = yamlread.LocatedDict(args)
        filled.file, filled.line, filled.column = args.file, args.line, args.column
        filled._where, filled._key_where = dict(args._where), dict(args._key_where)
        filled[vary] = values[0][1]
        filled._where[vary] = item.where("values")
        outer = yamlread.LocatedDict({verb: filled})
        outer.file, outer.line, outer.column = change_map.file, change_map.line, change_map.column
        outer._where, outer._key_where = dict(change_map._where), dict(change_map._key_where)
        change = read_change(fr, outer, label + " change", where=item.where("change"))
        if change is None:
            continue
        default_name = f"{verb} {vary}"
        name = fr.text(item, "name", label, default=default_name) or default_name
        out.append(SweepParameter(name=name, change=change, vary=vary, keyword=keyword, kind=kind,
                                  values=tuple(si for si, _ in values)))
    return tuple(out)


def _read_values(fr: FieldReader, item, kind: str, options: dict, label: str) -> list:
    """[(SI value, value as written)]; a list, or {from, to, steps[, scale]}."""
    spec = item.get("values")
    checks = {k: v for k, v in options.items() if k != "required"}
    out = []
    if isinstance(spec, list):
        if not spec:
            fr.add(item.where("values"), label, "'values' is empty", "give at least one value")
        for j in range(len(spec)):
            holder = yamlread.LocatedDict({"value": spec[j]})
            holder.file, (holder.line, holder.column) = fr.file, spec.where(j)
            holder._where, holder._key_where = {"value": spec.where(j)}, {"value": spec.where(j)}
            value = fr.quantity(holder, "value", kind, f"{label} values[{j}]", required=True, **checks)
            if np.isfinite(value):
                out.append((value, spec[j]))
        return out if len(out) == len(spec) else []
    if not isinstance(spec, dict):
        fr.add(item.where("values"), label, "'values' must be a list, or a range like "
               "{from: 0%, to: 90%, steps: 10}")
        return []
    fr.allow(spec, RANGE_KEYS, f"{label} values")
    start = fr.quantity(spec, "from", kind, f"{label} values", required=True, **checks)
    stop = fr.quantity(spec, "to", kind, f"{label} values", required=True, **checks)
    steps = fr.integer(spec, "steps", f"{label} values", required=True)
    scale = fr.text(spec, "scale", f"{label} values", default="linear")
    if scale not in ("linear", "log"):
        fr.add(spec.where("scale"), f"{label} values", f"unknown scale '{scale}'", "use linear or log")
        return []
    if steps is None or not np.isfinite(start) or not np.isfinite(stop):
        return []
    if steps < 1 or steps > MAX_CASES:
        fr.add(spec.where("steps"), f"{label} values",
               f"steps must be between 1 and {MAX_CASES}, got {steps}")
        return []
    if scale == "log":
        if not (start > 0 and stop > 0):
            fr.add(spec.where("from"), f"{label} values", "a log scale needs positive from and to")
            return []
        values = np.geomspace(start, stop, steps)
    else:
        values = np.linspace(start, stop, steps)
    return [(float(v), spec["from"] if k == 0 else float(v)) for k, v in enumerate(values)]


def _read_cases(fr: FieldReader, doc):
    items = fr.sequence(doc, "cases", "cases", required=True) or []
    names, cases, seen = [], [], {}
    for i, item in enumerate(items):
        label = f"cases[{i}]"
        if not isinstance(item, dict):
            fr.add(items.where(i), label, "a case must be a mapping with 'name' and 'changes'")
            continue
        fr.allow(item, CASE_KEYS, label)
        name = fr.text(item, "name", label, default=f"case {i + 1}") or f"case {i + 1}"
        if name in seen:
            fr.add(item.where("name"), label, f"duplicate case name (also cases[{seen[name]}])",
                   "give each case its own name")
        seen.setdefault(name, i)
        names.append(name)
        cases.append(tuple(read_changes(fr, item, "changes", f"{label} '{name}' changes", required=False)))
    if not items:
        fr.add(doc.where("cases"), "cases", "the file lists no cases", "add at least one")
    return tuple(names), tuple(cases)


def _read_report(fr: FieldReader, doc, network: Network) -> tuple[str, ...]:
    report = doc.get("report")
    if report is None:
        return network.beds.ids
    if not isinstance(report, list) or not report:
        fr.add(doc.where("report"), "report", "'report' must be a list of bed ids, like [foot, calf]")
        return ()
    out = []
    for j, bed in enumerate(report):
        if str(bed) not in network.beds.index:
            fr.add(report.where(j), "report", f"no bed '{bed}' in the network",
                   near_miss(bed, network.beds.ids) or "check the bed ids")
        else:
            out.append(str(bed))
    return tuple(out)


def _case_name(parameters, row) -> str:
    parts = []
    for p, x in zip(parameters, row):
        unit, scale = p.display()
        parts.append(f"{p.name} {x * scale:.4g}{(' ' + unit) if unit and unit != '%' else unit}")
    return ", ".join(parts)


def _check_first_cases(spec: SweepSpec) -> None:
    """Make the changes of every listed case (of a grid: its first and last), so that id
    problems show, located, before any solving."""
    cases = spec.cases if not spec.parameters else spec.cases[:1] + spec.cases[-1:]
    problems = []
    for case in cases:
        try:
            apply_changes(spec.network, spec.common + case)
        except NetworkSpecError as exc:
            problems.extend(p for p in exc.problems if p not in problems)
    if problems:
        raise NetworkSpecError(problems)


class SweepTask:
    """Cases ``start .. stop-1`` of a sweep (a task for :mod:`vesselnet.engine`).

    A case that does not converge is recorded (NaN results and the reason)
    and the sweep goes on; a change that cannot be made is an input error.
    """

    def __init__(self, network: Network, common, cases, baseline_bed_flow_m3_s: np.ndarray):
        self.network, self.common, self.cases = network, tuple(common), tuple(cases)
        self.baseline = baseline_bed_flow_m3_s

    def run_chunk(self, start: int, stop: int) -> dict[str, np.ndarray]:
        """Bed shares, flows, pressures, inflow and failure text of cases start..stop-1."""
        n_beds = len(self.network.beds)
        out = {"bed_share": np.full((stop - start, n_beds), np.nan),
               "bed_flow_m3_s": np.full((stop - start, n_beds), np.nan),
               "bed_pressure_pa": np.full((stop - start, n_beds), np.nan),
               "inflow_m3_s": np.full(stop - start, np.nan),
               "failure": np.full(stop - start, "", dtype=object)}
        for k, i in enumerate(range(start, stop)):
            network = apply_changes(self.network, self.common + self.cases[i],
                                    baseline_bed_flow_m3_s=self.baseline)
            try:
                result = solve(network)
            except SolveError as exc:
                out["failure"][k] = str(exc)
                continue
            out["bed_share"][k] = result.bed_share
            out["bed_flow_m3_s"][k] = result.bed_flow_m3_s
            out["bed_pressure_pa"][k] = result.bed_pressure_pa
            out["inflow_m3_s"][k] = result.inflow_m3_s
        return out


@dataclass(frozen=True, eq=False)
class SweepResult:
    """Per case: bed shares, flows, pressures and total inflow (SI), and failures.

    ``grid`` holds each case's parameter values (SI; no columns for a list
    of cases).  Bed arrays have one column per bed of the network (all of
    them, whatever ``spec.report`` says).
    """

    spec: SweepSpec
    execution: str
    bed_share: np.ndarray
    bed_flow_m3_s: np.ndarray
    bed_pressure_pa: np.ndarray
    inflow_m3_s: np.ndarray
    failure: tuple[str, ...]

    @property
    def network(self) -> Network:
        """The base network."""
        return self.spec.network

    @property
    def report_rows(self) -> np.ndarray:
        """Rows of the reported beds."""
        return np.array([self.network.beds.index[b] for b in self.spec.report], dtype=np.int64)

    def table(self) -> dict[str, np.ndarray]:
        """One row per case: its name, parameter values (SI) and reported bed shares."""
        table: dict[str, np.ndarray] = {"case": np.array(self.spec.case_names, dtype=object)}
        for k, p in enumerate(self.spec.parameters):
            table[p.name] = self.spec.grid[:, k]
        for bed, row in zip(self.spec.report, self.report_rows):
            table[f"share:{bed}"] = self.bed_share[:, row]
        table["inflow_m3_s"] = self.inflow_m3_s
        return table


def run_sweep(spec: SweepSpec, *, execution: Execution = Execution(), chunk_size: int | None = None,
              progress: ProgressCallback | None = None) -> SweepResult:
    """Solve every case of a sweep.

    Raises
    ------
    NetworkSpecError
        A change cannot be made (for example a lesion longer than its vessel).
    SolveError
        The unchanged network itself does not solve.
    Interrupted
        On Ctrl-C, with the finished cases as ``partial`` (a SweepResult whose
        later cases are NaN and marked :data:`NOT_RUN`).
    """
    baseline = solve(apply_changes(spec.network, spec.common)).bed_flow_m3_s
    task = SweepTask(spec.network, spec.common, spec.cases, baseline)
    try:
        out = run_chunked(task, len(spec.cases), execution=execution, chunk_size=chunk_size,
                          progress=progress)
    except Interrupted as exc:  # the finished cases, the rest marked as not run
        out = task.run_chunk(0, 0) if not exc.done else exc.partial
        missing = len(spec.cases) - exc.done
        out = {k: np.concatenate([v, np.full((missing,) + v.shape[1:], np.nan if k != "failure"
                                              else NOT_RUN, dtype=v.dtype)]) for k, v in out.items()}
        partial = SweepResult(spec=spec, execution=execution.describe(), bed_share=out["bed_share"],
                              bed_flow_m3_s=out["bed_flow_m3_s"], bed_pressure_pa=out["bed_pressure_pa"],
                              inflow_m3_s=out["inflow_m3_s"], failure=tuple(out["failure"]))
        raise Interrupted(exc.done, len(spec.cases), "cases", partial=partial) from None
    return SweepResult(spec=spec, execution=execution.describe(), bed_share=out["bed_share"],
                       bed_flow_m3_s=out["bed_flow_m3_s"], bed_pressure_pa=out["bed_pressure_pa"],
                       inflow_m3_s=out["inflow_m3_s"], failure=tuple(out["failure"]))


NOT_RUN = "not run: the sweep was interrupted"
"""The failure text of the cases an interrupted sweep did not reach."""
