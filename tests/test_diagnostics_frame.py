"""The adapter from classifier masks to in-scope cells (hand-made masks)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from skipwise.diagnostics import missingness_frame
from skipwise.errors import ProblemCode, SkipwiseError

NA = np.nan
# statuses by hand: q1 asked of all; q2 asked of cases 0-3 only (4, 5 skipped);
# case 2 breaks off at q2 (in universe, neither answered nor nonresponse)
VALUES = pd.DataFrame({"q1": [1.0, NA, 3.0, 4.0, NA, 6.0], "q2": [10.0, NA, NA, 13.0, NA, NA]},
                      index=[101, 102, 103, 104, 105, 106])
UNIVERSE = pd.DataFrame({"q1": [True] * 6, "q2": [True, True, True, True, False, False]}, index=VALUES.index)
NONRESP = pd.DataFrame({"q1": [False, True, False, False, True, False],
                        "q2": [False, True, False, False, False, False]}, index=VALUES.index)


def test_counts_and_scope():
    mf = missingness_frame(VALUES, UNIVERSE, NONRESP)
    rows = mf.counts[["out_of_universe", "set_aside", "in_scope", "answered", "nonresponse"]]
    assert rows.to_dict("index") == {
        "q1": {"out_of_universe": 0, "set_aside": 0, "in_scope": 6, "answered": 4, "nonresponse": 2},
        "q2": {"out_of_universe": 2, "set_aside": 1, "in_scope": 3, "answered": 2, "nonresponse": 1},
    }
    assert mf.counts.loc["q2", "nonresponse_rate"] == pytest.approx(1 / 3)
    # the legitimately skipped cases 105, 106 never appear as missing
    assert list(mf.indicator("q2").index) == [101, 102, 104]
    assert mf.indicator("q2").tolist() == [False, True, False]
    assert mf.item_values("q2").tolist()[0] == 10.0


def test_joint_restricts_to_common_scope():
    mf = missingness_frame(VALUES, UNIVERSE, NONRESP)
    j = mf.joint(["q1", "q2"])
    assert list(j.frame.index) == [101, 102, 104]
    assert j.n_dropped == 3 and j.n_cases_total == 6
    assert "3 of 6 cases" in j.description


def test_answered_mask_and_nonresponse_value_cleared():
    vals = VALUES.copy()
    vals.loc[102, "q1"] = -9.0  # a code value left in by mistake: nonresponse wins
    answered = UNIVERSE & ~NONRESP & vals.notna()
    mf = missingness_frame(vals, UNIVERSE, NONRESP, answered_mask=answered)
    assert np.isnan(mf.values.loc[102, "q1"])
    assert mf.counts.loc["q1", "answered"] == 4


def test_nonresponse_outside_universe_is_an_error():
    bad = NONRESP.copy()
    bad.loc[105, "q2"] = True
    with pytest.raises(SkipwiseError) as exc:
        missingness_frame(VALUES, UNIVERSE, bad)
    assert exc.value.codes == [ProblemCode.BAD_DATA] and exc.value.problems[0].item == "q2"


def test_misaligned_masks_and_unknown_item():
    with pytest.raises(SkipwiseError):
        missingness_frame(VALUES, UNIVERSE.iloc[:3], NONRESP)
    mf = missingness_frame(VALUES, UNIVERSE, NONRESP)
    with pytest.raises(SkipwiseError) as exc:
        mf.indicator("q3")
    assert exc.value.codes == [ProblemCode.UNKNOWN_NAME]
