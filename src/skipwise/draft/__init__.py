"""A questionnaire draft from a data file's own metadata and values.

A survey export already knows a good part of its questionnaire: variable labels, value labels,
SPSS user-missing definitions, Stata extended missing values; a plain file (CSV, Parquet,
Excel) at least knows its values.  :func:`draft_questionnaire` turns them into a :class:`Draft`,
and :func:`render_draft` writes it as questionnaire YAML (format version 1) with a comment on
every guess, so the user can review it line by line:

- one item per column, in file order, labelled with the variable label; a label longer than 60
  characters is also proposed as the item's ``text:`` (the question wording), marked for checking;
- the type from value labels, a pandas categorical's categories, few distinct values, or the
  column's storage (:mod:`skipwise.draft.columns` says in which order);
- special codes from SPSS missing values (discrete, and the values of a missing range that
  occur or carry a label), Stata extended missing values, value labels and stored texts that
  read like don't-know, refusal, no answer or not applicable (:mod:`skipwise.draft.guess`);
  every kind is a guess and is marked ``# guessed: confirm kind``;
- codes that most items share (same value, reason and kind) are lifted to the global
  ``codes:`` list when that collides with no item's categories or range;
- ranges from the value labels when there are any, else the observed minimum and maximum of
  the non-code values, marked ``# observed, confirm``;
- routing is left to the user (``# asked_if: add the routing condition``).

The rendered text always loads with :func:`skipwise.questionnaire.load_questionnaire`
(:func:`write_draft` checks it).

Modules: ``model`` (the dataclasses and comment texts), ``guess`` (code wordings), ``columns``
(one column as one item), ``build`` (case id, global codes, the whole draft), ``render`` (YAML).
"""

from __future__ import annotations

from skipwise.draft.build import draft_questionnaire, lift_codes
from skipwise.draft.columns import FEW_VALUES, REPEATS
from skipwise.draft.guess import CODE_PATTERNS, guess_code, guess_data_code
from skipwise.draft.model import Draft, DraftCode, DraftItem
from skipwise.draft.render import render_draft, scalar, write_draft


__all__ = ["DraftCode", "DraftItem", "Draft", "draft_questionnaire", "render_draft", "write_draft",
           "guess_code", "guess_data_code", "scalar", "lift_codes", "CODE_PATTERNS", "FEW_VALUES", "REPEATS"]
