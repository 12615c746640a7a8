"""Stata ``.dta`` writing: labels, extended missing values (.a-.z), date formats."""

from __future__ import annotations

import re
from pathlib import Path

import pandas as pd

from skipwise.errors import SkipwiseError
from skipwise.io.dta_labels import name_label_sets, replace_value_labels
from skipwise.io.meta import SurveyMeta, normalize_value
from skipwise.io.writers_common import (
    EXT_LETTER, Job, check_names, note, prepare_columns, problem, split_numbers, stata_letter,
)

__all__ = ["prepare_dta"]

_STATA_NUM_FORMAT = re.compile(r"%-?\d+\.\d+[gfe]c?")
# Stata value labels must be integers in this range [memory: Stata manual, "label"].
_STATA_LABEL_MIN, _STATA_LABEL_MAX = -2_147_483_647, 2_147_483_620


def prepare_dta(df: pd.DataFrame, meta: SurveyMeta, path: Path, fmt: str) -> Job:
    import pyreadstat

    problems = check_names(df, path, fmt)
    p = prepare_columns(df, meta, path, problems, ext_missing_ok=True)
    labels: dict[str, dict] = {}
    for col, vl in meta.value_labels.items():
        kind = p.kinds.get(col)
        if kind not in ("number", "extmiss"):
            problems.append(problem(path, f"Stata value labels need a numeric column, not a {kind} column",
                                    item=col, hint="recode the text into numeric codes, or drop its labels"))
            continue
        out: dict = {}
        for k, lab in vl.items():
            k = normalize_value(k)
            if isinstance(k, str) and EXT_LETTER.fullmatch(k):
                letter = stata_letter(k, col, path, problems)
                if letter is not None:
                    out[letter] = lab
            elif isinstance(k, int) and not isinstance(k, bool) and _STATA_LABEL_MIN <= k <= _STATA_LABEL_MAX:
                out[k] = lab
            else:
                problems.append(problem(path, f"value label key {k!r} cannot be stored in Stata "
                                              "(keys must be whole numbers or .a-.z)", item=col,
                                        hint="recode the value to a whole number, or drop its label"))
        labels[col] = out
    user: dict[str, list[str]] = {}
    for col, kind in p.kinds.items():
        declared = meta.missing_values.get(col, [])
        letters = {stata_letter(v, col, path, problems) for v in declared
                   if isinstance(v, str) and EXT_LETTER.fullmatch(v)} - {None}
        others = [v for v in declared if not (isinstance(v, str) and EXT_LETTER.fullmatch(v))]
        if others or meta.missing_ranges.get(col):
            note("Stata has no user-missing declaration for ordinary values: the SPSS missing codes stay "
                 "plain values (their value labels are kept)", col)
        letters |= p.letters.get(col, set())
        if letters and kind == "text":
            problems.append(problem(path, "extended missing letters cannot be declared on a text column",
                                    item=col, hint="drop them from the metadata"))
        elif letters:
            user[col] = sorted(letters)
    formats = {c: f for c, f in p.stata_formats.items()}
    for col, kind in p.kinds.items():
        f = meta.formats.get(col, "")
        if kind == "number" and _STATA_NUM_FORMAT.fullmatch(f):
            formats[col] = f
    if problems:
        raise SkipwiseError(problems)

    frame = _numbers_first(p.frame, [c for c, k in p.kinds.items() if k == "extmiss"])
    cell_user, cell_labels = _cell_declarations(labels, user, p.letters)
    column_labels = {c: lab for c, lab in meta.column_labels.items() if lab}

    def job(tmp: Path) -> None:
        pyreadstat.write_dta(
            frame, str(tmp), file_label=meta.file_label or "", column_labels=column_labels,
            variable_value_labels=cell_labels or None, missing_user_values=cell_user or None,
            variable_format=formats or None,
        )
        if cell_labels != labels:  # the label tables with every letter, from a file without rows
            tables = tmp.with_name(tmp.name + ".labels")
            try:
                named = [c for c in frame.columns if labels.get(c)]
                pyreadstat.write_dta(pd.DataFrame({c: pd.Series([], dtype="float64") for c in named}),
                                     str(tables), variable_value_labels={c: labels[c] for c in named},
                                     missing_user_values={c: user[c] for c in named if c in user} or None)
                if not replace_value_labels(tmp, tables):
                    raise ValueError("the label tables could not be placed in the .dta file")
            finally:
                tables.unlink(missing_ok=True)
        name_label_sets(tmp)  # label sets named after their variable, not 'tenure5'
    return job


def _cell_declarations(labels: dict[str, dict], user: dict[str, list[str]], held: dict[str, set[str]]
                       ) -> tuple[dict[str, list[str]], dict[str, dict]]:
    """The missing letters to declare to pyreadstat for writing the cells, and the labels that go with them.

    A .dta file holds no declaration of missing letters: a cell is an extended missing value by
    its stored number alone [memory: Stata manual, "missing values"; "dta" file format, section
    on missing values], so the declaration only tells pyreadstat which cells to write as letters
    and which label keys are letters.  pyreadstat compares every number of a column with each
    letter declared on it, so the cells are written declaring only the letters the column holds
    (``held``), with the labels of those letters and of the numbers; the full label tables (every
    letter labelled) are then taken from a file without rows written with all of them declared,
    which gives the same tables.  A column whose labels would be left empty keeps one labelled
    letter, so the same columns carry a label set (and the sets keep pyreadstat's names).
    """
    cell_user: dict[str, list[str]] = {}
    cell_labels: dict[str, dict] = {}
    for col, letters in user.items():
        kept = set(held.get(col, set())) & set(letters)
        vl = labels.get(col)
        if vl:
            shown = {k: lab for k, lab in vl.items() if not isinstance(k, str) or k in kept}
            if not shown:
                first = next(k for k in vl if isinstance(k, str))
                kept.add(first)
                shown = {first: vl[first]}
            cell_labels[col] = shown
        if kept:
            cell_user[col] = sorted(kept)
    for col, vl in labels.items():
        if col not in user:
            cell_labels[col] = vl
    return cell_user, cell_labels


def _numbers_first(frame: pd.DataFrame, columns: list[str]) -> pd.DataFrame:
    """Keep numeric columns of extended missing letters numeric for pyreadstat.

    pyreadstat's dataframe layer judges an object column's type by its first 100 values: a
    numeric column whose first 100 stored values are all letters (an item rarely asked, recoded
    by status) would be taken for text. As a categorical whose numeric categories come first it
    is judged by those, and its cells are written unchanged.
    """
    out = frame
    for col in columns:
        s = frame[col]
        if isinstance(s.dtype, pd.CategoricalDtype):
            continue  # numbers and letters as categories: the numbers come first already
        first = s.iloc[:100]  # the head decides; most columns are settled without reading the rest
        if not split_numbers(first)[1][first.notna().to_numpy()].all():
            continue
        present = s.notna().to_numpy()
        is_letter = split_numbers(s)[1]  # letters are no numbers (each distinct value tested once)
        if is_letter[present].all():
            continue
        numbers = pd.unique(s[present & ~is_letter])
        letters = pd.unique(s[is_letter])
        if out is frame:
            out = frame.copy()
        out[col] = pd.Categorical(s, categories=[*numbers, *letters])
    return out
