"""Imputation plan file: structure, names, line numbers and nearest-name hints."""

import pytest

from skipwise.errors import ProblemCode, SkipwiseError
from skipwise.impute.plan import check_plan, load_plan
from skipwise.questionnaire import loads_questionnaire
from tests.test_impute_skipaware import QUESTIONNAIRE

Q = loads_questionnaire(QUESTIONNAIRE)
COLUMNS = ["id", "region", "age", "employed", "hours", "sat", "wt"]

GOOD = """\
format: 1
imputations: 3
seed: 17
statuses: [dont_know, refused, item_missing]
skip_fill: code
default:
  method: hotdeck
  classes: [region]
  max_donor_use: 4
items:
  hours: {method: pmm, covariates: [age, region], donors: 3}
  sat: multinomial
  employed: {weights: wt}
output:
  form: stacked
  imputation_column: imp_no
"""


def test_good_plan_parses():
    plan = load_plan(text=GOOD)
    check_plan(plan, Q, COLUMNS)
    spec = plan.spec
    assert (spec.m, spec.seed, spec.skip_fill) == (3, 17, "code")
    assert spec.rule_for("hours").method == "pmm" and spec.rule_for("hours").donors == 3
    assert spec.rule_for("hours").classes == ("region",)        # inherited from default
    assert spec.rule_for("sat").method == "multinomial"
    assert spec.rule_for("employed").weights == "wt" and spec.rule_for("age").max_donor_use == 4
    assert plan.output.form == "stacked" and plan.output.imputation_column == "imp_no"


def test_structure_problems_have_lines_and_hints():
    text = "imputation: 3\nseed: -1\ndefault:\n  method: pmn\n  clases: [region]\noutput: {form: pile}\n"
    with pytest.raises(SkipwiseError) as exc:
        load_plan(text=text)
    rows = exc.value.to_rows(["code", "line"])
    assert ("unknown-key", 1) in rows and ("unknown-key", 5) in rows
    assert ("bad-value", 2) in rows and ("bad-value", 4) in rows and ("bad-value", 6) in rows
    msg = str(exc.value)
    assert "did you mean 'imputations'" in msg and "did you mean 'pmm'" in msg and "did you mean 'classes'" in msg


@pytest.mark.parametrize("text,code,line,hint", [
    ("items:\n  hourz: pmm\n", ProblemCode.UNKNOWN_NAME, 2, "hours"),
    ("default: {classes: [regoin]}\n", ProblemCode.UNKNOWN_NAME, 1, "region"),
    ("statuses: [skipped]\n", ProblemCode.BAD_VALUE, 1, None),
    ("statuses: [refusd]\n", ProblemCode.UNKNOWN_NAME, 1, "refused"),
    ("items:\n  sat: regression\n", ProblemCode.TYPE_CLASH, 2, None),
    ("items:\n  sat: logistic\n", ProblemCode.TYPE_CLASH, 2, None),
    ("items:\n  age: multinomial\n", ProblemCode.TYPE_CLASH, 2, None),
], ids=["item", "class", "never-imputed", "status", "regression-categorical", "logistic-3-values",
        "multinomial-integer"])
def test_name_and_type_problems(text, code, line, hint):
    with pytest.raises(SkipwiseError) as exc:
        check_plan(load_plan(text=text), Q, COLUMNS)
    p = exc.value.problems[0]
    assert (p.code, p.line) == (code, line)
    if hint:
        assert hint in (p.hint or "")


def test_method_none_excludes_item():
    plan = load_plan(text="items:\n  sat: none\n")
    assert "sat" not in plan.spec.targets(Q)


@pytest.mark.parametrize("text,line,item", [
    ("seed: 1\nimputations: 2\nseed: 2\n", 3, None),
    ("items:\n  hours: pmm\n  sat: multinomial\n  hours: hotdeck\n", 4, "hours"),
    ("default:\n  method: pmm\n  donors: 3\n  method: hotdeck\n", 4, None),
    ("items:\n  hours: {method: pmm, donors: 3, donors: 4}\n", 2, None),
    ("output:\n  form: files\n  form: stacked\n", 3, None),
], ids=["top-level", "item-block", "default-key", "inline-rule-key", "output-key"])
def test_duplicate_keys_are_reported_with_their_line(text, line, item):
    # YAML loaders keep the last of two equal keys; the plan reader must say so instead.
    with pytest.raises(SkipwiseError) as exc:
        load_plan(text=text)
    dup = [p for p in exc.value.problems if p.code is ProblemCode.DUPLICATE_NAME]
    assert len(dup) == 1
    assert (dup[0].line, dup[0].item) == (line, item)
    assert "twice" in dup[0].message and dup[0].hint == "keep one of them"


def test_duplicate_keys_are_collected_with_other_problems(tmp_path):
    path = tmp_path / "plan.yaml"
    path.write_text("items:\n  hours: pmm\n  hours: pmm\nseed: -3\noutput: {form: pile}\n", encoding="utf-8")
    with pytest.raises(SkipwiseError) as exc:
        load_plan(path)
    rows = exc.value.to_rows(["code", "line", "file"])
    assert ("duplicate-name", 3, str(path)) in rows
    assert ("bad-value", 4, str(path)) in rows and ("bad-value", 5, str(path)) in rows


@pytest.mark.parametrize("kwargs", [{}, {"path": "plan.yaml", "text": "seed: 1\n"}], ids=["neither", "both"])
def test_plan_source_misuse_is_a_user_error(kwargs):
    with pytest.raises(SkipwiseError) as exc:
        load_plan(**kwargs)
    (p,) = exc.value.problems
    assert p.code is ProblemCode.BAD_VALUE and p.category.value == "usage"
    assert p.file == kwargs.get("path") and "exactly one" in p.message and p.hint
