"""Flags for graft values that the literature links with graft failure, each with its source.

Which graft-flow threshold applies depends on the graft's territory: the
infrainguinal (vein bypass) and coronary figures of REFERENCES 8.9 come from
different operations and are not interchangeable.  A plan names its
``territory``; without one the graft flow is not judged and the report says
so.  The wall shear stress threshold (Malek et al. 1999) is a property of the
endothelium and applies everywhere; the vein-diameter threshold applies to
vein conduits.  Criteria that need a pulsatile result (peak systolic
velocity, diastolic flow, pulsatility index) are listed as not evaluated:
the steady analysis has only mean values.

Examples
--------
>>> flags, missing = graft_flags(flow_m3_s=60 / 6e7, wss_pa=0.3, min_diameter_m=2.8e-3,
...                              conduit_kind="vein", territory="infrainguinal")
>>> [f.code for f in flags]
['low_graft_flow', 'low_wss', 'small_vein']
>>> all(f.source for f in flags), len(missing)
(True, 2)
"""

from __future__ import annotations

from dataclasses import dataclass

from .units import DISPLAY_UNITS, from_si

ML_MIN = 1e-6 / 60
"""One mL/min in m^3/s."""

SOURCES = {
    "infrainguinal_low_flow": (
        "CLTI below-knee vein bypass study (n = 249), abstract checked [V; REFERENCES 8.9]: mean "
        "graft flow < 100 mL/min together with diastolic flow < 40 mL/min had the worst long-term "
        "patency and limb outcome"),
    "infrainguinal_very_low_flow": (
        "J Vasc Surg 1990;12:596-600, abstract checked [V; REFERENCES 8.9]: distal bypass flow "
        "< 25 mL/min after surgery correlated with stenosis or occlusion"),
    "coronary_low_flow": (
        "Nakajima et al. 2018, J Cardiothorac Surg 13:121 [V; REFERENCES 8.9]: mean graft flow "
        "<= 20 mL/min defined flow insufficiency (transit-time flowmetry)"),
    "low_wss": (
        "Malek, Alper & Izumo 1999, JAMA 282:2035-2042, abstract checked [V; REFERENCES 8.8]: shear "
        "below 4 dyn/cm2 (0.4 Pa) stimulates an atherogenic endothelial phenotype"),
    "small_vein": (
        "J Vasc Surg 1990;12:596-600, abstract checked [V; REFERENCES 8.6]: vein conduit diameter "
        "<= 3.0 mm correlates with stenosis or occlusion of in-situ bypasses"),
    "reversed": (
        "common practice, no source: a bypass is built to carry flow from its inflow to its "
        "outflow anastomosis"),
}
"""Every source a flag can cite."""

LOW_WSS_PA = 0.4
"""Malek et al. 1999 (REFERENCES 8.8)."""

SMALL_VEIN_DIAMETER_M = 3.0e-3
"""J Vasc Surg 1990;12:596 (REFERENCES 8.6); flagged at or below."""


@dataclass(frozen=True)
class FlowThreshold:
    """A graft-flow threshold of one territory: flagged below (or at) ``flow_m3_s``."""

    code: str
    flow_m3_s: float
    inclusive: bool
    meaning: str
    source_key: str


TERRITORIES: dict[str, tuple[FlowThreshold, ...]] = {
    "infrainguinal": (
        FlowThreshold("very_low_graft_flow", 25 * ML_MIN, False,
                      "after surgery this correlated with stenosis or occlusion",
                      "infrainguinal_very_low_flow"),
        FlowThreshold("low_graft_flow", 100 * ML_MIN, False,
                      "together with a diastolic flow below 40 mL/min (not evaluated in a steady "
                      "analysis) this had the worst patency and limb outcome",
                      "infrainguinal_low_flow"),
    ),
    "coronary": (
        FlowThreshold("low_graft_flow", 20 * ML_MIN, True, "defined flow insufficiency",
                      "coronary_low_flow"),
    ),
}
"""Graft territories a plan may name and their flow thresholds, most severe first (only
the most severe that applies is raised)."""

PULSATILE_ONLY = {
    "infrainguinal": (
        ("peak systolic velocity below 40-45 cm/s (a failing low-flow graft; Surgery 1985;98:799-809, "
         "first author from memory: Bandyk [V; REFERENCES 8.9])"),
        "diastolic graft flow below 40 mL/min (the second half of the low-flow criterion above)",
    ),
    "coronary": (
        ("pulsatility index < 5, diastolic filling > 50 %, backflow < 3 % (the commonly quoted "
         "acceptance set; Kieser et al. 2010, from memory [M; REFERENCES 8.9])"),
    ),
}
"""Criteria that need the flow waveform: reported as not evaluated in a steady analysis."""


@dataclass(frozen=True)
class Flag:
    """A graft value the literature links with failure: what, and who says so."""

    code: str
    text: str
    source: str


def _ml_min(flow_m3_s: float) -> float:
    return float(from_si(flow_m3_s, "flow", DISPLAY_UNITS["flow"]))


def graft_flags(*, flow_m3_s: float, wss_pa: float, min_diameter_m: float, conduit_kind: str,
                territory: str) -> tuple[tuple[Flag, ...], tuple[str, ...]]:
    """Flags for one graft's steady values, and the criteria not evaluated.

    Parameters
    ----------
    flow_m3_s : float
        Mean graft flow, positive from its inflow (``from``) to its outflow (``to``) end.
    wss_pa : float
        Mean (Poiseuille) wall shear stress in the graft.
    min_diameter_m : float
        Smallest lumen diameter along the graft.
    conduit_kind : str
        ``vein``, ``artery``, ``synthetic`` or '' (not given).
    territory : str
        A key of :data:`TERRITORIES`, or '' (graft flow then not judged).

    Returns
    -------
    flags : tuple of Flag
    not_evaluated : tuple of str
        Criteria that could not be judged, with the reason.
    """
    flags: list[Flag] = []
    missing: list[str] = []
    q = _ml_min(flow_m3_s)
    if flow_m3_s <= 0:
        flags.append(Flag("reversed_graft_flow",
                          f"the graft carries {q:.3g} mL/min: no forward flow from its inflow end",
                          SOURCES["reversed"]))
    if territory in TERRITORIES:
        for limit in TERRITORIES[territory]:
            below = flow_m3_s <= limit.flow_m3_s if limit.inclusive else flow_m3_s < limit.flow_m3_s
            if below and flow_m3_s > 0:
                sign = "<=" if limit.inclusive else "<"
                flags.append(Flag(limit.code, f"mean graft flow {q:.0f} mL/min {sign} "
                                  f"{_ml_min(limit.flow_m3_s):.0f} mL/min ({territory}): {limit.meaning}",
                                  SOURCES[limit.source_key]))
                break
        missing += [f"{text}: needs a pulsatile analysis" for text in PULSATILE_ONLY[territory]]
    else:
        missing.append("graft flow thresholds: the plan names no 'territory' (infrainguinal or "
                       "coronary), and their thresholds differ")
    if wss_pa < LOW_WSS_PA:
        flags.append(Flag("low_wss", f"graft wall shear stress {wss_pa:.2f} Pa < {LOW_WSS_PA} Pa "
                          "(atherogenic range)", SOURCES["low_wss"]))
    if conduit_kind == "vein" and min_diameter_m <= SMALL_VEIN_DIAMETER_M * (1 + 1e-12):
        flags.append(Flag("small_vein", f"vein conduit diameter {min_diameter_m * 1e3:.2f} mm <= 3.0 mm",
                          SOURCES["small_vein"]))
    elif not conduit_kind:
        missing.append("vein conduit diameter: the candidate names no 'conduit'")
    return tuple(flags), tuple(missing)
