"""Graft flags: the thresholds of REFERENCES 8.6, 8.8 and 8.9, each flag with its named source.

Thresholds checked at their edges (strict or inclusive as the sources word them):
* infrainguinal vein bypass: mean graft flow < 100 mL/min (CLTI below-knee vein bypass study,
  n = 249, abstract [V]); < 25 mL/min (J Vasc Surg 1990;12:596 [V]);
* coronary: mean graft flow <= 20 mL/min (Nakajima et al. 2018 [V]);
* wall shear stress < 0.4 Pa (Malek, Alper & Izumo 1999 [V abstract]);
* vein conduit diameter <= 3.0 mm (J Vasc Surg 1990;12:596 [V]).
"""

import re

import pytest

from vesselnet.graftflags import SOURCES, graft_flags

ML_MIN = 1e-6 / 60
CITATION = re.compile(r"REFERENCES 8\.[689]\]|common practice, no source")
"""A source names the published work and the REFERENCES section it is listed in, or says it is a
fact of the trade."""


def codes(flow_ml_min=150.0, wss_pa=1.0, diameter_mm=4.0, kind="vein", territory="infrainguinal"):
    flags, missing = graft_flags(flow_m3_s=flow_ml_min * ML_MIN, wss_pa=wss_pa,
                                 min_diameter_m=diameter_mm / 1e3, conduit_kind=kind, territory=territory)
    return [f.code for f in flags], flags, missing


@pytest.mark.parametrize("kwargs, expected", [
    ({}, []),
    ({"flow_ml_min": 100.0}, []),                                   # < 100 is strict
    ({"flow_ml_min": 99.9}, ["low_graft_flow"]),
    ({"flow_ml_min": 25.0}, ["low_graft_flow"]),                    # < 25 is strict
    ({"flow_ml_min": 24.9}, ["very_low_graft_flow"]),               # only the most severe flow flag
    ({"flow_ml_min": 20.0, "territory": "coronary"}, ["low_graft_flow"]),   # <= 20 is inclusive
    ({"flow_ml_min": 20.1, "territory": "coronary"}, []),
    ({"flow_ml_min": 60.0, "territory": "coronary"}, []),           # infrainguinal figure not applied
    ({"flow_ml_min": 5.0, "territory": ""}, []),                    # no territory: flow not judged
    ({"wss_pa": 0.4}, []),
    ({"wss_pa": 0.399}, ["low_wss"]),
    ({"diameter_mm": 3.0}, ["small_vein"]),
    ({"diameter_mm": 3.01}, []),
    ({"diameter_mm": 2.5, "kind": "synthetic"}, []),                # a vein criterion
    ({"flow_ml_min": -3.0}, ["reversed_graft_flow"]),
])
def test_flags_follow_the_published_thresholds(kwargs, expected):
    assert codes(**kwargs)[0] == expected


@pytest.mark.parametrize("kwargs", [
    {"flow_ml_min": 50.0, "wss_pa": 0.2, "diameter_mm": 2.8},
    {"flow_ml_min": 10.0, "territory": "coronary", "wss_pa": 0.1},
    {"flow_ml_min": 10.0},
    {"flow_ml_min": -1.0, "wss_pa": 0.0}])
def test_every_flag_names_its_source(kwargs):
    _, flags, _ = codes(**kwargs)
    assert flags
    for flag in flags:
        assert CITATION.search(flag.source), flag.source
        assert flag.source in SOURCES.values() and flag.text


def test_every_source_is_a_citation():
    for source in SOURCES.values():
        assert CITATION.search(source)
        assert re.search(r"(19|20)\d\d|n = \d+|common practice", source)     # a year or the study's size


@pytest.mark.parametrize("territory, words", [
    ("infrainguinal", ["peak systolic velocity", "diastolic graft flow"]),
    ("coronary", ["pulsatility index"]),
    ("", ["territory"])])
def test_what_a_steady_analysis_cannot_judge_is_listed(territory, words):
    """Peak systolic velocity (Bandyk 1985), diastolic flow and the pulsatility index need the flow
    waveform (REFERENCES 8.9, 10.14): listed as not evaluated, never silently passed."""
    _, _, missing = codes(territory=territory)
    for word in words:
        assert any(word in m for m in missing)


def test_a_candidate_without_conduit_says_the_vein_check_was_not_made():
    _, _, missing = codes(kind="")
    assert any("conduit" in m for m in missing)
