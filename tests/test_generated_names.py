"""The generated-name guard (skipwise.generated) and where it is used.

The rule checked is docs/contract.md §5: every generated column name is checked against the
data's columns and against each other before anything is written.  Case folding follows the
SPSS rule that variable names are not case sensitive (IBM SPSS Statistics documentation,
"Variable names" [memory]).
"""

from __future__ import annotations

import pandas as pd
import pytest

from skipwise.errors import ProblemCode, SkipwiseError
from skipwise.generated import Generated, check_generated, generated_problems


def test_clash_with_the_data_names_the_role_and_the_setting():
    with pytest.raises(SkipwiseError) as info:
        check_generated([Generated(name="age", role="imputation column", file="p.yaml", line=4,
                                   hint="set output.imputation_column")], ["id", "age"])
    (p,) = info.value.problems
    assert p.code is ProblemCode.DUPLICATE_NAME and (p.file, p.line, p.item) == ("p.yaml", 4, "age")
    assert "'age' (the imputation column) would replace the data's own column" in p.message
    assert p.hint == "set output.imputation_column"


def test_generated_names_clashing_with_each_other_and_all_problems_at_once():
    found = generated_problems([("x_imp", "imputation flag of 'x'"), ("x_imp", "status column of 'x_imp'"),
                                ("id", "weight column"), ("", "imputation column")], ["id"])
    assert [p.code for p in found] == [ProblemCode.DUPLICATE_NAME, ProblemCode.DUPLICATE_NAME,
                                       ProblemCode.BAD_VALUE]
    assert "'x_imp' would name both the imputation flag of 'x' and the status column of 'x_imp'" in found[0].message


def test_names_compare_as_text_and_optionally_ignoring_case():
    assert generated_problems([("1", "weight column")], [1])  # an Excel header read as the number 1
    assert not generated_problems([("WT_final", "weight column")], ["wt_final"])
    found = generated_problems([("WT_final", "weight column")], ["wt_final"], fold_case=True)
    assert found and "the same name ignoring case" in found[0].message


def test_status_export_refuses_before_writing(tmp_path):
    from skipwise.classify import classify
    from skipwise.classify.export import with_status_columns
    from skipwise.questionnaire import loads_questionnaire

    q = loads_questionnaire("format: 1\nsurvey: {name: t, case_id: id}\nsections:\n  - name: s\n    items:\n"
                            "      - {name: a, type: integer}\n      - {name: b, type: integer}\n")
    data = pd.DataFrame({"id": [1, 2], "a": [1, 2], "b": [3, None], "a_status": [0, 0], "b_status": [0, 0]})
    with pytest.raises(SkipwiseError) as info:
        with_status_columns(data, classify(data, q))
    assert [p.item for p in info.value.problems] == ["a_status", "b_status"]


def test_weigh_refuses_a_prefix_that_replaces_data_columns_before_any_work():
    from skipwise.weighting.plan import load_plan
    from skipwise.weighting.weigh import planned_weight_columns, weigh

    plan = load_plan(text="format: 1\ndispositions: {column: disp, categories: {I: [1], NC: [2]}}\n"
                          "base: {weight: w}\nreplicates: {method: jackknife, psu: psu}\noutput: {prefix: x_}\n")
    frame = pd.DataFrame({"disp": [1, 2], "w": [1.0, 1.0], "psu": [1, 2], "x_final": [0, 0], "x_rep07": [0, 0]})
    names = [g.name for g in planned_weight_columns(plan, frame.columns)]
    assert names[:2] == ["x_outcome", "x_base"] and "x_rep07" in names
    with pytest.raises(SkipwiseError) as info:
        weigh(frame, plan)
    assert sorted(p.item for p in info.value.problems) == ["x_final", "x_rep07"]
    assert all(p.line == 5 for p in info.value.problems)
