"""From a survey file and its questionnaire to the inputs of :func:`run_diagnostics`.

One place decides which cells are in scope, which columns serve as
auxiliaries and which items enter Little's test, so that the command line and
library users (and the tests) diagnose the same thing.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
import pandas as pd

from skipwise.diagnostics.frame import MissingnessFrame, missingness_frame
from skipwise.diagnostics.report import choose_little_items
from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean

__all__ = ["SurveyInputs", "survey_inputs", "default_auxiliaries", "check_unit_auxiliaries",
           "sensitivity_problem", "CORE_ITEMS", "WELL_ANSWERED", "MAX_LEVELS"]

#: Respondent items used as auxiliaries by default, when the questionnaire has them: the core
#: demographics that item nonresponse most often depends on (common practice, no source).
CORE_ITEMS: tuple[str, ...] = ("age", "sex")
#: A core item serves as a default auxiliary only if at most this share of its in-scope cells is
#: item nonresponse (common practice, no source).
WELL_ANSWERED = 0.02
#: Context columns with 2 to this many values are default auxiliaries (common practice, no source).
MAX_LEVELS = 10


@dataclass(frozen=True, kw_only=True, eq=False)
class SurveyInputs:
    """What :func:`run_diagnostics` needs, built from a classified survey file.

    Attributes
    ----------
    mframe
        In-scope values and indicators of every single-column item.
    aux
        Auxiliaries over every case of the data (item auxiliaries: their answers, NaN elsewhere).
    aux_left_out
        Candidate auxiliaries not used, each with the reason.
    little_items
        Variables of Little's test.
    """

    mframe: MissingnessFrame
    aux: pd.DataFrame
    aux_left_out: tuple[str, ...]
    little_items: tuple[str, ...]


def default_auxiliaries(data: pd.DataFrame, context: Sequence[str], *, mframe: MissingnessFrame | None = None,
                        core_items: Sequence[str] = CORE_ITEMS, max_levels: int = MAX_LEVELS,
                        sampled: MissingnessFrame | None = None) -> tuple[list[str], list[str]]:
    """Default auxiliaries, and the candidates left out (with the reason).

    Context columns are kept when fully observed with 2..``max_levels``
    values, or numeric with fractional values; left out when they have blanks,
    a single value, many whole-number codes (identifiers such as PSU numbers,
    or code lists) or many text values.  The ``core_items`` (respondent's age
    and sex) are added when the questionnaire has them, they are asked of
    every case, their answers vary and at most :data:`WELL_ANSWERED` of their
    in-scope cells are item nonresponse.  ``sampled`` is the frame over every
    sampled case (respondents and unit nonrespondents) when the unit response
    is modelled: a core item then also needs an answer for every sampled case,
    since the unit response model may use only what is known for every case
    (Schouten, Cobben & Bethlehem, 2009), and an interview item is blank for
    every unit nonrespondent.  The cut-offs are common practice, no source;
    ``--aux`` overrides the choice.
    """
    keep, left = [], []
    for col in context:
        s = data[col]
        levels = s.nunique(dropna=True)
        whole = pd.api.types.is_numeric_dtype(s) and bool(np.all(np.mod(s.dropna().to_numpy(float), 1) == 0))
        if s.isna().any():
            left.append(f"{col} (has blanks)")
        elif levels < 2:
            left.append(f"{col} (constant)")
        elif levels <= max_levels or (pd.api.types.is_numeric_dtype(s) and not whole):
            keep.append(col)
        elif whole:
            left.append(f"{col} ({levels} whole-number codes: an identifier or a code list?)")
        else:
            left.append(f"{col} ({levels} text values: too many categories)")
    if mframe is not None:
        c = mframe.counts
        for item in core_items:
            if item not in c.index:
                continue
            rate = float(c.loc[item, "nonresponse_rate"])
            if int(c.loc[item, "out_of_universe"]) > 0:
                left.append(f"{item} (not asked of every case)")
            elif not rate <= WELL_ANSWERED:
                left.append(f"{item} ({rate:.1%} item nonresponse, more than {WELL_ANSWERED:.0%})")
            elif mframe.values[item].nunique() < 2:
                left.append(f"{item} (no varying numeric answers)")
            elif sampled is not None and item in sampled.values.columns and sampled.values[item].isna().any():
                blank = int(sampled.values[item].isna().sum())
                left.append(f"{item} (blank for {blank:,} of {len(sampled.values):,} sampled cases: "
                            "not known for the unit nonrespondents)")
            else:
                keep.append(item)
    return keep, left


def survey_inputs(data: pd.DataFrame, questionnaire, *, classification=None, items: Sequence[str] | None = None,
                  aux: Sequence[str] | None = None, little_items: Sequence[str] | None = None,
                  rows: pd.Series | None = None, exclude: Sequence[str] = (),
                  add_aux: Sequence[str] | None = None) -> SurveyInputs:
    """Classify the data and build the in-scope frame, the auxiliaries and Little's variables.

    Parameters
    ----------
    data
        Survey data, one row per case.
    questionnaire
        The loaded questionnaire.
    classification
        Result of ``skipwise.classify.classify(data, questionnaire)`` (computed if omitted).
    items
        Items to diagnose (default: all); Little's default variables come from these.
    aux
        Auxiliary columns or items (default: :func:`default_auxiliaries`).
    little_items
        Variables of Little's test (default: :func:`~skipwise.diagnostics.report.choose_little_items`
        over the numeric (``integer``/``number``) items).
    rows
        True for the unit respondents, when the data hold every sampled case (default: all
        cases responded).  The auxiliaries then also serve the unit response model, which needs
        them for every sampled case: a named auxiliary blank for a unit nonrespondent is refused.
    add_aux
        Auxiliaries used in addition to the default ones (ignored when ``aux`` is given).
    exclude
        Columns never used as default auxiliaries (case id, weight, response column).
    """
    from skipwise.classify import classify
    from skipwise.classify import statuses as S
    from skipwise.questionnaire import ItemType

    q = questionnaire
    cls = classification if classification is not None else classify(data, q)
    values = pd.DataFrame(np.nan, index=data.index, columns=list(q.item_names))
    av = cls.analysis_values(data)
    for name in q.item_names:
        item = q.item(name)
        if item.type is not ItemType.MULTI and len(item.columns) == 1:
            values[name] = av[item.columns[0]]
    keep = rows if rows is not None else pd.Series(True, index=data.index)
    mf = missingness_frame(values.loc[keep], cls.universe_mask().loc[keep], cls.nonresponse_mask().loc[keep],
                           answered_mask=cls.mask(S.ANSWERED).loc[keep])

    left: list[str] = []
    if aux is None:
        context = [c for c in q.context if c in data.columns and c not in (q.case_id, *exclude)]
        sampled = None
        if rows is not None:
            sampled = missingness_frame(values, cls.universe_mask(), cls.nonresponse_mask(),
                                        answered_mask=cls.mask(S.ANSWERED))
        aux_names, left = default_auxiliaries(data, context, mframe=mf, sampled=sampled)
        aux_names += [a for a in (add_aux or ()) if a not in aux_names]
        left = [x for x in left if x.split(" (")[0] not in aux_names]
    else:
        aux_names = list(aux)
    bad = [Problem(code=ProblemCode.UNKNOWN_NAME, category=Category.USAGE, item=a,
                   message="auxiliary is neither a data column nor an item",
                   hint=did_you_mean(a, [*map(str, data.columns), *q.item_names]))
           for a in aux_names if a not in data.columns and a not in q.item_names]
    if bad:
        raise SkipwiseError(bad)
    if not aux_names:
        raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE,
                                    message="no auxiliary variables to compare respondents with",
                                    hint="name fully observed columns with --aux"))
    # an item auxiliary contributes its analysis values (answers only; NaN for codes and skips)
    aux_frame = pd.DataFrame({a: (values[a] if a in q.item_names else data[a]) for a in aux_names},
                             index=data.index)
    aux_frame = aux_frame.apply(lambda s: s if pd.api.types.is_numeric_dtype(s) else s.astype(str).where(s.notna()))
    if rows is not None:
        _check_unit_auxiliaries(aux_frame, rows)

    if little_items is not None:
        l_items = list(little_items)
    else:
        numeric = [n for n in (items or q.item_names)
                   if q.item(n).type in (ItemType.INTEGER, ItemType.NUMBER) and n in mf.items]
        l_items = choose_little_items(mf, numeric) if numeric else []
    return SurveyInputs(mframe=mf, aux=aux_frame, aux_left_out=tuple(left), little_items=tuple(l_items))


def check_unit_auxiliaries(data: pd.DataFrame, questionnaire, aux: Sequence[str], responded: pd.Series) -> None:
    """Refuse named auxiliaries whose data column is blank for a unit nonrespondent.

    Runs on the data as read, before classification, so that the user hears of it first; the
    same rule is applied to the analysis values in :func:`survey_inputs`.
    """
    cols = {}
    for a in aux:
        if a in data.columns:
            cols[a] = data[a]
        elif a in questionnaire.item_names and len(questionnaire.item(a).columns) == 1:
            col = questionnaire.item(a).columns[0]
            if col in data.columns:
                cols[a] = data[col]
    if not cols:
        return
    frame = pd.DataFrame({a: s.where(~s.astype(str).str.strip().eq("")) if not pd.api.types.is_numeric_dtype(s) else s
                          for a, s in cols.items()}, index=data.index)
    _check_unit_auxiliaries(frame, responded)


def _check_unit_auxiliaries(aux: pd.DataFrame, responded: pd.Series) -> None:
    """Refuse auxiliaries blank for a unit nonrespondent: the unit response model would drop the case.

    A propensity model fitted on respondents only estimates nothing about response
    (Schouten, Cobben & Bethlehem, 2009): every sampled case must enter it.
    """
    nonresp = ~responded.reindex(aux.index).fillna(False).astype(bool)
    n_non = int(nonresp.sum())
    problems = []
    for col in aux.columns:
        blank = int((aux[col].isna() & nonresp).sum())
        if blank:
            problems.append(Problem(
                code=ProblemCode.BAD_DATA, category=Category.USAGE, item=str(col),
                message=(f"auxiliary {col!r} is blank for {blank:,} of {n_non:,} unit nonrespondents: the unit "
                         "response model needs auxiliaries known for every sampled case"),
                hint="name frame columns known for every sampled case (from the sample file), or leave the "
                     "auxiliaries to the default choice"))
    if problems:
        raise SkipwiseError(problems)


def sensitivity_problem(questionnaire, item: str, *, file: str | None = None, line: int | None = None
                        ) -> Problem | None:
    """Refuse a sensitivity item that is not numeric: shifting the mean of category codes means nothing.

    The delta adjustment shifts the nonrespondents' mean of a quantity (Rubin 1987; van Buuren
    2018, *Flexible Imputation of Missing Data*, on delta adjustment [memory]), so it needs an
    ``integer`` or ``number`` item.
    """
    from skipwise.questionnaire import ItemType

    if item not in questionnaire.item_names:
        return None
    kind = questionnaire.item(item).type
    if kind in (ItemType.INTEGER, ItemType.NUMBER):
        return None
    return Problem(code=ProblemCode.TYPE_CLASH, category=Category.USAGE, item=item, file=file, line=line,
                   message=f"the sensitivity analysis shifts a mean, and '{item}' is {kind.value}: its codes "
                           "have no mean",
                   hint="choose an integer or number item (for a category, a 0/1 item of it)")
