"""Readable terminal tables of results.

Examples
--------
>>> print(format_table(["bed", "flow [mL/min]"], [["brain", 700.0], ["heart", 200.0]]))
bed    flow [mL/min]
-----  -------------
brain          700.0
heart          200.0
"""

from __future__ import annotations

import math

import numpy as np

from .result import SteadyResult
from .units import DISPLAY_UNITS, from_si
from .walls import volume_summary

MAX_ROWS = 40


def _cell(value, digits: int = 1) -> str:
    if isinstance(value, str):
        return value
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else ""
    value = float(value)
    if not math.isfinite(value):
        return "-"
    if value != 0 and (abs(value) >= 1e6 or abs(value) < 10 ** -digits):
        return f"{value:.3g}"
    return f"{value:.{digits}f}"


def format_table(headers: list[str], rows: list[list], *, digits: int = 1) -> str:
    """Fixed-width text table; numbers right-aligned with ``digits`` decimals."""
    cells = [[_cell(v, digits) for v in row] for row in rows]
    numeric = [all(not isinstance(row[k], str) for row in rows) if rows else False
               for k in range(len(headers))]
    widths = [max([len(h)] + [len(r[k]) for r in cells]) for k, h in enumerate(headers)]

    def line(values):
        parts = [v.rjust(w) if numeric[k] else v.ljust(w) for k, (v, w) in enumerate(zip(values, widths))]
        return "  ".join(parts).rstrip()

    out = [line(headers), line(["-" * w for w in widths])]
    out += [line(r) for r in cells]
    return "\n".join(out)


def rows_shown(count: int, limit: int) -> tuple[int, str]:
    """How many of ``count`` rows a table shows, and the line (newline first) saying what it left out.

    Rows are built for the shown ones only: a 10^6-vessel report costs what a small one does.
    """
    if count <= limit:
        return count, ""
    return limit, f"\n... {count - limit} more (all of them with --json or -o PATH)"


def bed_table_text(result: SteadyResult, limit: int = MAX_ROWS) -> str:
    """Beds sorted by share, largest first: flow, share, node and perfusion pressure."""
    beds = result.network.beds
    if not len(beds):
        return "no beds"
    shown, more = rows_shown(len(beds), limit)
    order = np.argsort(-np.nan_to_num(result.bed_share, nan=-1.0), kind="stable")[:shown]
    flow = from_si(result.bed_flow_m3_s[order], "flow", DISPLAY_UNITS["flow"])
    pressure = from_si(result.bed_pressure_pa[order], "pressure", "mmHg")
    perfusion = from_si(result.bed_perfusion_pressure_pa[order], "pressure", "mmHg")
    share = 100 * result.bed_share[order]
    node_ids = result.network.nodes.ids
    rows = [[beds.ids[i], flow[k], share[k], pressure[k], perfusion[k], node_ids[beds.node[i]]]
            for k, i in enumerate(order)]
    headers = ["bed", f"flow [{DISPLAY_UNITS['flow']}]", "share [%]", "pressure [mmHg]",
               "perfusion [mmHg]", "node"]
    if "red_cell_delivery_m3_s" in result.bed_extra:
        cells = from_si(result.bed_extra["red_cell_delivery_m3_s"][order], "flow",
                        DISPLAY_UNITS["flow"])
        rows = [row + [cells[k]] for k, row in enumerate(rows)]
        headers.append(f"red cells [{DISPLAY_UNITS['flow']}]")
    return format_table(headers, rows) + more


def vessel_table_text(result: SteadyResult, limit: int = MAX_ROWS) -> str:
    """Vessels in input order: flow, pressure drop, velocity, wall shear stress, Reynolds."""
    v = result.network.vessels
    shown, more = rows_shown(len(v), limit)
    flow = from_si(result.vessel_flow_m3_s[:shown], "flow", DISPLAY_UNITS["flow"])
    drop = from_si(result.vessel_pressure_drop_pa[:shown], "pressure", "mmHg")
    velocity, wss = result.vessel_mean_velocity_m_s[:shown], result.vessel_wss_pa[:shown]
    reynolds, reversed_ = result.vessel_reynolds[:shown], result.vessel_reversed[:shown]
    rows = [[v.ids[i], flow[i], drop[i], velocity[i], wss[i], reynolds[i],
             "reversed" if reversed_[i] else ""] for i in range(shown)]
    headers = ["vessel", f"flow [{DISPLAY_UNITS['flow']}]", "dP [mmHg]", "velocity [m/s]",
               "wss [Pa]", "Re", ""]
    if "hematocrit" in result.vessel_extra:
        viscosity = from_si(result.vessel_viscosity_pa_s[:shown], "viscosity",
                            DISPLAY_UNITS["viscosity"])
        hematocrit = result.vessel_extra["hematocrit"]
        rows = [row[:-1] + [hematocrit[i], viscosity[i], row[-1]] for i, row in enumerate(rows)]
        headers[-1:] = ["HD", f"viscosity [{DISPLAY_UNITS['viscosity']}]", ""]
    text = format_table(headers, rows, digits=2)
    return text + more


def node_table_text(result: SteadyResult, limit: int = MAX_ROWS) -> str:
    """Node pressures in input order."""
    ids = result.network.nodes.ids
    shown, more = rows_shown(len(ids), limit)
    pressure = from_si(result.pressure_pa[:shown], "pressure", "mmHg")
    rows = [[ids[i], pressure[i]] for i in range(shown)]
    return format_table(["node", "pressure [mmHg]"], rows, digits=2) + more


def solve_report(result: SteadyResult) -> str:
    """The terminal report of ``vesselnet solve``: beds, vessels, nodes, checks, warnings."""
    parts = [result.summary(), "", "Beds (largest share first)", bed_table_text(result), "",
             "Vessels", vessel_table_text(result), "", "Nodes", node_table_text(result), "",
             f"checks: mass balance {result.mass_balance:.1e}, law residual {result.law_residual:.1e},"
             f" {result.iterations} Newton step(s), solver {result.solver}"
             + (f": {result.solver_reason}" if result.solver_reason else "")]
    rheology = result.extra_checks.get("rheology")
    if rheology:
        parts.append(f"rheology: viscosity {rheology['viscosity_law']}, separation "
                     f"{rheology['separation']}, {rheology['iterations']} coupled iteration(s), "
                     f"hematocrit change {rheology['hematocrit_residual']:.1e}, flow change "
                     f"{rheology['flow_residual']:.1e} (tolerance {rheology['tolerance']:g}, "
                     f"relaxation {rheology['relaxation']:g}), {rheology['plasma_only_vessels']} "
                     "plasma-only vessel(s)")
    parts[8:8] = wall_report_parts(result)
    parts += [f"warning: {w}" for w in result.warnings]
    return "\n".join(parts)


def volume_line(result: SteadyResult) -> str:
    """One line: the vessels' blood volume, stressed part, and per tag (largest first).

    Empty when the result carries no volumes.
    """
    summary = volume_summary(result)
    if not summary:
        return ""
    unit = DISPLAY_UNITS["volume"]

    def ml(x):
        return f"{from_si(x, 'volume', unit):.1f}"

    text = (f"blood volume in vessels {ml(summary['total_m3'])} {unit} (unstressed "
            f"{ml(summary['unstressed_m3'])}, stressed {ml(summary['stressed_m3'])})")
    parts = sorted(summary["by_tag"].items(), key=lambda kv: -kv[1]["volume_m3"])
    if parts:
        text += "; by tag: " + ", ".join(f"{tag} {ml(p['volume_m3'])} ({100 * p['share']:.0f} %)"
                                         for tag, p in parts[:8])
        text += " ..." if len(parts) > 8 else ""
    return text


def wall_table_text(result: SteadyResult, limit: int = MAX_ROWS) -> str:
    """Vessels with wall data or a distensible wall: lumen radius, strain, wall stress, volume."""
    v = result.network.vessels
    extra = result.vessel_extra
    rows_ = np.flatnonzero(~np.isnan(v.wall_thickness_m) | v.distensible)
    shown, more = rows_shown(len(rows_), limit)
    rows_ = rows_[:shown]
    radius = from_si(extra["lumen_radius_m"], "radius", DISPLAY_UNITS["radius"])
    stress = from_si(extra["wall_stress_pa"], "stress", DISPLAY_UNITS["stress"])
    volume = from_si(extra["volume_m3"], "volume", DISPLAY_UNITS["volume"])
    rows = [[v.ids[i], radius[i], 100 * extra["wall_strain"][i], stress[i], volume[i],
             "distensible" if np.isfinite(extra["wall_strain"][i]) else ""] for i in rows_]
    text = format_table(["vessel", f"lumen radius [{DISPLAY_UNITS['radius']}]", "strain [%]",
                         f"wall stress [{DISPLAY_UNITS['stress']}]",
                         f"volume [{DISPLAY_UNITS['volume']}]", ""], rows, digits=2)
    return text + more


def wall_report_parts(result: SteadyResult) -> list[str]:
    """The wall section of the solve report (empty without wall results)."""
    if "volume_m3" not in result.vessel_extra:
        return []
    v = result.network.vessels
    parts = [volume_line(result), ""]
    if (~np.isnan(v.wall_thickness_m) | v.distensible).any():
        parts[1:1] = ["", "Walls (at mean pressure; strain of distensible vessels)",
                      wall_table_text(result)]
    return parts
