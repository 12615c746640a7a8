"""Outcome rates and interview outcomes against the published standard's formulas."""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from skipwise.errors import ProblemCode, SkipwiseError
from skipwise.weighting.outcomes import (
    E_METHOD_ESTIMATED, count_outcomes, interview_outcome, outcome_rates,
)

# Exact test vector [computed from the standard's formulas; REFERENCES.md]:
VECTOR = {"I": 400, "P": 50, "R": 200, "NC": 150, "O": 20, "UH": 100, "UO": 80, "NE": 230}


def test_exact_test_vector_response_rates():
    r = outcome_rates(VECTOR)
    # e = 82/105 by proportional allocation: eligible share among known eligibility, 820/1050
    # [method: memory; value computed]
    assert_allclose(r["e"], 82 / 105, rtol=1e-14)
    assert r["e_method"] == E_METHOD_ESTIMATED
    # RR1..RR6 of AAPOR Standard Definitions (2016), with D = 820, U = 180 [computed from the
    # formulas in REFERENCES.md], e.g. RR1 = 400/1000, RR3 = 400/(820 + (82/105)·180) = 700/1681.
    expected = [Fraction(2, 5), Fraction(9, 20), Fraction(700, 1681), Fraction(1575, 3362),
                Fraction(20, 41), Fraction(45, 82)]
    got = [r[f"RR{i}"] for i in range(1, 7)]
    assert_allclose(got, [float(f) for f in expected], rtol=1e-12)


def test_exact_test_vector_other_rates():
    # Formulas of AAPOR Standard Definitions 2016 p. 63 (COOP) [seen]; REF, CON [memory],
    # evaluated by hand with exact fractions.
    r = outcome_rates(VECTOR)
    e = Fraction(82, 105)
    d, u = 820, 180
    den_e = d + e * u
    expected = {
        "COOP1": Fraction(400, 670), "COOP2": Fraction(450, 670),
        "COOP3": Fraction(400, 650), "COOP4": Fraction(450, 650),
        "REF1": Fraction(200, 1000), "REF2": 200 / den_e, "REF3": Fraction(200, 820),
        "CON1": Fraction(670, 1000), "CON2": 670 / den_e, "CON3": Fraction(670, 820),
    }
    for key, value in expected.items():
        assert_allclose(r[key], float(value), rtol=1e-12, err_msg=key)


def test_federal_worked_example():
    # Public U.S. federal information-collection attachment (2022) [seen]:
    # C=300, R=0, NC=0, O=5, U=150, e=0.9 -> 300/440 = 0.6818.
    r = outcome_rates({"I": 300, "P": 0, "R": 0, "NC": 0, "O": 5, "UH": 150, "UO": 0}, e=0.9)
    assert r["e_method"] == "given"
    assert_allclose(r["RR3"], 300 / 440, rtol=1e-12)
    assert round(r["RR3"], 4) == 0.6818


@pytest.mark.parametrize(
    ("counts", "e", "code"),
    [
        ({k: v for k, v in VECTOR.items() if k != "NE"}, None, ProblemCode.MISSING_KEY),
        ({k: v for k, v in VECTOR.items() if k != "UO"}, 0.5, ProblemCode.MISSING_KEY),
        ({**VECTOR, "R": -1}, None, ProblemCode.BAD_VALUE),
        (VECTOR, 1.5, ProblemCode.BAD_VALUE),
        ({**VECTOR, "X": 3}, None, ProblemCode.UNKNOWN_KEY),
    ],
    ids=["no-NE-no-e", "no-UO", "negative", "e-out-of-range", "unknown-category"],
)
def test_outcome_rate_errors(counts, e, code):
    with pytest.raises(SkipwiseError) as info:
        outcome_rates(counts, e=e)
    assert code in info.value.codes


def test_zero_denominator_gives_nan():
    r = outcome_rates({"I": 0, "P": 0, "R": 0, "NC": 0, "O": 0, "UH": 5, "UO": 0}, e=0.5)
    assert np.isnan(r["RR5"]) and r["RR1"] == 0.0


def test_interview_outcome_cut_points():
    # AAPOR example cut-points [memory]: <50% break-off, 50-80% partial, >80% complete.
    share = pd.Series([0.0, 0.49, 0.5, 0.8, 0.81, 1.0], index=list("abcdef"))
    out = interview_outcome(share)
    assert out.tolist() == ["breakoff", "breakoff", "P", "P", "I", "I"]
    assert list(out.index) == list("abcdef")
    assert interview_outcome(share, breakoff_below=0.3, complete_above=0.6).tolist() == [
        "breakoff", "P", "P", "I", "I", "I"]


def test_interview_outcome_errors():
    with pytest.raises(SkipwiseError) as info:
        interview_outcome(pd.Series([0.2, np.nan]))
    assert info.value.codes == [ProblemCode.BAD_DATA]
    with pytest.raises(SkipwiseError):
        interview_outcome(pd.Series([0.2]), breakoff_below=0.9, complete_above=0.5)


def test_count_outcomes_is_mergeable():
    cats = pd.Series(["I", "I", "R", "NE", "UH", "P"])
    full = count_outcomes(cats, weights=np.arange(1, 7))
    a, b = count_outcomes(cats[:3], np.arange(1, 4)), count_outcomes(cats[3:], np.arange(4, 7))
    assert full == {k: a[k] + b[k] for k in full}
    assert full["I"] == 3.0 and full["NE"] == 4.0


@pytest.mark.parametrize("cats, fragment", [
    (["I", "breakoff", "R", "breakoff"], "'breakoff' (2 case(s))"),
    (["I", np.nan, "NC"], "missing (1 case(s))"),
    (["I", "X", "X", "X", np.nan], "'X' (3 case(s)), missing (1 case(s))"),
], ids=["breakoff", "missing", "unknown-and-missing"])
def test_count_outcomes_refuses_cases_outside_the_categories(cats, fragment):
    # Every case counts in some rate's denominator (AAPOR Standard Definitions: I, P, R, NC, O,
    # UH, UO, NE); a dropped case would silently raise RR1, so it must be an error.
    with pytest.raises(SkipwiseError) as info:
        count_outcomes(pd.Series(cats, dtype=object))
    assert info.value.codes == [ProblemCode.BAD_DATA]
    problem = info.value.problems[0]
    assert fragment in problem.message
    assert ("breakoff_to" in problem.hint) == ("breakoff" in cats)


def test_breakoffs_mapped_as_the_plan_says_are_counted():
    # The weighting pipeline replaces "breakoff" by the plan's breakoff_to (default R, the
    # standard's 2.10 "refusal and break-off") before counting.
    share = pd.Series([0.9, 0.6, 0.2, 0.1])
    split = interview_outcome(share).replace({"breakoff": "R"})
    counts = count_outcomes(split)
    assert (counts["I"], counts["P"], counts["R"]) == (1.0, 1.0, 2.0)
    assert sum(counts.values()) == len(share)
