"""One YAML rule for every definition file: core-schema scalars, texts as written, bounds.

Outside reference: YAML 1.2.2 specification (yaml.org/spec/1.2.2), section 10.3.2 "Tag
Resolution" of the core schema: booleans are only true/True/TRUE/false/False/FALSE, null is
null/Null/NULL/~/empty, integers are decimal, 0o octal or 0x hexadecimal; everything else
plain is a string (so yes/no/on/off, 2024-01-01, 1_000 and 1:20 are strings).
"""

from __future__ import annotations

import textwrap

import pytest

from skipwise.errors import ProblemCode, SkipwiseError
from skipwise.impute.plan import load_plan as load_impute_plan
from skipwise.questionnaire import loads_questionnaire
from skipwise.questionnaire.templates import expand, template_problem
from skipwise.questionnaire.yamlread import MAX_ALIAS_NODES, MAX_CHARS, load_yaml_text, read_text_file


def problems(text: str) -> list:
    with pytest.raises(SkipwiseError) as info:
        loads_questionnaire(textwrap.dedent(text), file="q.yaml")
    return info.value.problems


# -- core schema (YAML 1.2.2, 10.3.2) ------------------------------------------------------------
@pytest.mark.parametrize("text, value", [
    ("true", True), ("False", False), ("TRUE", True),
    ("yes", "yes"), ("No", "No"), ("on", "on"), ("OFF", "OFF"), ("y", "y"),
    ("null", None), ("~", None), ("", None),
    ("012", 12),            # decimal in 1.2 (YAML 1.1 read it as octal 10)
    ("0o17", 15), ("0x1F", 31), ("-5", -5),
    ("1.5", 1.5), ("1e3", 1000.0), (".inf", float("inf")), ("-.Inf", float("-inf")),
    ("2024-01-01", "2024-01-01"), ("1_000", "1_000"), ("1:20", "1:20"),
])
def test_plain_scalars_follow_the_core_schema(text, value):
    assert load_yaml_text(f"k: {text}\n")["k"] == value


def test_scalars_keep_their_source_text():
    d = load_yaml_text("a: 2024\nb: 1.50\nc: true\nd: 0x1F\ne: 'quoted'\n")
    assert [d.text(k) for k in "abcde"] == ["2024", "1.50", "true", "0x1F", "quoted"]


def test_labels_are_the_text_written():
    q = loads_questionnaire(textwrap.dedent("""\
        format: 1
        survey: {name: t, title: 2024, case_id: id}
        codes: [{value: -9, reason: refused, kind: nonresponse, label: No}]
        sections:
          - name: s
            label: on
            items:
              - {name: q1, type: categorical, label: 1.50, values: {1: Yes, 2: No, 3: off, 4: 2024, 5: ~}}
              - {name: q2, type: multi, label: Yes, options: {a: on, b: 1.0}}
        """))
    assert q.title == "2024" and q.sections[0].label == "on" and q.codes[0].label == "No"
    assert q.item("q1").label == "1.50"
    assert dict(q.item("q1").values) == {1: "Yes", 2: "No", 3: "off", 4: "2024", 5: ""}
    assert q.item("q2").label == "Yes" and q.item("q2").options == (("a", "on"), ("b", "1.0"))


def test_lists_and_mappings_where_a_text_belongs_are_refused_with_their_lines():
    found = problems("""\
        format: 1
        survey: {name: t, title: [a, b], case_id: id}
        sections:
          - name: s
            items:
              - {name: q1, type: categorical, label: {x: 1}, values: {1: [a]}}
        """)
    assert [(p.code, p.line) for p in found] == [(ProblemCode.BAD_VALUE, 2), (ProblemCode.BAD_VALUE, 6),
                                                 (ProblemCode.BAD_VALUE, 6)]
    assert "'title' of the survey must be a text, found a list" in found[0].message
    assert found[1].item == "q1" and "found a mapping" in found[1].message


def test_nan_is_refused_everywhere_with_each_line():
    found = problems("""\
        format: 1
        survey: {name: t, case_id: id}
        codes: [{value: .nan, reason: refused, kind: nonresponse}]
        sections:
          - name: s
            items:
              - {name: q1, type: integer, range: [.NaN, 99]}
        """)
    assert [(p.code, p.line) for p in found] == [(ProblemCode.BAD_VALUE, 3), (ProblemCode.BAD_VALUE, 7)]
    assert "not a number" in found[0].message


def test_format_true_is_not_format_1():
    found = problems("format: true\nsurvey: {name: t, case_id: id}\nsections: []\n")
    assert ProblemCode.FORMAT_VERSION in [p.code for p in found]
    with pytest.raises(SkipwiseError) as info:
        load_impute_plan(text="format: true\n")
    assert info.value.codes == [ProblemCode.FORMAT_VERSION]


# -- bounds ------------------------------------------------------------------------------------------
def alias_bomb(levels: int = 9) -> str:
    lines = ['a0: &a0 ["lol","lol","lol","lol","lol","lol","lol","lol","lol"]']
    for i in range(1, levels):
        lines.append(f"a{i}: &a{i} [" + ",".join([f"*a{i - 1}"] * 9) + "]")
    return "\n".join(lines) + "\n"


def test_alias_bomb_used_as_a_label_is_refused_fast_with_its_line():
    text = "format: 1\nsurvey: {name: t, case_id: id}\n" + alias_bomb() + textwrap.dedent("""\
        sections:
          - name: s
            items:
              - {name: q1, type: integer, label: *a8}
        """)
    assert len(text.encode()) < 1200  # about 1 KB, 387 million strings when expanded
    found = problems(text)  # expanded, it would not fit in memory: refused before expansion
    assert found[0].code is ProblemCode.YAML_SYNTAX and found[0].line is not None
    assert f"aliases repeat more than {MAX_ALIAS_NODES:,} values" in found[0].message


def test_a_few_aliases_for_shared_code_lists_are_fine():
    q = loads_questionnaire(textwrap.dedent("""\
        format: 1
        survey: {name: t, case_id: id}
        sections:
          - name: s
            items:
              - {name: q1, type: integer, codes: &std [{value: -9, reason: refused, kind: nonresponse}]}
              - {name: q2, type: integer, codes: *std}
        """))
    assert q.item("q2").codes[0].reason == "refused"


def test_recursive_alias_and_deep_nesting_are_refused():
    with pytest.raises(SkipwiseError) as info:
        load_yaml_text("a: &x [1, *x]\n", "p.yaml")
    assert info.value.problems[0].line == 1 and "contains it" in info.value.problems[0].message
    with pytest.raises(SkipwiseError) as info:
        load_yaml_text("a: " + "[" * 5000 + "]" * 5000 + "\n", "p.yaml")
    assert info.value.codes == [ProblemCode.YAML_SYNTAX] and "nest deeper" in info.value.problems[0].message


def test_oversized_definition_file_is_refused_before_parsing(tmp_path):
    big = tmp_path / "big.yaml"
    big.write_text("# " + "x" * (MAX_CHARS + 10) + "\n", encoding="utf-8")
    with pytest.raises(SkipwiseError) as info:
        read_text_file(big)
    assert info.value.codes == [ProblemCode.FILE_FORMAT] and "too large" in info.value.problems[0].message


# -- column templates ---------------------------------------------------------------------------------
@pytest.mark.parametrize("pattern, fragment", [
    ("{item.nope}_{option}", "'{item.nope}' is not a placeholder"),
    ("{0}{item}_{option}", "'{0}' is not a placeholder"),
    ("{item.__class__.__mro__}_{option}", "'{item.__class__.__mro__}' is not a placeholder"),
    ("{item:>200000000}_{option}", "'{item:>200000000}' is not a placeholder"),
    ("{item}_{option!r}", "'{option!r}' is not a placeholder"),
    ("{item}_{opt}", "the placeholder {opt} is not known"),
    ("{item}_{option", "'{option' is not a placeholder"),
    ("{item}", "must contain {option}"),
])
def test_multi_column_templates_outside_the_language_are_refused(pattern, fragment):
    found = problems(f"""\
        format: 1
        survey: {{name: t, case_id: id}}
        sections:
          - name: s
            items:
              - name: modes
                type: multi
                column: '{pattern}'
                options: {{car: Car, bus: Bus}}
        """)
    assert len(found) == 1 and found[0].code is ProblemCode.BAD_VALUE, found
    assert found[0].line == 8 and found[0].item == "modes" and found[0].file == "q.yaml"
    assert fragment in found[0].message and "{item}, {option}" in found[0].message


def test_roster_template_refused_with_the_allowed_placeholders():
    found = problems("""\
        format: 1
        survey: {name: t, case_id: id}
        sections:
          - name: hh
            items: [{name: size, type: integer, range: [1, 9]}]
          - name: people
            roster: {count: size, max: 2, column: "{item}_{n:>99999999}"}
            items: [{name: p_age, type: integer}]
        """)
    assert len(found) == 1 and found[0].line == 7
    assert "'{n:>99999999}' is not a placeholder (only {item}, {n} are replaced" in found[0].message


def test_templates_are_substituted_as_plain_text():
    assert expand("{item}_{n}", item="a{n}", n=2) == "a{n}_2"  # a value is never re-read
    assert expand("x_{option}_{item}", item="q", option="{0}") == "x_{0}_q"
    assert template_problem("{item}-{n}", ("item", "n"), ("item", "n")) is None
    assert template_problem(7, ("item", "n")) is not None
