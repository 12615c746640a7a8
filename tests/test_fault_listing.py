"""The column-wise fault listing against the row-copying listing it replaced, and its speed on wide files.

The reference below (``reference_faults``) is the previous implementation, kept verbatim: it copied
every column of the faulty rows (``data.iloc[rows]``) and built each cell's text one by one.  The new
listing must give the same frame, cell for cell.  Expected values of the hand-made case are stated by
hand from the questionnaire's routing.
"""

from __future__ import annotations


import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from hypothesis_scale import examples

from skipwise.classify import classify
from skipwise.classify import statuses as S
from skipwise.questionnaire import loads_questionnaire
from skipwise.questionnaire.model import ItemType
from skipwise.rules import ast
from skipwise.rules.evaluate import isin_small
from test_classify_properties import Q, frames


# -- the previous implementation, for the equivalence check --------------------------------------
def _cell_text(series):
    if pd.api.types.is_numeric_dtype(series.dtype) and not pd.api.types.is_bool_dtype(series.dtype):
        x = series.to_numpy(dtype=np.float64, na_value=np.nan)
        whole = np.isfinite(x) & (np.floor(x) == x)
        text = np.where(whole, np.char.mod("%d", np.where(whole, x, 0).astype(np.int64)), x.astype(str))
        return pd.Series(np.where(np.isnan(x), "", text), index=series.index, dtype=object)
    return series.astype(object).where(series.notna(), "").astype(str)


def _joined(part, columns):
    joined = pd.Series("", index=part.index, dtype=object)
    for k, col in enumerate(columns):
        joined = joined + ("; " if k else "") + col + "=" + _cell_text(part[col])
    return joined.to_numpy(dtype=object)


def _stored_text(data, columns, rows, *, multi):
    part = data.iloc[rows]
    if not multi:
        return _cell_text(part[columns[0]]).to_numpy(dtype=object)
    return _joined(part, list(columns))


def _inputs_text(data, q, rule, rows):
    if rule is None:
        return np.full(rows.size, "", dtype=object)
    names = dict.fromkeys(n for n, _ in ast.names(rule))
    columns = [c for n in names for c in (q.item(n).columns if n in q else (n,))]
    return _joined(data.iloc[rows], list(dict.fromkeys(columns)))


def reference_faults(cl):
    frames_, fault_codes = [], [cl.code(s) for s in S.FAULT_STATUSES]
    for j, name in enumerate(cl.items):
        rows = np.flatnonzero(isin_small(cl.codes[:, j], fault_codes))
        if rows.size == 0:
            continue
        item = cl.questionnaire.item(name)
        frames_.append(pd.DataFrame({
            "case_id": cl.case_ids[rows], "item": name,
            "status": np.asarray(cl.categories, dtype=object)[cl.codes[rows, j]],
            "value": _stored_text(cl.data, item.columns, rows, multi=item.type is ItemType.MULTI),
            "rule": item.rule_text,
            "inputs": _inputs_text(cl.data, cl.questionnaire, item.rule, rows),
        }))
    cols = ["case_id", "item", "status", "value", "rule", "inputs"]
    if not frames_:
        return pd.DataFrame({c: pd.Series(dtype=object) for c in cols})
    return pd.concat(frames_, ignore_index=True)[cols]


# -- equivalence ---------------------------------------------------------------------------------
@settings(max_examples=examples(60), deadline=None)
@given(frames(max_rows=40))
def test_listing_equals_the_row_copying_listing(frame):
    cl = classify(frame, Q)
    pd.testing.assert_frame_equal(cl.faults, reference_faults(cl))


@settings(max_examples=examples(30), deadline=None)
@given(frames(max_rows=30), st.sampled_from(["float", "object", "Int64", "text"]))
def test_listing_equals_reference_whatever_the_stored_types(frame, kind):
    # the same cells stored as floats with fractions, as mixed Python objects, as nullable integers
    # or as text: the texts of the listing follow each column's own type, as before
    frame = frame.copy()
    if kind == "float":
        frame["b"] = frame["b"].astype(float) + np.where(np.arange(len(frame)) % 3 == 0, 0.5, 0.0)
    elif kind == "object":
        frame["c"] = pd.Series([v if i % 2 else (None if pd.isna(v) else str(v)) for i, v in
                                enumerate(frame["c"])], dtype=object)
    elif kind == "Int64":
        frame["a"] = frame["a"].astype("Int64")
    else:
        frame["zone"] = frame["zone"].astype(str)
    cl = classify(frame, Q)
    pd.testing.assert_frame_equal(cl.faults, reference_faults(cl))


def test_hand_made_listing():
    frame = pd.DataFrame({"id": ["r1", "r2", "r3"], "zone": [1, 2, 1],
                          "a": [2, 1, 1], "b": [4, 3, 2.5], "c": [None, 7, None], "d": [1, None, 9],
                          "m_x": [None] * 3, "m_y": [None] * 3, "e": [None] * 3, "g": [None] * 3,
                          "f": [None] * 3})
    faults = classify(frame, Q).faults
    # Hand: r1 a=2 so b (asked if a == 1) is off route and d too; r2 c=7 with b=3 (c asked if b > 3)
    # is off route; r3 b=2.5 is not an integer (invalid) and d=9 is no category (invalid).
    assert faults[["case_id", "item", "status", "value", "inputs"]].values.tolist() == [
        ["r1", "b", "off_route", "4", "a=2"],
        ["r3", "b", "invalid", "2.5", "a=1"],
        ["r2", "c", "off_route", "7", "b=3"],
        ["r1", "d", "off_route", "1", "a=2; c="],
        ["r3", "d", "invalid", "9", "a=1; c="],
    ]


# -- wide files ----------------------------------------------------------------------------------
def test_wide_file_classifies_and_lists_its_faults():
    # 5,000 items x 40 cases, every second item routed on the one before.  Its speed is a
    # benchmark figure (benchmarks/bench_faults.py, the wide-file row), not a timed test.
    n_items, n = 5000, 40
    lines = ["format: 1", "survey: {name: wide, case_id: id}", "sections:", "  - name: s", "    items:"]
    for j in range(n_items):
        rule = f", asked_if: 'w{j - 1} == 1'" if j % 2 else ""
        lines.append(f"      - {{name: w{j}, type: integer, range: [0, 3]{rule}}}")
    q = loads_questionnaire("\n".join(lines) + "\n")
    rng = np.random.default_rng(5)
    values = rng.integers(0, 3, size=(n, n_items)).astype(float)
    frame = pd.concat([pd.DataFrame({"id": np.arange(n)}),
                       pd.DataFrame(values, columns=[f"w{j}" for j in range(n_items)])], axis=1)
    cl = classify(frame, q)
    faults = cl.faults
    # off route: a routed item answered while the one before is not 1 (values 0..2, so 0 or 2)
    expected = int(((values[:, 0::2] != 1) & (values[:, 1::2] >= 0)).sum())
    assert len(faults) == expected
    assert set(faults["item"]) <= {f"w{j}" for j in range(1, n_items, 2)}


def test_listing_equals_reference_with_and_without_rules():
    # 'a' has no rule: its faults carry no rule text; alone, and beside faults of routed items
    base = {c: [None, None] for c in ("b", "c", "d", "m_x", "m_y", "e", "g", "f")}
    only_a = pd.DataFrame({"id": [1, 2], "zone": [1, 1], **base, "a": [7, 1]})
    mixed = only_a.assign(a=[7, 2], b=[None, 4])
    for frame in (only_a, mixed):
        cl = classify(frame, Q)
        assert len(cl.faults) == (1 if frame is only_a else 2)
        pd.testing.assert_frame_equal(cl.faults, reference_faults(cl))


def test_number_codes_give_each_value_its_own_text():
    # The coded texts (distinct numbers written once, taken back by codes) equal the text of every
    # value written one by one (the previous implementation's _cell_text), whatever the numbers:
    # whole and few apart (the offset table), a non-whole least value, NaN only, far apart, infinite.
    from skipwise.classify.faultlist import _number_codes, _number_text

    cases = [[3, 1, np.nan, 2, 3], [0.5, 1.5, 2.5], [np.nan, np.nan], [-7, -9, 4090 - 9],
             [0, 5000, 1], [1.25, 2, np.nan], [np.inf, 1, -np.inf], [2**53, 2**53 - 1], [-0.0, 0.0, 1]]
    for values in cases:
        x = np.array(values, dtype=np.float64)
        codes, uniques = _number_codes(x)
        got = _number_text(np.asarray(uniques, dtype=np.float64))[codes]
        want = _cell_text(pd.Series(x)).to_numpy(dtype=object)
        assert list(got) == list(want), values


def test_dense_codes_index_the_values_they_return():
    # Both ways (the table of present values, and pandas' factorize for a wide span) give codes
    # that take the values back exactly, with each distinct value once.
    from skipwise.classify.faultlist import _dense_codes

    rng = np.random.default_rng(4)
    for span in (7, 10**9):
        values = rng.integers(0, span, 500)
        codes, distinct = _dense_codes(values, span)
        assert np.array_equal(np.asarray(distinct)[codes], values)
        assert len(distinct) == len(np.unique(values))
