"""Routing rules in plain words: every operator, and the three-valued cases.

Expected sentences are written by hand from the rule language's definition
(docs/questionnaire-format.md: a comparison with a skipped item is false, so
``x != 1`` excludes cases where x was not asked and ``not x == 1`` includes them).
"""

from __future__ import annotations

import textwrap

import pandas as pd
import pytest

from skipwise.classify import classify
from skipwise.questionnaire import loads_questionnaire
from skipwise.rules.words import rule_words, universe_words

Q = textwrap.dedent("""
    format: 1
    survey: {name: words-test, case_id: id}
    context: [region]
    codes:
      - {value: -9, reason: refused, kind: nonresponse, label: Refused to say}
      - {value: -7, reason: dont_know, kind: nonresponse}
    sections:
      - name: s
        items:
          - {name: age, label: Age in years, type: integer, range: [0, 99]}
          - {name: work, label: In paid work, type: categorical, values: {1: "Yes", 2: "No"}}
          - {name: mode, label: Way to work, type: categorical, asked_if: work == 1,
             values: {1: Car, 2: Bus, 5: From home}}
          - {name: kids, type: integer, range: [0, 9]}
          - {name: adults, label: Adults, type: integer, range: [1, 9]}
          - {name: income, label: Income amount, type: number, range: [0, 99999]}
          - {name: sets, label: Used, type: multi, selected: 1, unselected: 0,
             options: {bus: Bus, car: Car}, column: "{item}_{option}"}
          - {name: target, type: integer, range: [0, 9]}
""")


@pytest.fixture(scope="module")
def q():
    return loads_questionnaire(Q)


def words(q, rule: str) -> str:
    text = Q.replace("- {name: target, type: integer, range: [0, 9]}",
                     "- {name: target, type: integer, range: [0, 9], asked_if: '" + rule.replace("'", "''") + "'}")
    qq = loads_questionnaire(text)
    return rule_words(qq.item("target").rule, qq)


CASES = [
    ("age < 75", "'Age in years' is under 75"),
    ("age <= 75", "'Age in years' is at most 75"),
    ("age > 15", "'Age in years' is over 15"),
    ("age >= 16", "'Age in years' is at least 16"),
    ("work == 1", "'In paid work' is 'Yes'"),
    ("work != 1", "'In paid work' is not 'Yes'"),                         # work is asked of everyone
    ("16 <= age", "'Age in years' is at least 16"),                       # operands turned round
    ("mode in [1, 2]", "'Way to work' is one of 'Car' or 'Bus'"),
    ("mode in [2]", "'Way to work' is 'Bus'"),
    ("region == \"north\"", "'region' is \"north\""),                     # a context column, no label
    ("kids + adults > 3", "('kids' plus 'Adults') is over 3"),
    ("age * 2 - 1 > 3", "(('Age in years' times 2) minus 1) is over 3"),
    ("-age < -3", "minus 'Age in years' is under -3"),
    ("answered(income)", "'Income amount' was answered"),
    ("not answered(income)", "'Income amount' was not answered"),
    ("has_code(income, \"refused\")", "'Income amount' carries the code 'Refused to say'"),
    ("not has_code(income, \"dont_know\")", "'Income amount' does not carry the code 'dont know'"),
    ("age < 75 and work == 1", "'Age in years' is under 75 and 'In paid work' is 'Yes'"),
    ("age < 18 or age > 64", "'Age in years' is under 18 or 'Age in years' is over 64"),
    ("(age < 18 or age > 64) and work == 2",
     "('Age in years' is under 18 or 'Age in years' is over 64) and 'In paid work' is 'No'"),
    ("not (age < 18 or work == 2)",
     "it is not the case that 'Age in years' is under 18 or 'In paid work' is 'No'"),
    ("sets_bus == 1", "'Used: Bus' was selected"),
    ("sets_car == 0", "'Used: Car' was not selected"),
    ("sets_car != 1", "'Used: Car' was not selected"),
]


@pytest.mark.parametrize("rule,expected", CASES, ids=[c[0] for c in CASES])
def test_every_operator_in_words(q, rule, expected):
    assert words(q, rule) == expected


# Three-valued logic: `mode` has its own routing (asked if work == 1), so it can be skipped.
THREE_VALUED = [
    ("mode != 5", "'Way to work' was asked and is not 'From home'"),
    ("not mode == 5", "'Way to work' is not 'From home' or was not asked"),
    ("mode not in [1, 2]", "'Way to work' was asked and is none of 'Car' or 'Bus'"),
    ("not mode in [1, 2]", "'Way to work' is none of 'Car' or 'Bus' or was not asked"),
]


@pytest.mark.parametrize("rule,expected", THREE_VALUED, ids=[c[0] for c in THREE_VALUED])
def test_three_valued_cases_are_worded_apart(q, rule, expected):
    assert words(q, rule) == expected


def test_wording_matches_what_the_classifier_decides_for_a_skipped_gate():
    # A case with work == 2 skips `mode`: under `mode != 5` the target is out of universe
    # (the comparison is false), under `not mode == 5` it is in universe.  The sentences say so:
    # one requires "was asked", the other admits "or was not asked".
    data = pd.DataFrame({"id": [1], "region": ["n"], "age": [30], "work": [2], "mode": [None], "kids": [0],
                         "adults": [1], "income": [10], "sets_bus": [0], "sets_car": [0], "target": [None]})
    for rule, status, clause in [("mode != 5", "skipped", "was asked and"),
                                 ("not mode == 5", "item_missing", "or was not asked")]:
        text = Q.replace("- {name: target, type: integer, range: [0, 9]}",
                         "- {name: target, type: integer, range: [0, 9], asked_if: '" + rule + "'}")
        qq = loads_questionnaire(text)
        assert classify(data, qq).status.loc[0, "target"] == status
        assert clause in rule_words(qq.item("target").rule, qq)


def test_universe_sentence(q):
    assert universe_words(q.item("age"), q) == "Asked of every case."
    assert universe_words(q.item("mode"), q) == "Asked if 'In paid work' is 'Yes'."


def test_item_report_shows_who_was_asked_in_words(tmp_path):
    import openpyxl

    from skipwise.report import write_item_report

    q = loads_questionnaire(Q)
    data = pd.DataFrame({"id": [1, 2, 3], "region": ["n", "s", "s"], "age": [30, 40, 50], "work": [1, 2, 1],
                         "mode": [1, None, 2], "kids": [0, 1, 2], "adults": [1, 2, 2], "income": [10, -9, 5],
                         "sets_bus": [0, 1, 0], "sets_car": [1, 0, 0], "target": [1, 2, 3]})
    out = write_item_report(data, q, tmp_path / "r.xlsx")
    ws = openpyxl.load_workbook(out)["Items"]
    rows = [[c.value for c in r] for r in ws.iter_rows()]
    header = next(r for r in rows if "Who was asked" in r)
    col, item = header.index("Who was asked"), header.index("Item")
    said = {r[item]: r[col] for r in rows[rows.index(header) + 1:] if r[item]}
    assert said["mode"] == "Asked if 'In paid work' is 'Yes'."
    assert said["age"] == "Asked of every case."
