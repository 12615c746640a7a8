"""Stable status and reason numbers (docs/contract.md §1, docs/statuses.md), and the files that carry them.

The expected numbers are the contract's (docs/contract.md §1, docs/statuses.md: statuses 1-9; recoded .sav -900 - number;
recoded .dta .a-.h for statuses 2-9 and .i-.z for reasons 11-28) and the built-in table of
docs/statuses.md; the written files are read back with pyreadstat and pandas' own Stata reader,
implementations independent of skipwise's writers.
"""

from __future__ import annotations

import random
import textwrap

import numpy as np
import pandas as pd
import pyreadstat
import pytest

from skipwise.checkdata import check_data
from skipwise.classify import classify
from skipwise.classify.export import recoded_copy, with_status_columns
from skipwise.errors import ProblemCode, SkipwiseError
from skipwise.io import write_survey
from skipwise.questionnaire import loads_questionnaire
from skipwise.questionnaire.numbers import BUILTIN_REASON_NUMBERS

CODES = [
    "{value: -1, reason: routed_out, kind: structural}",
    "{value: -7, reason: refused, kind: nonresponse}",
    "{value: -8, reason: dont_know, kind: nonresponse}",
    "{value: -5, reason: proxy_unable, kind: nonresponse, number: 25}",
    "{value: -4, reason: zz_lost_form, kind: nonresponse}",
    "{value: -3, reason: aa_not_reached, kind: nonresponse}",
    "{value: -2, reason: no_answer, kind: nonresponse}",
]


def _questionnaire(codes: list[str], extra_item_codes: str = "") -> str:
    listed = "\n".join(f"  - {c}" for c in codes)
    return textwrap.dedent("""\
        format: 1
        survey: {name: t, case_id: id}
        codes:
        """) + listed + "\n" + textwrap.dedent(f"""\
        sections:
          - name: s
            items:
              - {{name: gate, type: categorical, values: {{1: "Yes", 2: "No"}}}}
              - {{name: amount, type: integer, range: [0, 10], asked_if: gate == 1{extra_item_codes}}}
              - {{name: note, type: integer, range: [0, 10], optional: true}}
        """)


def test_numbers_do_not_depend_on_the_order_of_codes():
    expected = {"dont_know": 11, "refused": 12, "no_answer": 13,   # built-in (docs/statuses.md)
                "proxy_unable": 25,                                # pinned with number:
                "aa_not_reached": 21, "zz_lost_form": 22}          # free numbers from 21, alphabetical
    rng = random.Random(20260)
    for _ in range(8):
        shuffled = CODES[:]
        rng.shuffle(shuffled)
        q = loads_questionnaire(_questionnaire(shuffled))
        assert dict(q.reason_numbers) == expected, shuffled


def test_builtin_numbers_are_distinct_and_fit_stata_letters():
    numbers = list(BUILTIN_REASON_NUMBERS.values())
    assert len(set(numbers)) == len(numbers)
    assert all(11 <= k <= 20 for k in numbers)  # 21 and up are free for a questionnaire's own reasons


@pytest.mark.parametrize("code, message", [
    ("{value: -5, reason: proxy_unable, kind: nonresponse, number: 5}",
     "code number 5 of reason 'proxy_unable' must be a whole number from 11 to 99"),
    ("{value: -5, reason: proxy_unable, kind: nonresponse, number: 100}",
     "code number 100 of reason 'proxy_unable' must be a whole number from 11 to 99"),
    ("{value: -5, reason: proxy_unable, kind: nonresponse, number: '25'}",
     "code number '25' of reason 'proxy_unable' must be a whole number from 11 to 99"),
    ("{value: -5, reason: proxy_unable, kind: nonresponse, number: 12}",
     "number 12 given to 'proxy_unable' is the built-in number of 'refused'"),
    ("{value: -5, reason: gone, kind: structural, number: 30}",
     "code number 30 is given to a structural code (gone)"),
])
def test_bad_numbers_are_refused_with_their_line(code, message):
    codes = ["{value: -7, reason: refused, kind: nonresponse}", code]
    with pytest.raises(SkipwiseError) as err:
        loads_questionnaire(_questionnaire(codes))
    assert message in str(err.value)
    assert "line 5" in str(err.value)


def test_one_number_for_two_reasons_and_two_numbers_for_one_reason():
    codes = ["{value: -5, reason: proxy_unable, kind: nonresponse, number: 30}",
             "{value: -6, reason: lost, kind: nonresponse, number: 30}"]
    with pytest.raises(SkipwiseError) as err:
        loads_questionnaire(_questionnaire(codes))
    assert "number 30 is given to both 'proxy_unable' and 'lost'" in str(err.value)
    with pytest.raises(SkipwiseError) as err:
        loads_questionnaire(_questionnaire(
            ["{value: -5, reason: proxy_unable, kind: nonresponse, number: 30}"],
            ", codes: [{value: -6, reason: proxy_unable, kind: nonresponse, number: 31}]"))
    assert "reason 'proxy_unable' is numbered 31 here but 30 on line 4" in str(err.value)


def test_a_pin_may_move_a_builtin_reason():
    q = loads_questionnaire(_questionnaire(["{value: -8, reason: dont_know, kind: nonresponse, number: 40}"]))
    assert q.reason_numbers == {"dont_know": 40}


FRAME = pd.DataFrame({
    "id": [1, 2, 3, 4, 5, 6],
    "gate": [1, 2, 1, 1, -8, 1],
    "amount": [5, np.nan, -7, -5, np.nan, -3],
    "note": [1, np.nan, np.nan, 2, 3, -4],
})
# Statuses of amount by docs/contract.md §1: answered, skipped, refused, proxy_unable, gate_unknown, aa_not_reached;
# of note: answered, left_blank, left_blank, answered, answered, zz_lost_form.
AMOUNT_NUMBERS = [1, 2, 12, 25, 4, 21]
NOTE_NUMBERS = [1, 9, 9, 1, 1, 22]


@pytest.fixture(scope="module")
def classified():
    return classify(FRAME, loads_questionnaire(_questionnaire(CODES)))


def test_status_columns_read_back_by_pyreadstat(classified, tmp_path):
    out, meta = with_status_columns(FRAME, classified)
    path = write_survey(out, tmp_path / "cols.sav", meta)
    back, m = pyreadstat.read_sav(str(path))
    assert back["amount_status"].tolist() == AMOUNT_NUMBERS
    assert back["note_status"].tolist() == NOTE_NUMBERS
    labels = m.variable_value_labels["note_status"]
    assert "left_blank" in labels[9.0].lower().replace(" ", "_") or "left blank" in labels[9.0].lower()


def test_recoded_sav_holds_minus_900_minus_number(classified, tmp_path):
    out, meta = recoded_copy(FRAME, classified, "sav")
    path = write_survey(out, tmp_path / "rec.sav", meta)
    back, m = pyreadstat.read_sav(str(path), user_missing=True)
    assert back["amount"].tolist() == [5, -902, -912, -925, -904, -921]
    assert back["note"].tolist() == [1, -909, -909, 2, 3, -922]
    # every status code is declared missing, so an analyst's package never takes it for an answer
    plain, _ = pyreadstat.read_sav(str(path))
    assert plain["amount"].isna().tolist() == [False, True, True, True, True, True]


def test_recoded_dta_letters_by_number(classified, tmp_path):
    out, meta = recoded_copy(FRAME, classified, "dta")
    path = write_survey(out, tmp_path / "rec.dta", meta)
    # pandas' own Stata reader keeps extended missing values as StataMissingValue objects
    back = pd.read_stata(path, convert_missing=True, convert_categoricals=False)
    cells = [v.string if hasattr(v, "string") else v for v in back["amount"]]
    # skipped 2 -> .a, refused 12 -> .j, proxy_unable 25 -> .w, gate_unknown 4 -> .c, 21 -> .s
    assert cells == [5, ".a", ".j", ".w", ".c", ".s"]
    notes = [v.string if hasattr(v, "string") else v for v in back["note"]]
    assert notes == [1, ".h", ".h", 2, 3, ".t"]  # left_blank 9 -> .h, 22 -> .t
    # pyreadstat sees the same letters, and their labels name the statuses
    again, m = pyreadstat.read_dta(str(path), user_missing=True)
    assert again["amount"].tolist() == [5, "a", "j", "w", "c", "s"]
    labels = {k: v.lower() for k, v in m.variable_value_labels["amount"].items()}
    assert "left" in labels["h"] and "know" in labels["i"] and "refus" in labels["j"] and "proxy" in labels["w"]


def test_reason_above_28_cannot_be_written_as_recoded_dta(tmp_path):
    q = loads_questionnaire(_questionnaire(["{value: -5, reason: proxy_unable, kind: nonresponse, number: 31}"]))
    cl = classify(pd.DataFrame({"id": [1], "gate": [1], "amount": [-5], "note": [1]}), q)
    with pytest.raises(SkipwiseError) as err:
        recoded_copy(cl.data, cl, "dta")
    # the reason is a global code: every numeric item carries it; one problem names them all
    [p] = err.value.problems
    assert p.code is ProblemCode.NO_STATA_LETTER and p.line == 4
    assert "numeric items carrying it: gate, amount, note" in p.message
    assert "columns" in p.hint and "number 31" in p.message
    out, meta = recoded_copy(cl.data, cl, "sav")  # .sav has room: -931
    back, _ = pyreadstat.read_sav(str(write_survey(out, tmp_path / "r.sav", meta)), user_missing=True)
    assert back["amount"].tolist() == [-931]


def test_check_notes_unnumbered_and_too_high_reasons():
    q = loads_questionnaire(_questionnaire(CODES + ["{value: -6, reason: far_away, kind: nonresponse, number: 40}"]))
    found = check_data(FRAME.assign(amount=FRAME["amount"]), q)
    unnumbered = [p for p in found.problems if p.code is ProblemCode.UNNUMBERED_REASON]
    assert sorted(p.message.split("'")[1] for p in unnumbered) == ["aa_not_reached", "zz_lost_form"]
    assert "number: 21" in next(p.hint for p in unnumbered if "aa_not_reached" in p.message)
    high = [p for p in found.problems if p.code is ProblemCode.NO_STATA_LETTER]
    assert [p.message.split("'")[1] for p in high] == ["far_away"]
    assert found.ok  # notes, not errors


def test_docs_table_matches_the_code():
    """docs/statuses.md is the users' reference: its tables must say what the code does."""
    from pathlib import Path

    from skipwise.classify.export import letter_of
    from skipwise.classify.statuses import STATUS_NUMBERS

    rows = {}
    for line in (Path(__file__).parents[1] / "docs" / "statuses.md").read_text().splitlines():
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        if len(cells) >= 4 and cells[0].isdigit() and cells[1].startswith("`"):
            rows[cells[1].strip("`")] = (int(cells[0]), cells[2].replace("−", "-"), cells[3].strip("`"))
    assert {s: r[0] for s, r in rows.items() if r[0] < 10} == STATUS_NUMBERS
    assert {s: r[0] for s, r in rows.items() if r[0] > 10} == dict(BUILTIN_REASON_NUMBERS)
    for status, (number, sav, dta) in rows.items():
        if number > 1:
            assert int(sav) == -900 - number and dta == letter_of(number), status
