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
