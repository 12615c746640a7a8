"""Subgroup headers of the item report: value labels, codes as whole numbers, readable bins."""

from __future__ import annotations

import numpy as np
import pandas as pd

from skipwise.report.tables import group_codes


def test_value_labels_name_the_groups():
    codes, labels = group_codes(pd.Series([1.0, 2.0, 1.0, np.nan]), {1: "Northfold", 2.0: "Eastmere"})
    assert labels == ["Northfold", "Eastmere"]
    assert codes.tolist()[:3] == [0.0, 1.0, 0.0] and np.isnan(codes.iloc[3])


def test_codes_print_as_whole_numbers():
    _, labels = group_codes(pd.Series([3.0, 1.0, 3.0]))
    assert labels == ["1", "3"]  # never "1.0"


def test_many_numeric_values_fall_in_bins_named_by_their_ends():
    ages = pd.Series(np.arange(19, 89, dtype=float))  # 70 distinct ages, 14 per quintile
    codes, labels = group_codes(ages)
    # Hand: quintiles of 19..88 hold 19-32, 33-46, 47-60, 61-74, 75-88 (pandas.qcut cuts at the
    # 20/40/60/80 % quantiles, linear interpolation: 32.8, 46.6, 60.4, 74.2).
    assert labels == ["19\u201332", "33\u201346", "47\u201360", "61\u201374", "75\u201388"]
    assert codes.value_counts().tolist() == [14] * 5
    assert not any("(" in lab or "]" in lab for lab in labels)


def test_a_grouping_column_with_every_value_missing_is_one_missing_group():
    # found by tests/test_fuzz.py: no distinct values at all must not break the group numbers
    codes, labels = group_codes(pd.Series([np.nan, np.nan]))
    assert labels == [] and codes.isna().all()
