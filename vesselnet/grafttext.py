"""Terminal report of a graft ranking (``vesselnet grafts``), the caution first.

Examples
--------
>>> from vesselnet.caution import CAUTION
>>> from vesselnet.demos import demo_path
>>> from vesselnet.grafts import rank_plan
>>> from vesselnet.planfile import load_plan
>>> text = ranking_report(rank_plan(load_plan(demo_path("leg_graft_plan")), samples=0))
>>> text.splitlines()[0] == "caution: " + CAUTION
True
"""

from __future__ import annotations

import numpy as np

from .grafts import CandidateOutcome, GraftRanking, Steal, StateMetrics
from .textreport import format_table
from .units import DISPLAY_UNITS, MMHG_PA, from_si

FLOW = DISPLAY_UNITS["flow"]
RESISTANCE = DISPLAY_UNITS["resistance"]


def _flow(value) -> float:
    return float(from_si(float(value), "flow", FLOW))


def ranking_report(ranking: GraftRanking) -> str:
    """The whole report: caution, conditions, the states, the ranking, grafts, flags, robustness."""
    plan = ranking.plan
    parts = [f"caution: {ranking.caution}", "", ranking.summary(),
             f"conditions: {ranking.conditions}",
             f"targets: {', '.join(plan.targets)}",
             f"flag thresholds: {plan.territory or 'no territory named (graft flow not judged)'}", "",
             states_table(ranking), "",
             "Ranking (score: restored fraction of the lost target flow; '=' marks a tie)",
             ranking_table(ranking), "", "Grafts", graft_table(ranking), "",
             "Steal (largest flow loss of a non-target bed)", steal_table(ranking), "", flag_text(ranking)]
    if ranking.robustness is not None:
        parts += ["", robustness_text(ranking)]
    warnings = warning_lines(ranking)
    if warnings:
        parts += [""] + warnings
    parts += ["", ranking.score_definition,
              "Pd/Pprox: mean pressure at the target bed with the lowest perfusion pressure over the "
              "mean pressure where the blood enters the network (not an ankle-brachial index, which "
              "uses systolic pressures)",
              "competing: native flow arriving at the graft's distal anastomosis through the other "
              "vessels there; steal: largest flow loss of a non-target bed against the diseased state"]
    return "\n".join(parts)


def states_table(ranking: GraftRanking) -> str:
    """Healthy and diseased target flow and distal pressure."""
    def row(name: str, state: StateMetrics):
        return [name, _flow(state.target_flow_m3_s), state.distal_bed, state.distal_pressure_pa / MMHG_PA,
                state.distal_perfusion_pressure_pa / MMHG_PA, f"{state.distal_pressure_ratio:.3f}"]

    rows = [row("healthy", ranking.healthy_state), row("diseased", ranking.diseased_state)]
    table = _table(["state", f"target flow [{FLOW}]", "lowest bed", "pressure [mmHg]",
                    "perfusion [mmHg]", "Pd/Pprox"], rows, {5})
    return table + f"\nlost target flow: {_flow(ranking.lost_flow_m3_s):.1f} {FLOW}"


def _table(headers: list[str], rows: list[list], numeric: set[int]) -> str:
    """:func:`format_table` with the pre-formatted number columns ``numeric`` right-aligned."""
    for k in numeric:
        width = max([len(headers[k])] + [len(str(r[k])) for r in rows])
        for r in rows:
            r[k] = str(r[k]).rjust(width)
    return format_table(headers, rows)


def _steal(steal: Steal | None) -> tuple[str, float]:
    return ("none", np.nan) if steal is None else (steal.bed, steal.flow_change_percent)


def _number(value: float, spec: str) -> str:
    return format(value, spec) if np.isfinite(value) else "-"


def ranking_table(ranking: GraftRanking) -> str:
    """One row a candidate in rank order: score, target flow against both states, distal pressure,
    the bed that loses most, flags."""
    rows = []
    for o in ranking.candidates:
        bed, percent = _steal(o.steal)
        q = o.state.target_flow_m3_s
        rows.append([f"{o.rank}{'=' if o.tied else ''}", o.id, _number(100 * o.score, ".1f"),
                     f"{_flow(q):.1f}", f"{_flow(q - ranking.diseased_state.target_flow_m3_s):+.1f}",
                     f"{_flow(q - ranking.healthy_state.target_flow_m3_s):+.1f}",
                     _number(o.state.distal_pressure_ratio, ".3f"), bed, _number(percent, ".2f"),
                     ", ".join(f.code for f in o.flags) or "-"])
    return _table(["rank", "candidate", "score [%]", f"target flow [{FLOW}]", "vs diseased", "vs healthy",
                   "Pd/Pprox", "steal from", "steal [%]", "flags"], rows, {2, 3, 4, 5, 6, 8})


def steal_table(ranking: GraftRanking) -> str:
    """The non-target bed that loses most, against the diseased and against the healthy state."""
    rows = []
    for o in ranking.candidates:
        row = [o.id]
        for steal in (o.steal, o.steal_vs_healthy):
            bed, percent = _steal(steal)
            row += [bed, _number(_flow(steal.flow_change_m3_s) if steal else np.nan, ".3f"),
                    _number(percent, ".2f")]
        rows.append(row)
    return _table(["candidate", "vs diseased: bed", f"[{FLOW}]", "[%]", "vs healthy: bed", f"[{FLOW}]", "[%]"],
                  rows, {2, 3, 5, 6})


def graft_table(ranking: GraftRanking) -> str:
    """The grafts themselves: conduit, size, flow, velocity, shear, resistance, competing flow."""
    rows = []
    for o in ranking.candidates:
        c = o.candidate
        radius = 0.5 * (c.vessel["radius_in_m"] + c.vessel["radius_out_m"])
        rows.append([o.id, c.conduit or "-", f"{100 * c.length_m:.1f}", f"{2e3 * radius:.2f}",
                     f"{_flow(o.graft_flow_m3_s):.1f}",
                     f"{o.graft_velocity_m_s:.3f}", f"{o.graft_wss_pa:.2f}",
                     f"{from_si(o.graft_resistance_pa_s_m3, 'resistance', RESISTANCE):.3f}",
                     f"{_flow(o.competing_flow_m3_s):.1f}",
                     f"{o.competing_ratio:.3f}" if np.isfinite(o.competing_ratio) else "-"])
    return _table(["candidate", "conduit", "length [cm]", "diameter [mm]", f"graft flow [{FLOW}]",
                   "velocity [m/s]", "wss [Pa]", f"resistance [{RESISTANCE}]",
                   f"competing [{FLOW}]", "competing/graft"], rows, set(range(2, 10)))


def flag_text(ranking: GraftRanking) -> str:
    """Every flag with its source, then what a steady analysis cannot judge."""
    lines = ["Flags (values the literature links with graft failure)"]
    sources: dict[str, int] = {}
    for o in ranking.candidates:
        for f in o.flags:
            k = sources.setdefault(f.source, len(sources) + 1)
            lines.append(f"  {o.id}: {f.text} [{k}]")
    if not sources:
        lines.append("  none")
    lines += [f"  [{k}] {source}" for source, k in sources.items()]
    missing = _common_missing(ranking.candidates)
    if missing:
        lines.append("Not evaluated (steady analysis): " + "; ".join(missing))
    for o in ranking.candidates:
        own = [m for m in o.not_evaluated if m not in missing]
        if own:
            lines.append(f"  {o.id}, not evaluated: " + "; ".join(own))
    return "\n".join(lines)


def _common_missing(outcomes: tuple[CandidateOutcome, ...]) -> list[str]:
    if not outcomes:
        return []
    common = [m for m in outcomes[0].not_evaluated if all(m in o.not_evaluated for o in outcomes)]
    return common


def warning_lines(ranking: GraftRanking) -> list[str]:
    """Warnings of the solves: the diseased state's once, then what a candidate adds."""
    seen = set(ranking.healthy.warnings) | set(ranking.diseased.warnings)
    lines = [f"warning (healthy): {w}" for w in ranking.healthy.warnings]
    lines += [f"warning (diseased, and every candidate that keeps it): {w}" for w in ranking.diseased.warnings
              if w not in ranking.healthy.warnings]
    for o in ranking.candidates:
        lines += [f"warning ({o.id}): {w}" for w in o.result.warnings if w not in seen]
    return lines


def robustness_text(ranking: GraftRanking) -> str:
    """How often the top candidate stays first, and each candidate's rank counts."""
    r = ranking.robustness
    verdict = "stays on top in every sample" if r.stays_on_top else "does not always stay on top"
    head = [f"Robustness ({r.samples} seeded samples: {r.perturbations})",
            f"top candidate {r.summary()}: {verdict}"]
    n = len(r.ids)
    order = [r.ids.index(o.id) for o in ranking.candidates]
    rows = [[r.ids[i]] + [float(x) for x in r.rank_counts[i]] for i in order]
    table = format_table(["candidate"] + [f"rank {k + 1}" for k in range(n)], rows, digits=0)
    return "\n".join(head + [table, "(samples per rank; tied candidates each count at their shared rank)"])
