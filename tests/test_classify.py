"""Cell statuses against docs/contract.md §1, case by case, on tiny inline frames."""

from __future__ import annotations

import textwrap

import numpy as np
import pandas as pd
import pytest

from skipwise.classify import classify
from skipwise.errors import ProblemCode, SkipwiseError
from skipwise.questionnaire import loads_questionnaire

Q = loads_questionnaire(textwrap.dedent("""\
    format: 1
    survey: {name: t, case_id: id}
    context: [mode]
    codes:
      - {value: -1, reason: not_asked, kind: structural}
      - {value: -8, reason: dont_know, kind: nonresponse}
      - {value: -9, reason: refused, kind: nonresponse}
    breakoff: {min_run: 3}
    sections:
      - name: s
        items:
          - {name: gate, type: categorical, values: {1: "Yes", 2: "No"}}
          - name: amount
            type: number
            range: [0, 100]
            asked_if: gate == 1
            codes: [{value: 997, reason: varies, kind: substantive}]
          - {name: other, type: integer, range: [0, 5], asked_if: gate != 1}
          - {name: negated, type: integer, range: [0, 5], asked_if: not gate == 1}
          - {name: fallback, type: integer, range: [0, 5], asked_if: not answered(amount)}
          - {name: note, type: text}
    """))

ROWS = [
    # id, gate, amount, other, negated, fallback, note -> statuses of gate, amount, other, negated, fallback, note
    ("answered-in", 1, 50, None, None, None, "x",
     ["answered", "answered", "skipped", "skipped", "skipped", "answered"]),
    ("skip-struct-code", 2, -1, 3, 3, 2, "x",
     ["answered", "skipped", "answered", "answered", "answered", "answered"]),
    ("reason-in-universe", 1, -8, None, None, -9, "x",
     ["answered", "dont_know", "skipped", "skipped", "refused", "answered"]),
    ("item-missing", 1, None, None, None, 1, "x",
     ["answered", "item_missing", "skipped", "skipped", "answered", "answered"]),
    ("wrong-code", 1, -1, None, None, 1, "x",
     ["answered", "wrong_code", "skipped", "skipped", "answered", "answered"]),
    # answered() is a plain fact about the stored cell: an off-route answer is still an answer
    ("off-route-answer", 2, 40, 1, 1, 1, "x",
     ["answered", "off_route", "answered", "answered", "off_route", "answered"]),
    ("off-route-code", 2, -9, 1, 1, 1, "x",
     ["answered", "off_route", "answered", "answered", "answered", "answered"]),
    ("invalid-wins-out-of-universe", 2, 500, 1, 1, 1, "x",
     ["answered", "invalid", "answered", "answered", "answered", "answered"]),
    ("substantive-code-is-answer", 1, 997, None, None, None, "x",
     ["answered", "answered", "skipped", "skipped", "skipped", "answered"]),
    # gate refused: `gate != 1` is unknown; `not gate == 1` is unknown too (gate is unknown, not absent)
    ("gate-unknown", -9, None, -1, None, 4, "x",
     ["refused", "gate_unknown", "gate_unknown", "gate_unknown", "answered", "answered"]),
    ("answer-under-unknown-gate", -8, 30, None, -9, None, "x",
     ["dont_know", "answered", "gate_unknown", "refused", "skipped", "answered"]),
    ("invalid-gate-is-unknown", 3, None, None, None, 2, "x",
     ["invalid", "gate_unknown", "gate_unknown", "gate_unknown", "answered", "answered"]),
]


@pytest.fixture(scope="module")
def classified():
    frame = pd.DataFrame([r[:7] for r in ROWS], columns=["id", "gate", "amount", "other", "negated",
                                                          "fallback", "note"])
    frame["mode"] = 1
    return classify(frame, Q)


@pytest.mark.parametrize("row", range(len(ROWS)), ids=[r[0] for r in ROWS])
def test_status_table(classified, row):
    assert list(classified.status.iloc[row].astype(str)) == ROWS[row][7]


def test_skipped_gate_makes_not_equal_false_but_not_equal_negation_true():
    # docs/contract.md §3: with x skipped, `x != 1` is false while `not x == 1` is true.
    q = loads_questionnaire(textwrap.dedent("""\
        format: 1
        survey: {name: t, case_id: id}
        sections:
          - name: s
            items:
              - {name: a, type: categorical, values: {1: "Yes", 2: "No"}}
              - {name: x, type: categorical, values: {1: "Yes", 2: "No"}, asked_if: a == 1}
              - {name: ne, type: integer, asked_if: x != 1}
              - {name: nt, type: integer, asked_if: not x == 1}
        """))
    frame = pd.DataFrame({"id": [1], "a": [2], "x": [None], "ne": [None], "nt": [4]})
    assert list(classify(frame, q).status.iloc[0].astype(str)) == ["answered", "skipped", "skipped", "answered"]


def test_counts_cases_and_faults(classified):
    counts = classified.counts()
    assert counts.loc["amount", "off_route"] == 2 and counts.loc["amount", "invalid"] == 1
    assert counts.sum(axis=1).eq(len(ROWS)).all()
    faults = classified.faults
    assert faults[faults["item"] == "amount"][["case_id", "status", "value"]].values.tolist() == [
        ["wrong-code", "wrong_code", "-1"], ["off-route-answer", "off_route", "40"],
        ["off-route-code", "off_route", "-9"], ["invalid-wins-out-of-universe", "invalid", "500"]]
    assert set(faults["inputs"][faults["item"] == "amount"]) == {"gate=1", "gate=2"}
    cases = classified.cases.set_index("case_id")
    # answered-in: gate, amount, note applicable and answered.
    assert cases.loc["answered-in", ["applicable", "answered", "nonresponse"]].tolist() == [3, 3, 0]
    assert cases.loc["reason-in-universe", "share_answered"] == pytest.approx(2 / 4)


def test_weighted_item_rate_is_weighted_ratio(classified):
    w = np.arange(1, len(ROWS) + 1, dtype=float)
    summary = classified.item_summary(weight=w)
    # amount, by hand from ROWS: in universe are the gate == 1 rows (answered-in, reason, item-missing,
    # wrong-code, substantive code: positions 0, 2, 3, 4, 8) and the answer under an unknown gate
    # (position 10). The invalid 500 (position 7) has gate == 2: out of universe, not in the denominator.
    in_universe = np.zeros(len(ROWS), bool)
    in_universe[[0, 2, 3, 4, 8, 10]] = True
    nonresp = np.zeros(len(ROWS), bool)
    nonresp[[2, 3]] = True  # dont_know, item_missing
    expected = (w * nonresp).sum() / (w * in_universe).sum()
    assert summary.loc["amount", "in_universe"] == pytest.approx(w[in_universe].sum())
    assert summary.loc["amount", "nonresponse_rate"] == pytest.approx(expected)


def test_invalid_value_in_universe_counts_in_the_denominator():
    frame = pd.DataFrame({"id": [1, 2], "gate": [1, 1], "amount": [500, -8], "other": None, "negated": None,
                          "fallback": [1, 1], "note": "x", "mode": 1})
    summary = classify(frame, Q).item_summary()
    # Both cases are in amount's universe (gate == 1): one invalid answer, one don't know.
    assert summary.loc["amount", ["in_universe", "invalid", "dont_know"]].tolist() == [2, 1, 1]
    assert summary.loc["amount", "nonresponse_rate"] == pytest.approx(1 / 2)


def test_bad_weights_are_a_user_error(classified):
    with pytest.raises(SkipwiseError) as info:
        classified.item_summary(weight=[1.0, 2.0])
    assert info.value.codes == [ProblemCode.BAD_WEIGHTS]


MULTI = loads_questionnaire(textwrap.dedent("""\
    format: 1
    survey: {name: t, case_id: id}
    codes: [{value: -9, reason: refused, kind: nonresponse}, {value: -1, reason: na, kind: structural}]
    sections:
      - name: s
        items:
          - {name: m, type: multi, options: {a: A, b: B}}
          - {name: follow, type: integer, asked_if: m_b == 1}
    """))


@pytest.mark.parametrize("a,b,status,follow,follow_status", [
    (1, 0, "answered", None, "skipped"),
    (0, 0, "answered", None, "skipped"),         # went through the list, ticked nothing
    (None, 1, "answered", 3, "answered"),        # a mark on any option answers the set
    (-9, -9, "refused", None, "gate_unknown"),   # coded options give the set their code
    (None, None, "item_missing", None, "gate_unknown"),
    (-1, -1, "wrong_code", None, "gate_unknown"),
    (1, 7, "invalid", None, "gate_unknown"),     # 7 is neither selected, unselected nor a code
], ids=["ticked", "none-ticked", "partly-blank", "refused", "blank", "structural", "invalid"])
def test_multi_set_status(a, b, status, follow, follow_status):
    frame = pd.DataFrame({"id": [1], "m_a": [a], "m_b": [b], "follow": [follow]})
    assert list(classify(frame, MULTI).status.iloc[0].astype(str)) == [status, follow_status]


def _chain(min_run_line: str = "") -> str:
    items = "\n".join(f"          - {{name: q{i}, type: integer, range: [0, 9]}}" for i in range(1, 8))
    return textwrap.dedent(f"""\
        format: 1
        survey: {{name: t, case_id: id}}
        context: [disp, last]
        codes: [{{value: -9, reason: refused, kind: nonresponse}}]
        {min_run_line}
        sections:
          - name: s
            items:
        """) + items + "\n"


def test_breakoff_trailing_run():
    q = loads_questionnaire(_chain("breakoff: {min_run: 3}"))
    frame = pd.DataFrame({
        "id": [1, 2, 3], "disp": 0, "last": None,
        "q1": [1, 1, 1], "q2": [None, None, 1], "q3": [1, -9, 1], "q4": [None, None, 1],
        "q5": [None, None, 1], "q6": [None, None, None], "q7": [None, 1, None],
    })
    st = classify(frame, q).status.astype(str).values.tolist()
    # case 1: last activity q3; q4..q7 blank (4 >= 3) -> break-off; the earlier blank q2 stays item_missing
    assert st[0] == ["answered", "item_missing", "answered", "breakoff", "breakoff", "breakoff", "breakoff"]
    # case 2: answers up to q7: no break-off
    assert "breakoff" not in st[1]
    # case 3: only 2 trailing blanks (< 3): item_missing
    assert st[2][-2:] == ["item_missing", "item_missing"]


def test_breakoff_from_disposition_and_last_item_paradata():
    q = loads_questionnaire(_chain("breakoff: {disposition: disp, breakoff_codes: [212]}"))
    frame = pd.DataFrame({"id": [1, 2], "disp": [212, 110], "last": None, "q1": [1, 1], "q2": [1, 1],
                          "q3": [1, 1], "q4": [1, 1], "q5": [1, 1], "q6": [1, None], "q7": [None, None]})
    st = classify(frame, q).status.astype(str).values.tolist()
    assert st[0][-1] == "breakoff" and st[1][-2:] == ["item_missing", "item_missing"]
    q = loads_questionnaire(_chain("breakoff: {last_item: last}"))
    frame = frame.assign(last=["q5", None])
    st = classify(frame, q).status.astype(str).values.tolist()
    assert st[0][-2:] == ["answered", "breakoff"]        # q6 answered (activity), q7 after q5 -> breakoff
    assert st[1][-2:] == ["item_missing", "item_missing"]  # no paradata: trailing rule (2 < 5)


def test_missing_columns_reported_together():
    frame = pd.DataFrame({"id": [1], "gate": [1]})
    with pytest.raises(SkipwiseError) as info:
        classify(frame, Q)
    assert info.value.codes == [ProblemCode.MISSING_COLUMN] * 6
    assert {p.item for p in info.value.problems} == {None, "amount", "other", "negated", "fallback", "note"}
    assert "context column 'mode' is not in the data" in info.value.render()


def test_stata_letters_and_text_codes():
    q = loads_questionnaire(textwrap.dedent("""\
        format: 1
        survey: {name: t, case_id: id}
        codes: [{value: .a, reason: dont_know, kind: nonresponse}, {value: "-9", reason: refused, kind: nonresponse}]
        sections:
          - name: s
            items:
              - {name: x, type: integer, range: [0, 9]}
              - {name: t, type: text}
        """))
    frame = pd.DataFrame({"id": [1, 2, 3], "x": pd.Series([3.0, ".a", None], dtype=object),
                          "t": pd.Series(["hello", "-9", "  "], dtype="str")})
    st = classify(frame, q).status.astype(str).values.tolist()
    assert st == [["answered", "answered"], ["dont_know", "refused"], ["item_missing", "item_missing"]]


def test_date_item_with_range():
    q = loads_questionnaire(textwrap.dedent("""\
        format: 1
        survey: {name: t, case_id: id}
        codes: [{value: -9, reason: refused, kind: nonresponse}]
        sections:
          - name: s
            items:
              - {name: visit, type: date, range: [2026-01-01, 2026-12-31]}
        """))
    frame = pd.DataFrame({"id": [1, 2, 3, 4], "visit": pd.Series(["2026-03-04", "2025-12-31", None, "-9"],
                                                                 dtype=object)})
    assert list(classify(frame, q).status["visit"].astype(str)) == ["answered", "invalid", "item_missing",
                                                                     "refused"]


def test_fault_inputs_of_a_rule_reading_a_whole_set():
    q = loads_questionnaire(textwrap.dedent("""\
        format: 1
        survey: {name: t, case_id: id}
        sections:
          - name: s
            items:
              - {name: m, type: multi, options: {a: A, b: B}}
              - {name: m_count, type: integer, asked_if: not answered(m)}
        """))
    frame = pd.DataFrame({"id": [1], "m_a": [1], "m_b": [0], "m_count": [2]})
    faults = classify(frame, q).faults
    # m_count is off route (the set was answered); its inputs are the set's option columns,
    # not every column whose name merely starts with "m_".
    assert faults[["item", "status", "inputs"]].values.tolist() == [["m_count", "off_route", "m_a=1; m_b=0"]]
