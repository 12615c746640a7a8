"""Loading and validating questionnaire files (format version 1)."""

from __future__ import annotations

import textwrap

import pytest

from skipwise.errors import ProblemCode, SkipwiseError
from skipwise.questionnaire import CodeKind, ItemType, load_questionnaire, loads_questionnaire
from skipwise.rules import ast


def load(text: str):
    return loads_questionnaire(textwrap.dedent(text), file="q.yaml")


def problems(text: str):
    with pytest.raises(SkipwiseError) as info:
        load(text)
    return info.value.problems


GOOD = """\
format: 1
survey: {name: t, title: Test, case_id: id}
context: [region]
codes:
  - {value: -1, reason: not_asked, kind: structural}
  - {value: -9, reason: refused, kind: nonresponse}
sections:
  - name: hh
    items:
      - {name: hh_size, type: integer, range: [1, 9]}
  - name: people
    roster: {count: hh_size, max: 3}
    items:
      - {name: p_age, type: integer, range: [0, 110]}
      - {name: p_job, type: categorical, values: {1: "Yes", 2: "No"}, asked_if: p_age >= 16}
  - name: work
    asked_if: region != "north"
    items:
      - name: modes
        type: multi
        options: {car: Car, bus: Bus}
      - name: minutes
        type: number
        range: [0, 300]
        asked_if: modes_car == 1
        codes:
          - {value: 997, reason: varies, kind: substantive}
          - {value: -9, reason: declined, kind: nonresponse}
"""


def test_good_file_expands_rosters_and_sets():
    q = load(GOOD)
    assert q.item_names == ("hh_size", "p_age_1", "p_job_1", "p_age_2", "p_job_2", "p_age_3", "p_job_3",
                            "modes", "minutes")
    assert q.item("modes").columns == ("modes_car", "modes_bus")
    assert q.item("modes").type is ItemType.MULTI
    # Roster member 2: own rule on the same member, plus the member condition.
    assert q.item("p_job_2").rule_text == "(hh_size >= 2) and (p_age_2 >= 16)"
    # Section rule inherited and AND-ed with the item's own.
    assert q.item("minutes").rule_text == '(region != "north") and (modes_car == 1)'
    assert {n for n, _ in ast.names(q.item("minutes").rule)} == {"region", "modes_car"}
    # Item-level codes add to the global ones and override by value.
    by_value = {c.value: c for c in q.item("minutes").codes}
    assert by_value[-9].reason == "declined" and by_value[997].kind is CodeKind.SUBSTANTIVE
    assert by_value[-1].reason == "not_asked"
    assert q.nonresponse_reasons == ("refused", "declined")


def test_demo_questionnaire_loads():
    q = load_questionnaire("questionnaires/marrowby-2026.yaml")
    assert len(q.items) == 57 and len(q.columns) == 61
    assert q.item("commute_minutes").rule_text == "(age < 75) and (employed == 1 and commute_mode != 5)"


BROKEN_20 = """\
format: 2
survey: {name: t, case_id: id, titel: x}
context: [region, region]
codes:
  - {value: -9, reason: refused, kind: nonresponse}
  - {value: -8, reason: dont_know, kind: nonrespons}
  - {value: -7, reason: answered, kind: nonresponse}
sections:
  - name: a
    items:
      - {name: q1, type: integer, range: [-10, 10]}
      - {name: q2, type: categorical, values: {1: "Yes", 2: "No"}, asked_if: q1 > 1 and q3 == 1}
      - {name: q3, type: categorical, values: {1: "Yes", 2: "No"}, asked_if: regoin == "x"}
      - {name: q1, type: text}
      - {name: q4, type: strin}
      - {name: q5, type: integer, asked_if: q2 = 1}
      - {name: q6, type: integer, lable: Six}
      - {name: q7, type: integer, asked_if: 'has_code(q2, "refusd")'}
      - {name: q8, type: categorical, values: {1: A, 2: B}, asked_if: q2 == "yes"}
      - {name: q9, type: integer, asked_if: q2 == 3}
      - {name: q10, type: categorical, values: {1: A, -9: B}}
      - {name: q11, type: integer, range: [5, 1]}
      - {name: q12, type: integer, asked_if: 1 < q1 < 5}
      - {name: q13, type: categorical}
      - {name: q14, type: integer, asked_if: q1 >= 1 and}
  - name: a
    items:
      - {name: q15, type: integer, asked_if: id == 3}
"""


def test_twenty_faults_reported_in_one_run_each_with_its_line():
    found = problems(BROKEN_20)
    got = sorted((p.line, p.code) for p in found)
    expected = sorted([
        (1, ProblemCode.FORMAT_VERSION),
        (2, ProblemCode.UNKNOWN_KEY),            # titel
        (3, ProblemCode.DUPLICATE_NAME),         # context listed twice
        (6, ProblemCode.BAD_VALUE),              # kind nonrespons
        (7, ProblemCode.BAD_VALUE),              # reason is a status name
        (11, ProblemCode.CODE_COLLISION),        # global -9 inside q1's range
        (12, ProblemCode.FORWARD_REFERENCE),     # q3 asked later
        (13, ProblemCode.UNKNOWN_NAME),          # regoin
        (14, ProblemCode.DUPLICATE_NAME),        # q1 twice
        (15, ProblemCode.BAD_VALUE),             # type strin
        (16, ProblemCode.RULE_SYNTAX),           # q2 = 1
        (17, ProblemCode.UNKNOWN_KEY),           # lable
        (18, ProblemCode.UNKNOWN_NAME),          # reason refusd
        (19, ProblemCode.TYPE_CLASH),            # categorical vs text
        (20, ProblemCode.BAD_VALUE),             # no category 3
        (21, ProblemCode.CODE_COLLISION),        # -9 is a category of q10
        (22, ProblemCode.BAD_VALUE),             # range lowest first
        (23, ProblemCode.RULE_SYNTAX),           # chained comparison
        (24, ProblemCode.MISSING_KEY),           # categorical without values
        (25, ProblemCode.RULE_SYNTAX),           # rule ends too early
        (26, ProblemCode.DUPLICATE_NAME),        # section a twice
        (28, ProblemCode.UNKNOWN_NAME),          # the case id is not a rule input
    ])
    assert got == expected
    assert len(found) >= 20
    assert all(p.file == "q.yaml" and p.line for p in found)


@pytest.mark.parametrize("text,code,hint", [
    ("regoin == 1", ProblemCode.UNKNOWN_NAME, "did you mean 'region'?"),
    ("q1 = 1", ProblemCode.RULE_SYNTAX, "use == for equality"),
], ids=["nearest-name", "equals-sign"])
def test_hints(text, code, hint):
    found = problems(f"""\
        format: 1
        survey: {{name: t, case_id: id}}
        context: [region]
        sections:
          - name: s
            items:
              - {{name: q1, type: integer}}
              - {{name: q2, type: integer, asked_if: '{text}'}}
        """)
    assert [(p.code, p.hint) for p in found] == [(code, hint)]


def test_rule_error_gives_file_column():
    found = problems("""\
        format: 1
        survey: {name: t, case_id: id}
        sections:
          - name: s
            items:
              - name: q1
                type: integer
              - name: q2
                type: integer
                asked_if: q1 >= 1 and and q1 < 3
        """)
    [p] = found
    assert p.code is ProblemCode.RULE_SYNTAX and p.line == 10
    # 'asked_if: ' starts at column 9; the second 'and' is rule column 13.
    assert p.column == 19 + 13 - 1


def test_yaml_syntax_error_has_line():
    found = problems("format: 1\nsurvey: {name: t\nsections: []\n")
    assert found[0].code is ProblemCode.YAML_SYNTAX and found[0].line is not None


def test_missing_file_is_a_user_error(tmp_path):
    with pytest.raises(SkipwiseError) as info:
        load_questionnaire(tmp_path / "nope.yaml")
    assert info.value.codes == [ProblemCode.FILE_NOT_FOUND]


def test_unquoted_yes_no_category_keys_stay_text():
    # YAML 1.2 core schema (yaml.org/spec/1.2.2, section 10.3.2): yes/no are not booleans.
    q = load("""\
        format: 1
        survey: {name: t, case_id: id}
        sections:
          - name: s
            items:
              - {name: q1, type: categorical, values: {yes: Yes, no: No}}
        """)
    assert dict(q.item("q1").values) == {"yes": "Yes", "no": "No"}
