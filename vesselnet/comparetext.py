"""Terminal report of a comparison (``vesselnet compare``).

Examples
--------
>>> from vesselnet.compare import compare_file
>>> from vesselnet.demos import demo_path
>>> text = comparison_report(compare_file(demo_path("collateral_steal")), summary_only=True)
>>> print(text.splitlines()[0])
Collateral steal, invented demo: 5 scenario(s) against the baseline of 'Collateral loop with steal, invented demo'
"""

from __future__ import annotations

import numpy as np

from .autoregulation import EXHAUSTED, bed_states
from .compare import Comparison, ScenarioOutcome
from .lesions import lesion_table
from .textreport import format_table
from .units import DISPLAY_UNITS, MMHG_PA, from_si

FLOW = DISPLAY_UNITS["flow"]
MAX_NAMED = 6


def _flow(values):
    return from_si(np.asarray(values, dtype=float), "flow", FLOW)


def comparison_report(comparison: Comparison, *, summary_only: bool = False) -> str:
    """The whole report: caution, conditions, baseline, scenarios at a glance, then each scenario."""
    parts = [comparison.summary(), f"caution: {comparison.caution}",
             f"conditions: {comparison.conditions}", "",
             "Baseline: " + comparison.baseline.summary(), baseline_text(comparison), "",
             "Scenarios at a glance", glance_table(comparison)]
    if not summary_only:
        for outcome in comparison.scenarios:
            parts += ["", scenario_text(outcome)]
    notes = _range_note(comparison)
    return "\n".join(parts + ([""] + notes if notes else []))


def baseline_text(comparison: Comparison) -> str:
    """Baseline beds (flow, share, perfusion pressure, state) and any lesions."""
    result = comparison.baseline
    beds = result.network.beds
    flow = _flow(result.bed_flow_m3_s)
    perfusion = result.bed_perfusion_pressure_pa / MMHG_PA
    states = bed_states(result)
    rows = [[beds.ids[i], flow[i], 100 * result.bed_share[i], perfusion[i], states[i]]
            for i in range(len(beds))]
    text = format_table(["bed", f"flow [{FLOW}]", "share [%]", "perfusion [mmHg]", "state"], rows)
    lesions = lesion_text(result)
    return text + ("\n" + lesions if lesions else "")


def glance_table(comparison: Comparison) -> str:
    """One row a scenario: inflow and its change, the most changed bed, exhausted beds,
    the lowest lesion pressure ratio and the number of reversed vessels."""
    rows = []
    for s in comparison.scenarios:
        change = s.bed_flow_change_percent
        k = int(np.nanargmax(np.abs(np.nan_to_num(change)))) if len(change) else -1
        exhausted = int((bed_states(s.result) == EXHAUSTED).sum())
        ratios = lesion_table(s.result)["pressure_ratio"]
        inflow = _flow(s.result.inflow_m3_s)
        base = _flow(s.baseline.inflow_m3_s)
        rows.append([s.name, float(inflow), 100 * (inflow - base) / base if base else np.nan,
                     s.result.network.beds.ids[k] if k >= 0 else "-", change[k] if k >= 0 else np.nan,
                     str(exhausted), f"{ratios.min():.3f}" if len(ratios) else "-",
                     str(len(s.reversed_rows))])
    return format_table(["scenario", f"inflow [{FLOW}]", "change [%]", "most changed bed",
                         "its change [%]", "exhausted", "lowest Pd/Pp", "reversed"], rows)


def scenario_text(outcome: ScenarioOutcome) -> str:
    """One scenario: beds with their change and state, lesions, reversed vessels, warnings."""
    result = outcome.result
    beds = result.network.beds
    flow = _flow(result.bed_flow_m3_s)
    change = _flow(outcome.bed_flow_change_m3_s)
    percent = outcome.bed_flow_change_percent
    perfusion = result.bed_perfusion_pressure_pa / MMHG_PA
    states = bed_states(result)
    rows = [[beds.ids[i], flow[i], 100 * result.bed_share[i], change[i], percent[i], perfusion[i],
             states[i]] for i in range(len(beds))]
    parts = [f"== {outcome.name}"]
    if outcome.description:
        parts.append(outcome.description)
    parts.append(format_table(["bed", f"flow [{FLOW}]", "share [%]", f"change [{FLOW}]", "change [%]",
                               "perfusion [mmHg]", "state"], rows))
    lesions = lesion_text(result)
    if lesions:
        parts.append(lesions)
    named = outcome.reversed
    if named:
        shown = ", ".join(named[:MAX_NAMED]) + (f" and {len(named) - MAX_NAMED} more"
                                                if len(named) > MAX_NAMED else "")
        parts.append(f"flow reversed against the baseline in: {shown}")
    parts += [f"warning: {w}" for w in result.warnings]
    return "\n".join(parts)


def lesion_text(result) -> str:
    """Lesions: diameter reduction, flow, pressure drop across the lesion, distal/proximal ratio."""
    table = lesion_table(result)
    if not len(table["row"]):
        return ""
    flow = _flow(table["flow_m3_s"])
    drop = table["pressure_drop_pa"] / MMHG_PA
    rows = [[table["vessel"][k] + ("" if table["fitted_range"][k] else " *"),
             100 * table["reduction"][k], flow[k], drop[k], f"{table['pressure_ratio'][k]:.3f}"]
            for k in range(len(flow))]
    return format_table(["lesion", "reduction [%]", f"flow [{FLOW}]", "drop [mmHg]", "Pd/Pp"], rows)


def _range_note(comparison: Comparison) -> list[str]:
    results = [comparison.baseline] + [s.result for s in comparison.scenarios]
    if any(not lesion_table(r)["fitted_range"].all() for r in results):
        return ["* outside the area reductions (about 50-90 %) the Young-Tsai lesion law was fitted on;"
                " read those figures as extrapolations",
                "Pd/Pp: mean pressure just after the lesion over just before it, in the flow direction"]
    if any(len(lesion_table(r)["row"]) for r in results):
        return ["Pd/Pp: mean pressure just after the lesion over just before it, in the flow direction"]
    return []
