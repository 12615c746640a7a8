"""The generated-name guard for a run: every column the package's data files will add.

Called right after the data are read, before any step writes a file: each data file of the
package is checked on its own (the final data with status and weight columns, the recoded
data with the status columns of its text and date items, the completed data with flags, the
imputation number and weights, the weighting file with its weights).
"""

from __future__ import annotations

from typing import Any

from skipwise.errors import SkipwiseError
from skipwise.generated import Generated, generated_problems

__all__ = ["check_run_columns"]

_CASE_FOLDING = ("sav", "zsav")  # SPSS variable names ignore case


def check_run_columns(st: Any) -> None:
    """Raise one error listing every generated column name that clashes (see :mod:`skipwise.generated`)."""
    from skipwise.classify.export import status_columns
    from skipwise.questionnaire.model import ItemType
    from skipwise.weighting.weigh import planned_weight_columns

    plan, q, data = st.plan, st.q, st.data
    fold = any(f in _CASE_FOLDING for f in (*plan.formats("status_columns"), *plan.formats("recoded"),
                                             plan.input_format()))
    weights: list[Generated] = []
    if st.weighting_plan is not None:
        weights = planned_weight_columns(st.weighting_plan, data.columns)
    problems = []
    if plan.formats("status_columns"):
        problems += generated_problems(status_columns(q.item_names) + weights, data.columns, fold_case=fold)
    if plan.formats("recoded"):
        text_items = [it.name for it in q.items if it.type in (ItemType.TEXT, ItemType.DATE)]
        problems += generated_problems(status_columns(text_items) + weights, data.columns, fold_case=fold)
    if st.imputation_plan is not None and weights:
        spec, out = st.imputation_plan.spec, st.imputation_plan.output
        flags = [Generated(name=f"{t}{out.flag_suffix}", role=f"imputation flag of '{t}'",
                           file=st.imputation_plan.file, line=st.imputation_plan.line("output", "flag_suffix"),
                           hint="set output.flag_suffix in the imputation plan to another suffix")
                 for t in spec.targets(q)]
        if out.form == "stacked":
            flags.append(Generated(name=out.imputation_column, role="imputation column",
                                   file=st.imputation_plan.file,
                                   line=st.imputation_plan.line("output", "imputation_column")))
        problems += generated_problems(flags + weights, data.columns, fold_case=fold)
    if st.weighting_data is not None and st.weighting_plan is not None:
        problems += generated_problems(planned_weight_columns(st.weighting_plan, st.weighting_data.columns),
                                       st.weighting_data.columns, what="the weighting file", fold_case=fold)
    unique = list({(p.message, p.file, p.line): p for p in problems}.values())
    if unique:
        raise SkipwiseError(unique, headline=f"{len(unique)} generated column name(s) clash (nothing was written)")
