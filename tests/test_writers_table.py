"""The column-wise CSV writer of long listings, byte for byte against pandas' own ``to_csv``.

Reference outside the project: ``DataFrame.to_csv(index=False)`` with pandas' defaults (which
hands every cell to Python's csv module); the fault listing written in parts is compared with
the whole listing written by pandas.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from hypothesis_scale import examples

from skipwise.io.writers_table import write_csv_frames

# Characters the csv module treats specially (delimiter, quote, line ends) and some that it
# does not (tab, space, a Unicode line separator, accents, NUL).
TEXT = st.text(alphabet=st.sampled_from(list(',"\n\r \t;\'xé1\u2028\x00')), max_size=6)
CELL = st.one_of(st.none(), TEXT)


def _same_as_pandas(tmp_path, frame: pd.DataFrame, cut: int) -> None:
    frame.to_csv(tmp_path / "pandas.csv", index=False)
    parts = [frame.iloc[:cut], frame.iloc[cut:cut], frame.iloc[cut:]]
    rows = write_csv_frames(parts, tmp_path / "ours.csv", list(frame.columns))
    assert rows == len(frame)
    assert (tmp_path / "ours.csv").read_bytes() == (tmp_path / "pandas.csv").read_bytes()


@settings(max_examples=examples(60), deadline=None)
@given(st.lists(st.tuples(CELL, CELL, st.integers(-10**15, 10**15),
                          st.one_of(st.none(), st.floats(allow_nan=True, allow_infinity=True)), st.booleans()),
                min_size=0, max_size=30), st.integers(0, 30))
def test_rows_equal_pandas_to_csv(tmp_path_factory, rows, cut):
    tmp = tmp_path_factory.mktemp("csv")
    a, b, i, f, flag = (list(c) for c in zip(*rows)) if rows else ([], [], [], [], [])
    frame = pd.DataFrame({
        "text": pd.Series(a, dtype="str"),  # pandas' string dtype
        "obj": pd.Series(b, dtype=object),  # an object column of texts and None
        "n": pd.Series(i, dtype=np.int64),
        "x": pd.Series([np.nan if v is None else v for v in f], dtype=np.float64),
        "flag": pd.Series(flag, dtype=bool),
    })
    _same_as_pandas(tmp, frame, cut)
    _same_as_pandas(tmp, frame[["obj", "text"]], cut)


def test_odd_columns_go_through_pandas(tmp_path):
    # mixed objects (1, 1.0, True and "1" print differently), dates, categories, one column alone
    frame = pd.DataFrame({
        "mixed": pd.Series([1, 1.0, True, "1", None, 2.5], dtype=object),
        "when": pd.to_datetime(["2026-01-02", None, "2026-03-04", "2026-05-06", "2026-07-08", "2026-09-10"]),
        "cat": pd.Categorical(["a", "b,c", None, "a", "d", "b,c"]),
        "z": [-0.0, 0.0, 1e16, 1e-7, np.inf, -np.inf],
    })
    _same_as_pandas(tmp_path, frame, 2)
    _same_as_pandas(tmp_path, frame[["cat"]], 3)
    _same_as_pandas(tmp_path, frame[["z", "mixed"]], 1)


def test_header_only_when_nothing_to_list(tmp_path):
    frame = pd.DataFrame({"case id": pd.Series(dtype=object), 'a,"b"': pd.Series(dtype=object)})
    frame.to_csv(tmp_path / "pandas.csv", index=False)
    assert write_csv_frames([], tmp_path / "ours.csv", list(frame.columns)) == 0
    assert (tmp_path / "ours.csv").read_bytes() == (tmp_path / "pandas.csv").read_bytes()


def test_fault_listing_in_parts_equals_the_whole_listing(tmp_path):
    # The listing written part by part (a few faults per part) has the bytes pandas writes for
    # the whole listing, which the classification builds in one go.
    from skipwise.classify import classify
    from skipwise.classify.export import fault_count, fault_listing, fault_listing_parts, write_fault_listing
    from skipwise.questionnaire import loads_questionnaire

    q = loads_questionnaire(
        "format: 1\nsurvey: {name: t, case_id: resp}\n"
        "codes: [{value: -9, reason: refused, kind: nonresponse}]\nsections:\n  - name: s\n    items:\n"
        "      - {name: a, type: integer, range: [0, 9]}\n"
        "      - {name: b, type: integer, range: [0, 9], asked_if: 'a > 3'}\n"
        "      - {name: c, type: integer, range: [0, 9], asked_if: 'b in [1, 2] or a == 0'}\n"
        "      - {name: d, type: text, asked_if: 'c != 5'}\n")
    rng = np.random.default_rng(3)
    n = 400
    data = pd.DataFrame({"resp": np.arange(100, 100 + n),
                         **{k: np.where(rng.random(n) < 0.1, -9.0, rng.integers(0, 12, n).astype(float))
                            for k in "abc"},
                         "d": pd.Series(rng.choice(["yes", 'said "no", then', None, "x\ny"], n), dtype=object)})
    cl = classify(data, q)
    for rows, cut in ((1, 4), (40, 3), (10**6, 1)):  # one item a part, a few items, one part
        parts = list(fault_listing_parts(cl, rows=rows))
        assert len(parts) >= cut if cut > 1 else len(parts) == 1  # the listing really was cut
        assert fault_count(cl) == sum(len(p) for p in parts)
        write_fault_listing(cl, tmp_path / f"parts{rows}.csv", rows=rows)
    whole = fault_listing(cl)  # builds the listing in one go
    assert len(whole) == fault_count(cl) and "resp" in whole.columns
    whole.to_csv(tmp_path / "whole.csv", index=False)
    for rows in (1, 40, 10**6):
        assert (tmp_path / f"parts{rows}.csv").read_bytes() == (tmp_path / "whole.csv").read_bytes()
