"""Optional items and ``left_blank`` (docs/questionnaire-format.md, docs/contract.md §1), case by case on tiny inline frames.

Every expected status below is stated by hand from the contract's text (docs/contract.md §1: "left_blank:
in universe, blank, and the item is marked optional: true"; "Optional items neither set nor count
toward the break-off point; an optional blank after a detected break-off is breakoff. As a rule
input a left_blank item is absent"), never produced by the classifier.
"""

from __future__ import annotations

import textwrap

import numpy as np
import pandas as pd
import pytest

from skipwise.classify import classify
from skipwise.errors import SkipwiseError
from skipwise.questionnaire import loads_questionnaire
from skipwise.report.tables import BASE_COL, ITEM_RATE, compute_figures, items_table
from skipwise.weighting.outcomes import interview_outcome

Q = loads_questionnaire(textwrap.dedent("""\
    format: 1
    survey: {name: t, case_id: id}
    codes:
      - {value: -1, reason: not_asked, kind: structural}
      - {value: -8, reason: dont_know, kind: nonresponse}
      - {value: -9, reason: refused, kind: nonresponse}
    breakoff: {min_run: 2}
    sections:
      - name: main
        items:
          - {name: gate, type: categorical, values: {1: "Yes", 2: "No"}}
          - name: comment
            type: integer
            range: [0, 9]
            optional: true
            asked_if: gate == 1
            text: Is there anything else you would like to tell us?
          - {name: after_ne, type: integer, range: [0, 9], asked_if: comment != 1}
          - {name: after_not, type: integer, range: [0, 9], asked_if: not comment == 1}
      - name: extra
        optional: true
        items:
          - {name: e1, type: integer, range: [0, 9]}
          - {name: e2, type: integer, range: [0, 9], optional: false}
    """))

ROWS = [
    # id, gate, comment, after_ne, after_not, e1, e2 -> statuses
    ("blank-optional-in-universe", 1, None, None, 3, None, 4,
     # comment left_blank is absent: `comment != 1` false (skipped), `not comment == 1` true
     ["answered", "left_blank", "skipped", "answered", "left_blank", "answered"]),
    ("code-on-optional-is-its-reason", 1, -9, None, None, 2, 4,
     # refused is unknown as a rule input: both rules unknown, blanks gate_unknown
     ["answered", "refused", "gate_unknown", "gate_unknown", "answered", "answered"]),
    # comment skipped is absent too: `comment != 1` is false, so a value there is off route
    ("optional-out-of-universe", 2, None, 5, 5, 1, 1,
     ["answered", "skipped", "off_route", "answered", "answered", "answered"]),
    ("optional-under-unknown-gate", -8, None, None, None, 1, 1,
     ["dont_know", "gate_unknown", "gate_unknown", "gate_unknown", "answered", "answered"]),
    ("optional-answered", 1, 1, None, None, 1, 1,
     ["answered", "answered", "skipped", "skipped", "answered", "answered"]),
    # wrong_code is unknown as an input; answers under an unknown rule are answers
    ("structural-code-on-optional", 1, -1, 2, 2, 1, 1,
     ["answered", "wrong_code", "answered", "answered", "answered", "answered"]),
]
COLUMNS = ["id", "gate", "comment", "after_ne", "after_not", "e1", "e2"]


@pytest.fixture(scope="module")
def classified():
    frame = pd.DataFrame([r[:7] for r in ROWS], columns=COLUMNS)
    return classify(frame, Q)


@pytest.mark.parametrize("row", range(len(ROWS)), ids=[r[0] for r in ROWS])
def test_status_table(classified, row):
    assert list(classified.status.iloc[row].astype(str)) == ROWS[row][7]


def test_model_keeps_optional_and_text():
    assert Q.item("comment").optional and Q.item("comment").text.startswith("Is there anything else")
    assert Q.item("e1").optional  # inherited from the section
    assert not Q.item("e2").optional  # the item's own `optional: false` wins
    assert not Q.item("gate").optional and Q.item("gate").text is None
    assert Q.sections[1].optional


def test_left_blank_is_outside_the_rate_base(classified):
    # comment: in universe in rows 1, 2, 5, 6 (gate == 1); row 1 left_blank -> D = 3 cells:
    # refused (1), answered (1), wrong_code (1). Item nonresponse rate = 1/3 (docs/contract.md §2).
    s = classified.item_summary()
    assert s.loc["comment", "in_universe"] == 3
    assert s.loc["comment", "left_blank"] == 1
    assert s.loc["comment", "nonresponse_rate"] == pytest.approx(1 / 3)
    fig = compute_figures(classified)
    table = items_table(classified, fig)
    row = table.set_index("Item").loc["comment"]
    assert row[BASE_COL] == 3
    assert row[ITEM_RATE] == pytest.approx(1 / 3)


def test_left_blank_not_in_share_answered(classified):
    cases = classified.cases
    # row 1: applicable = gate, after_not, e2 (comment and e1 left blank required no answer): 3 of 3 answered
    assert cases["applicable"].iloc[0] == 3 and cases["answered"].iloc[0] == 3
    assert cases["share_answered"].iloc[0] == 1.0
    fig = compute_figures(classified)
    assert fig.applicable[0] == 3  # the report's per-case figures agree
    # the complete/partial split (default cut 80 %) sees a complete interview
    assert interview_outcome(cases["share_answered"]).iloc[0] == "I"


def test_optional_items_do_not_count_toward_breakoff():
    q = loads_questionnaire(textwrap.dedent("""\
        format: 1
        survey: {name: t, case_id: id}
        breakoff: {min_run: 2}
        sections:
          - name: s
            items:
              - {name: a, type: integer, range: [0, 9]}
              - {name: o1, type: integer, range: [0, 9], optional: true}
              - {name: o2, type: integer, range: [0, 9], optional: true}
              - {name: b, type: integer, range: [0, 9]}
              - {name: c, type: integer, range: [0, 9]}
              - {name: o3, type: integer, range: [0, 9], optional: true}
        """))
    frame = pd.DataFrame({
        "id": [1, 2, 3, 4],
        "a": [1, 1, 1, 1],
        "o1": [None, None, None, 5],
        "o2": [None, None, None, None],
        "b": [2, None, 2, None],
        "c": [3, None, None, None],
        "o3": [None, None, None, 7],
    })
    got = classify(frame, q).status.astype(str).values.tolist()
    assert got == [
        # blank optional items alone are no break-off
        ["answered", "left_blank", "left_blank", "answered", "answered", "left_blank"],
        # b, c blank (a run of 2 required items) -> break-off after a: optional blanks after it too
        ["answered", "breakoff", "breakoff", "breakoff", "breakoff", "breakoff"],
        # one required blank at the end: the optional blanks do not lengthen the run to 2
        ["answered", "left_blank", "left_blank", "answered", "item_missing", "left_blank"],
        # answers to optional items o1 and o3 do not set the last activity: the run b, c after a
        # counts, o2 (optional blank after the point) is breakoff, the answers stay answered
        ["answered", "answered", "breakoff", "breakoff", "breakoff", "answered"],
    ]


def test_optional_must_be_a_boolean():
    for bad in ('"yes"', "1", "[true]"):
        with pytest.raises(SkipwiseError) as err:
            loads_questionnaire(textwrap.dedent(f"""\
                format: 1
                survey: {{name: t, case_id: id}}
                sections:
                  - name: s
                    items:
                      - {{name: a, type: integer, optional: {bad}}}
                """))
        text = str(err.value)
        assert "'optional' of item 'a' must be true or false" in text and "line 6" in text


def test_text_must_be_one_text():
    with pytest.raises(SkipwiseError) as err:
        loads_questionnaire(textwrap.dedent("""\
            format: 1
            survey: {name: t, case_id: id}
            sections:
              - name: s
                items:
                  - name: a
                    type: integer
                    text: [How many, people]
            """))
    assert "'text' of an item must be a text, found a list" in str(err.value)
    assert "line 8" in str(err.value) and len(err.value.problems) == 1


def test_left_blank_is_never_imputed():
    from skipwise.impute.skipaware import NEVER_IMPUTED

    assert "left_blank" in NEVER_IMPUTED


def test_numbers_of_left_blank_in_exports(classified):
    from skipwise.classify.export import status_codes, status_letters, status_numbers

    # docs/contract.md §1: left_blank is status 9, -909 in recoded .sav, .h in recoded .dta
    assert status_numbers(classified)["left_blank"] == 9
    assert status_codes(classified)["left_blank"] == -909
    assert status_letters(classified)["left_blank"] == ".h"
    assert np.isin(classified.codes, [classified.code("left_blank")]).sum() == 2
