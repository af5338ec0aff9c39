"""Phase separation at diverging bifurcations against the published law.

Expected values: the check table of REFERENCES.md section 3.2, computed with
numpy from the logit law of Pries et al. 1989/1990 and the 2005 parameter
revision of Pries & Secomb *as remembered* ([M]; coefficients and the sign
of A not checked against the papers).  These tests rest on memory of the
published formulas.  The structural checks (symmetry, antisymmetry, no
separation in large vessels, plasma-only daughters below X0) are properties
the papers state for the law (REFERENCES 3.1).
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from vesselnet.errors import NetworkSpecError
from vesselnet.phase_separation import LAWS, red_cell_fraction, separation_parameters

UM = 1e-6
H_F = 0.45


def _printed(text: str):
    """A printed table value and half a unit in its last printed digit."""
    decimals = len(text.split(".")[1]) if "." in text else 0
    return pytest.approx(float(text), abs=0.5 * 10.0 ** -decimals + 1e-15)


# REFERENCES.md 3.2, H_F = 0.45 [C from remembered formulas, M], as printed:
# FQB, (D_F, D_a, D_b) um, law, A, B, X0, FQE, H_alpha, H_beta
TABLE_3_2 = [
    ("0.5", (10, 8, 8), "pries-1990", "0", "1.3839", "0.0400", "0.5000", "0.450", "0.450"),
    ("0.5", (10, 8, 8), "pries-2005", "0", "1.3839", "0.0530", "0.5000", "0.450", "0.450"),
    ("0.3", (10, 8, 8), "pries-1990", "0", "1.3839", "0.0400", "0.2160", "0.3240", "0.5040"),
    ("0.3", (10, 8, 8), "pries-2005", "0", "1.3839", "0.0530", "0.2087", "0.3131", "0.5087"),
    ("0.3", (10, 8, 6), "pries-1990", "-0.2002", "1.3839", "0.0400", "0.1840", "0.2760",
     "0.5246"),
    ("0.3", (10, 8, 6), "pries-2005", "-0.2047", "1.3839", "0.0530", "0.1769", "0.2654",
     "0.5291"),
    ("0.03", (10, 8, 8), "pries-1990", "0", "1.3839", None, "0", "0", "0.4639"),
    ("0.03", (10, 8, 8), "pries-2005", "0", "1.3839", None, "0", "0", "0.4639"),
    ("0.3", (50, 40, 40), "pries-2005", "0", "1.0768", "0.0106", "0.2820", "0.4230", "0.4616"),
]


@pytest.mark.parametrize("row", TABLE_3_2, ids=[f"{r[0]}-{r[1]}-{r[2]}" for r in TABLE_3_2])
def test_table_3_2(row):
    """Each row of REFERENCES 3.2 (remembered formulas) [M]: parameters, FQE and the daughter
    hematocrits H_a = FQE H_F / FQB, H_b = (1 - FQE) H_F / (1 - FQB)."""
    fqb_text, (d_f, d_a, d_b), law, a_text, b_text, x0_text, fqe_text, ha_text, hb_text = row
    fqb = float(fqb_text)
    a, b, x0 = separation_parameters(d_f * UM, d_a * UM, d_b * UM, H_F, law=law)
    assert float(a) == _printed(a_text)
    assert float(b) == _printed(b_text)
    if x0_text is None:                       # the table says only "> 0.03"
        assert float(x0) > fqb
    else:
        assert float(x0) == _printed(x0_text)
    fqe = float(red_cell_fraction(fqb, d_f * UM, d_a * UM, d_b * UM, H_F, law=law))
    assert fqe == _printed(fqe_text)
    assert fqe * H_F / fqb == _printed(ha_text)
    assert (1 - fqe) * H_F / (1 - fqb) == _printed(hb_text)


@pytest.mark.parametrize("law", LAWS)
@pytest.mark.parametrize("d_f_um, d_um", [(6, 5), (10, 8), (40, 30), (200, 150)])
def test_symmetric_bifurcation_splits_evenly(law, d_f_um, d_um):
    """Equal daughters at equal flow share red cells equally (symmetry of the law)."""
    fqe = red_cell_fraction(0.5, d_f_um * UM, d_um * UM, d_um * UM,
                            np.array([0.1, 0.45, 0.7]), law=law)
    np.testing.assert_allclose(fqe, 0.5, rtol=0, atol=1e-15)


@settings(max_examples=200, deadline=None, derandomize=True)
@given(fqb=st.floats(0.0, 1.0), d_f=st.floats(3.0, 300.0), d_a=st.floats(2.0, 300.0),
       d_b=st.floats(2.0, 300.0), h_f=st.floats(0.0, 1.0),
       law=st.sampled_from(LAWS))
def test_daughters_share_all_red_cells(fqb, d_f, d_a, d_b, h_f, law):
    """FQE_alpha + FQE_beta = 1: swapping the daughters (FQB -> 1 - FQB) gives the complement
    (the logit law is antisymmetric: A changes sign, logit((1-FQB-X0)/(1-2X0)) = -logit(...)),
    and FQE lies in [0, 1]."""
    alpha = float(red_cell_fraction(fqb, d_f * UM, d_a * UM, d_b * UM, h_f, law=law))
    beta = float(red_cell_fraction(1.0 - fqb, d_f * UM, d_b * UM, d_a * UM, h_f, law=law))
    assert 0.0 <= alpha <= 1.0
    assert alpha + beta == pytest.approx(1.0, abs=1e-12)


@pytest.mark.parametrize("law", ["pries-1990", "pries-2005"])
def test_monotone_in_flow_fraction(law):
    """FQE does not decrease with FQB (the law is a monotone sigmoid in FQB, REFERENCES 3.1)."""
    fqb = np.linspace(0.0, 1.0, 2001)
    fqe = red_cell_fraction(fqb, 12 * UM, 9 * UM, 7 * UM, 0.45, law=law)
    assert np.all(np.diff(fqe) >= 0)
    assert fqe[0] == 0.0 and fqe[-1] == 1.0


@pytest.mark.parametrize("law", ["pries-1990", "pries-2005"])
@pytest.mark.parametrize("d_f_um, tolerance", [(100, 0.03), (300, 0.01), (1000, 0.003)])
def test_no_separation_in_large_vessels(law, d_f_um, tolerance):
    """For D_F >= 100 um, A and X0 tend to 0 and B to 1, so FQE ~ FQB (REFERENCES 3.1,
    property of the law; tolerance chosen to shrink like 1/D_F)."""
    fqb = np.linspace(0.0, 1.0, 401)
    for ratio in (1.0, 0.8, 0.5):
        fqe = red_cell_fraction(fqb, d_f_um * UM, 0.8 * d_f_um * UM, 0.8 * ratio * d_f_um * UM,
                                0.45, law=law)
        assert np.max(np.abs(fqe - fqb)) < tolerance


@pytest.mark.parametrize("law", ["pries-1990", "pries-2005"])
@pytest.mark.parametrize("h_f", [0.2, 0.45, 0.6])
def test_plasma_only_below_x0(law, h_f):
    """FQB <= X0 gives exactly 0 (plasma only), FQB >= 1 - X0 exactly 1 (REFERENCES 3.1),
    including at FQB = X0 itself; just above X0 the daughter gets some red cells."""
    d_f, d_a, d_b = 10 * UM, 8 * UM, 6 * UM
    _, _, x0 = separation_parameters(d_f, d_a, d_b, h_f, law=law)
    x0 = float(x0)
    below = np.array([0.0, 0.5 * x0, x0 * (1 - 1e-12), x0])
    assert np.all(red_cell_fraction(below, d_f, d_a, d_b, h_f, law=law) == 0.0)
    above = np.array([1 - x0, 1 - 0.5 * x0, 1.0])
    assert np.all(red_cell_fraction(above, d_f, d_a, d_b, h_f, law=law) == 1.0)
    assert 0.0 < float(red_cell_fraction(x0 + 1e-6, d_f, d_a, d_b, h_f, law=law)) < 1e-3


@pytest.mark.parametrize("law, expected_x0", [("pries-1990", 0.4 / 10),
                                              ("pries-2005", 0.964 * 0.55 / 10)])
def test_x0_formula(law, expected_x0):
    """X0 = 0.4/D_F (1990) and 0.964 (1 - H_F)/D_F (2005), D_F in um (REFERENCES 3.1) [M]."""
    _, _, x0 = separation_parameters(10 * UM, 8 * UM, 8 * UM, 0.45, law=law)
    assert float(x0) == pytest.approx(expected_x0, rel=1e-12)


def test_sign_of_a_larger_daughter_gets_less():
    """Remembered sign convention (REFERENCES 3.1, [M], to be checked against the paper): at
    equal flow share the larger daughter gets less than half of the red cells."""
    for law in ("pries-1990", "pries-2005"):
        assert float(red_cell_fraction(0.5, 10 * UM, 8 * UM, 6 * UM, 0.45, law=law)) < 0.5


def test_none_law_is_identity():
    """law 'none': FQE = FQB, whatever the diameters (REFERENCES 3.1 'no separation')."""
    fqb = np.linspace(0, 1, 11)
    np.testing.assert_array_equal(red_cell_fraction(fqb, 5 * UM, 4 * UM, 3 * UM, 0.45,
                                                    law="none"), fqb)


def test_overlapping_cutoffs_far_below_range():
    """X0 >= 1/2 (D_F = 0.5 um with the 1990 set, X0 = 0.8): the larger-flow daughter takes
    all red cells, an even split stays even; the complement rule still holds."""
    fqe = red_cell_fraction(np.array([0.3, 0.5, 0.7]), 0.5 * UM, 0.4 * UM, 0.4 * UM, 0.45,
                            law="pries-1990")
    np.testing.assert_array_equal(fqe, [0.0, 0.5, 1.0])


@pytest.mark.parametrize("kwargs, match", [
    ({"law": "pries"}, "unknown law"),
    ({"parent_hematocrit": 45.0}, "percentage"),
    ({"parent_hematocrit": -0.1}, r"fraction in \[0, 1\]"),
    ({"flow_fraction": 1.2}, r"flow fraction must be in \[0, 1\]"),
    ({"flow_fraction": np.nan}, r"flow fraction must be in \[0, 1\]"),
    ({"alpha_diameter_m": 0.0}, "diameter must be finite and > 0"),
    ({"parent_diameter_m": -1e-5}, "diameter must be finite and > 0"),
])
def test_bad_input_raises(kwargs, match):
    """Invalid inputs raise, naming the problem (REFERENCES 10.4 for percentages)."""
    args = {"flow_fraction": 0.3, "parent_diameter_m": 10e-6, "alpha_diameter_m": 8e-6,
            "beta_diameter_m": 6e-6, "parent_hematocrit": 0.45, "law": "pries-2005"}
    args.update(kwargs)
    with pytest.raises(NetworkSpecError, match=match):
        red_cell_fraction(**args)


def test_laws_tuple():
    """The file keys fixed by SPEC.md section 2 (separation laws)."""
    assert LAWS == ("none", "pries-1990", "pries-2005")
