"""A questionnaire draft from a data file's own metadata.

A survey export already knows a good part of its questionnaire: variable
labels, value labels, SPSS user-missing definitions and Stata extended missing
values.  :func:`draft_questionnaire` turns them into a :class:`Draft`, and
:func:`render_draft` writes it as questionnaire YAML (format version 1) with a
comment on every guess, so the user can review it line by line:

- one item per column, in file order, labelled with the variable label; a
  label longer than 60 characters is also proposed as the item's ``text:``
  (the question wording), marked for checking;
- ``categorical`` where value labels cover every observed value that is not a
  special code; else ``integer``/``number`` for numeric columns, ``text`` for
  strings, ``date`` for dates;
- special codes from SPSS missing values (discrete, and the values of a
  missing range that occur or carry a label), Stata extended missing values
  and value labels that read like don't-know, refusal, no answer or not
  applicable; every kind is a guess and is marked ``# guessed: confirm kind``;
- codes that most items share (same value, reason and kind) are lifted to the
  global ``codes:`` list when that collides with no item's categories or range;
- ranges are the observed minimum and maximum of the non-code values (widened to
  cover labelled values), marked ``# observed``;
- routing is left to the user (``# asked_if: add the routing condition``).

The rendered text always loads with
:func:`skipwise.questionnaire.load_questionnaire` (:func:`write_draft` checks it).
"""

from __future__ import annotations

import json
import math
import re
from collections import Counter
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import yaml

from skipwise.classify.cells import column_views
from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean
from skipwise.io.atomic import atomic_output
from skipwise.io.meta import SurveyMeta, get_meta, normalize_value
from skipwise.questionnaire.loader import RESERVED_STATUSES, loads_questionnaire
from skipwise.questionnaire.model import CodeKind, ItemType

__all__ = ["DraftCode", "DraftItem", "Draft", "draft_questionnaire", "render_draft", "write_draft",
           "guess_code"]

Value = int | float | str

#: Label wordings that mark a special code, in the order they are tried (case-insensitive).
#: Common practice in survey exports, no source.
CODE_PATTERNS: tuple[tuple[str, CodeKind, str], ...] = (
    ("dont_know", CodeKind.NONRESPONSE, r"\bdon'?t know\b|\bdo not know\b|\bdk\b|\bnot sure\b"),
    ("refused", CodeKind.NONRESPONSE, r"\brefus|\bdeclined?\b|\bprefer(s|red)? not to\b"),
    ("no_answer", CodeKind.NONRESPONSE, r"\bno answer\b|\bnot answered\b|\bno response\b|\bnot stated\b"),
    ("not_applicable", CodeKind.STRUCTURAL,
     r"\bnot applicable\b|\binapplicable\b|\bn/a\b|\bnot asked\b|\brouted out\b|\bskipped\b"),
)
_COMPILED = tuple((r, k, re.compile(p)) for r, k, p in CODE_PATTERNS)

ROUTING_NOTE = "# asked_if: add the routing condition"
KIND_NOTE = "# guessed: confirm kind"
OBSERVED_NOTE = "# observed: widen to the valid range"
STATA = "Stata extended missing"
SAS = "SAS special missing"
#: A variable label longer than this many characters also becomes the item's ``text:`` (the
#: question wording); shorter ones read as names of the variable (common practice, no source).
TEXT_FROM_LABEL = 60
TEXT_NOTE = "# from the variable label: check it is the wording as asked"


@dataclass(frozen=True, kw_only=True)
class DraftCode:
    """A special code found in the metadata; ``source`` says where (for the comment)."""

    value: Value
    reason: str
    kind: CodeKind
    label: str | None = None
    source: str = "value label"    # or "SPSS missing value", "SPSS missing range", STATA
    reason_guessed: bool = False   # True when the reason is not one of CODE_PATTERNS


@dataclass(frozen=True, kw_only=True)
class DraftItem:
    name: str
    type: ItemType
    label: str = ""
    values: dict[Value, str] | None = None
    range: tuple[Value, Value] | None = None
    codes: tuple[DraftCode, ...] = ()
    notes: tuple[str, ...] = ()


@dataclass(frozen=True, kw_only=True)
class Draft:
    name: str
    title: str
    case_id: str
    case_id_note: str
    codes: tuple[DraftCode, ...] = ()       # lifted to the global list
    shared: tuple[int, ...] = ()            # for each global code, how many items declared it
    items: tuple[DraftItem, ...] = ()       # item-level codes only (global ones removed)
    source: str | None = None


def guess_code(label: str) -> tuple[str, CodeKind] | None:
    """Reason and kind for a value label that reads like a special code, else None.

    >>> guess_code("Don't know / can't say")
    ('dont_know', <CodeKind.NONRESPONSE: 'nonresponse'>)
    """
    text = str(label).lower().replace("\u2019", "'").replace("\u2018", "'")
    for reason, kind, rx in _COMPILED:
        if rx.search(text):
            return reason, kind
    return None


def _reason_from(label: str | None, value: Value) -> str:
    """An identifier usable as a code reason, from a label or the value itself."""
    slug = re.sub(r"[^0-9a-z]+", "_", str(label or "").lower()).strip("_")[:40].strip("_")
    if not slug:
        token = str(value).lstrip(".")
        token = ("m" + token[1:]) if token.startswith("-") else token
        slug = "missing_" + re.sub(r"[^0-9a-z]+", "_", token.lower()).strip("_")
    if slug[0].isdigit():
        slug = "code_" + slug
    if slug in RESERVED_STATUSES:
        slug += "_code"
    return slug


def _make_code(value: Value, label: str | None, source: str) -> DraftCode:
    guess = guess_code(label) if label else None
    if guess:
        return DraftCode(value=value, reason=guess[0], kind=guess[1], label=label, source=source)
    return DraftCode(value=value, reason=_reason_from(label, value), kind=CodeKind.NONRESPONSE, label=label,
                     source=source, reason_guessed=True)


def _hits(value: Value, num: np.ndarray, txt: np.ndarray | None) -> np.ndarray:
    if isinstance(value, str):
        return (txt == value) if txt is not None else np.zeros(len(num), bool)
    return num == float(value)


def _column_codes(col: str, num: np.ndarray, txt: np.ndarray | None, blank: np.ndarray,
                  labels: dict[Value, str], meta: SurveyMeta) -> tuple[list[DraftCode], list[str]]:
    codes: dict[Value, DraftCode] = {}
    notes: list[str] = []
    src = {"dta": STATA, "sas7bdat": SAS, "xpt": SAS}.get(meta.source_format or "", "SPSS missing value")
    for v in meta.missing_values.get(col, []):
        v = normalize_value(v)
        codes.setdefault(v, _make_code(v, labels.get(v), src))
    for lo, hi in meta.missing_ranges.get(col, []):
        seen = np.unique(num[~blank & (num >= lo) & (num <= hi)])
        inside = {normalize_value(x) for x in seen} | {k for k in labels
                                                         if not isinstance(k, str) and lo <= k <= hi}
        for v in sorted(inside):
            codes.setdefault(v, _make_code(v, labels.get(v), "SPSS missing range"))
        notes.append(f"# SPSS missing range [{normalize_value(lo)}, {normalize_value(hi)}]: "
                     "only values seen or labelled became codes")
    for v, lab in labels.items():
        if v not in codes and guess_code(lab):
            codes[v] = _make_code(v, lab, "value label")
    return list(codes.values()), notes


def _draft_item(col: str, s: pd.Series, meta: SurveyMeta) -> DraftItem:
    num, txt, blank = column_views(s)
    labels = {normalize_value(k): str(v) for k, v in meta.value_labels.get(col, {}).items()}
    codes, notes = _column_codes(col, num, txt, blank, labels, meta)
    coded = np.zeros(len(num), bool)
    for c in codes:
        coded |= _hits(c.value, num, txt)
    rest = ~blank & ~coded
    code_values = {c.value for c in codes}
    cats = {k: v for k, v in labels.items() if k not in code_values}
    label = meta.column_labels.get(col, "")
    common = dict(name=col, label=label, codes=tuple(codes))
    if pd.api.types.is_datetime64_any_dtype(s.dtype):
        rng = None
        if rest.any():
            seen = s[rest]
            rng = (seen.min().date().isoformat(), seen.max().date().isoformat())
        return DraftItem(type=ItemType.DATE, range=rng, notes=tuple(notes), **common)
    if rest.any():
        numeric = not np.isnan(num[rest]).any()
    else:  # only blanks and codes: numeric unless the labels or codes are text
        numeric = txt is None or any(not isinstance(c.value, str) or c.source in (STATA, SAS) for c in codes) or (
            bool(cats) and not any(isinstance(k, str) for k in cats))
    if numeric and all(not isinstance(k, str) for k in cats):
        seen = num[rest]
        if cats and np.isin(seen, np.array([float(k) for k in cats])).all():
            return DraftItem(type=ItemType.CATEGORICAL, values=dict(sorted(cats.items())), notes=tuple(notes),
                             **common)
        whole = bool(np.all(np.floor(seen) == seen)) and all(float(k).is_integer() for k in cats)
        itype = ItemType.INTEGER if whole else ItemType.NUMBER
        finite = seen[np.isfinite(seen)]
        bounds = ([float(finite.min()), float(finite.max())] if finite.size else []) + [float(k) for k in cats]
        rng = (normalize_value(min(bounds)), normalize_value(max(bounds))) if bounds else None
        if rng is not None:
            inside = [c for c in codes if not isinstance(c.value, str) and rng[0] <= c.value <= rng[1]]
            if inside:
                notes.append(f"# range: left out, code {_num_text(inside[0].value)} lies among the observed values")
                rng = None
        elif not rest.any():
            notes.append("# no values observed: check the type")
        values = None
        if cats and itype is ItemType.INTEGER:
            values = dict(sorted(cats.items()))
            notes.append("# values: labels only, they do not cover every observed value")
        elif cats:
            notes.append("# value labels not kept (non-whole values): " + "; ".join(
                f"{_num_text(k)} = {v}" for k, v in sorted(cats.items()))[:300])
        return DraftItem(type=itype, values=values, range=rng, notes=tuple(notes), **common)
    seen_txt = set(np.unique(txt[rest])) if txt is not None else set()
    str_cats = {str(k).strip(): v for k, v in cats.items()}
    if str_cats and seen_txt <= set(str_cats):
        return DraftItem(type=ItemType.CATEGORICAL, values=dict(sorted(str_cats.items())), notes=tuple(notes),
                         **common)
    if cats:
        notes.append("# value labels not kept: not every stored value is labelled")
    return DraftItem(type=ItemType.TEXT, notes=tuple(notes), **common)


def _pick_case_id(data: pd.DataFrame, case_id: str | None) -> tuple[str, str]:
    cols = [str(c) for c in data.columns]
    if case_id is not None:
        if case_id not in cols:
            raise SkipwiseError(Problem(
                code=ProblemCode.MISSING_COLUMN, category=Category.USAGE, item=case_id,
                message=f"case id column '{case_id}' is not in the data",
                hint=did_you_mean(case_id, cols) or "name one of the data's columns"))
        _, _, blank = column_views(data[case_id])
        unique = bool(data[case_id].is_unique) and not blank.any()
        return case_id, "" if unique else "# note: values are not all unique and filled: check"
    for col in data.columns:
        _, _, blank = column_views(data[col])
        if not blank.any() and data[col].is_unique:
            return str(col), "# first column whose values are all unique and filled: confirm"
    raise SkipwiseError(Problem(
        code=ProblemCode.BAD_DATA, category=Category.DATA,
        message="no column has unique, filled values to serve as the case id",
        hint="name the case id column with --case-id (then run 'skipwise check' to see its duplicates)"))


def _key(c: DraftCode) -> tuple:
    return (c.value if isinstance(c.value, str) else float(c.value), c.reason, c.kind)


def _collides(c: DraftCode, it: DraftItem) -> bool:
    if it.values is not None and any(_key_eq(c.value, k) for k in it.values):
        return True
    if it.range is not None and it.type in (ItemType.INTEGER, ItemType.NUMBER) and not isinstance(c.value, str):
        return it.range[0] <= c.value <= it.range[1]
    return False


def _key_eq(a: Value, b: Value) -> bool:
    if isinstance(a, str) or isinstance(b, str):
        return a == b
    return float(a) == float(b)


def _lift(items: list[DraftItem]) -> tuple[list[DraftCode], list[int], list[DraftItem]]:
    """Move codes shared by more than half of the items to the global list."""
    per_value: dict[object, Counter] = {}
    example: dict[tuple, DraftCode] = {}
    for it in items:
        for c in it.codes:
            k = _key(c)
            per_value.setdefault(k[0], Counter())[k] += 1
            example.setdefault(k, c)
    lifted, shared = [], []
    for counter in per_value.values():
        k, n = counter.most_common(1)[0]
        code = example[k]
        if len(items) >= 2 and n * 2 > len(items) and not any(
                _collides(code, it) for it in items if all(_key(c) != k for c in it.codes)):
            labels = Counter(c.label for it in items for c in it.codes if _key(c) == k and c.label)
            label = labels.most_common(1)[0][0] if labels else None
            lifted.append(DraftCode(value=code.value, reason=code.reason, kind=code.kind, label=label,
                                    source=code.source, reason_guessed=code.reason_guessed))
            shared.append(n)
    keys = {_key(c) for c in lifted}
    kept = [DraftItem(name=it.name, type=it.type, label=it.label, values=it.values, range=it.range,
                      codes=tuple(c for c in it.codes if _key(c) not in keys), notes=it.notes) for it in items]
    order = sorted(range(len(lifted)), key=lambda i: (isinstance(lifted[i].value, str), _key(lifted[i])[0]))
    return [lifted[i] for i in order], [shared[i] for i in order], kept


def draft_questionnaire(data: pd.DataFrame, meta: SurveyMeta | None = None, *, case_id: str | None = None,
                        name: str = "draft", title: str | None = None, source: str | None = None) -> Draft:
    """Draft a questionnaire from a data frame and its metadata.

    Parameters
    ----------
    data
        The survey data as :func:`skipwise.io.read_survey` returns it (codes as stored).
    meta
        Labels and missing-value definitions; default ``get_meta(data)``.
    case_id
        The case id column; default the first column whose values are unique and filled.
    name, title
        The survey's short id and title (title default: the file label, else ``name``).
    source
        The data file's name, for the header comment.

    Returns
    -------
    Draft

    Raises
    ------
    SkipwiseError
        MISSING_COLUMN if ``case_id`` is not a column; BAD_DATA if no column can serve.
    """
    meta = get_meta(data) if meta is None else meta
    cid, note = _pick_case_id(data, case_id)
    items = [_draft_item(str(col), data[col], meta) for col in data.columns if str(col) != cid]
    codes, shared, items = _lift(items)
    return Draft(name=name, title=title or meta.file_label or name, case_id=cid, case_id_note=note,
                 codes=tuple(codes), shared=tuple(shared), items=tuple(items), source=source)


# -- YAML text ----------------------------------------------------------------------------------
_PLAIN = re.compile(r"[A-Za-z_][A-Za-z0-9_ .,()/'&+-]*")
# Characters PyYAML refuses in a stream, plus those it reads as line breaks or a byte-order mark.
_UNSAFE = re.compile(f"{yaml.reader.Reader.NON_PRINTABLE.pattern}|[\x85\u2028\u2029\ufeff]")
_YAML_WORDS = {"y", "n", "yes", "no", "on", "off", "true", "false", "null", "~"}


def _quote(text: str) -> str:
    out = json.dumps(text, ensure_ascii=False)
    # YAML forbids some characters JSON leaves raw, and reads U+0085/U+2028/U+2029 as line breaks.
    return _UNSAFE.sub(lambda m: f"\\u{ord(m.group()):04x}", out)


def scalar(value: object, *, flow: bool = False) -> str:
    """A YAML scalar that loads back as exactly ``value`` (str, int or float)."""
    if isinstance(value, bool) or value is None:
        raise TypeError(f"no YAML scalar for {value!r}")
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        return _num_text(float(value))
    text = str(value)
    plain = (_PLAIN.fullmatch(text) is not None and text.lower() not in _YAML_WORDS and text == text.strip()
             and not (flow and "," in text))
    if plain:
        try:
            plain = yaml.safe_load(f"k: {text}") == {"k": text}
        except yaml.YAMLError:
            plain = False
    return text if plain else _quote(text)


def _num_text(v: Value) -> str:
    if isinstance(v, str):
        return _quote(v)
    if isinstance(v, float):
        if not math.isfinite(v):
            raise ValueError(f"no YAML number for {v!r}")
        text = repr(v)
        return text.replace("e", ".0e", 1) if "e" in text and "." not in text else text
    return str(v)


def _comment(text: str) -> str:
    """A comment stays on its line: line breaks and characters YAML refuses become spaces."""
    return _UNSAFE.sub(" ", re.sub(r"[\r\n]", " ", text))


def _code_line(c: DraftCode, indent: str, note: str | None = None) -> str:
    parts = [f"value: {scalar(c.value, flow=True)}", f"reason: {scalar(c.reason, flow=True)}",
             f"kind: {c.kind.value}"]
    if c.label:
        parts.append(f"label: {_quote(c.label)}")
    tail = KIND_NOTE + (" and reason" if c.reason_guessed else "") + f" ({c.source})" + (f"; {note}" if note else "")
    return f"{indent}- {{{', '.join(parts)}}}  {tail}"


def render_draft(draft: Draft) -> str:
    """The draft as questionnaire YAML text (format 1) with review comments."""
    out = [
        _comment("# Questionnaire draft made by 'skipwise draft'" + (f" from {draft.source}" if draft.source else "")
                 + "."),
        "# Review every line marked 'guessed' or 'observed', add the routing (asked_if), split the items",
        "# into sections in interview order, group check-all-that-apply columns into multi items and",
        "# move frame or paradata columns (strata, weights, interviewer) to 'context'.",
        "format: 1",
        "survey:",
        f"  name: {scalar(draft.name)}",
        f"  title: {scalar(draft.title)}",
        f"  case_id: {scalar(draft.case_id)}" + (f"  {draft.case_id_note}" if draft.case_id_note else ""),
        "# context: [...]   # frame and paradata columns rules may read; they are then not items",
    ]
    if draft.codes:
        out.append("codes:   # special codes shared by most items; item 'codes' add to or override them")
        for c, n in zip(draft.codes, draft.shared):
            out.append(_code_line(c, "  ", f"found in {n} of {len(draft.items)} items"))
    out += ["sections:", "  - name: main", f"    label: {scalar('All items in file order')}",
            "    " + ROUTING_NOTE + " (a section's rule holds for all its items)", "    items:"]
    if not draft.items:
        out[-1] = "    items: []   # the data has no column besides the case id"
    for it in draft.items:
        out.append(f"      - name: {scalar(it.name)}")
        if it.label:
            out.append(f"        label: {scalar(it.label)}")
        if len(it.label.strip()) > TEXT_FROM_LABEL:  # a long label is usually the question as asked
            out.append(f"        text: {scalar(it.label.strip())}  {TEXT_NOTE}")
        out.append(f"        type: {it.type.value}")
        if it.values is not None:
            out.append("        values:")
            out += [f"          {scalar(k)}: {scalar(v)}" for k, v in it.values.items()]
        if it.range is not None:
            out.append(f"        range: [{scalar(it.range[0])}, {scalar(it.range[1])}]  {OBSERVED_NOTE}")
        if it.codes:
            out.append("        codes:")
            out += [_code_line(c, "          ") for c in it.codes]
        out += [f"        {_comment(n)}" for n in it.notes]
        out.append(f"        {ROUTING_NOTE}")
    return "\n".join(out) + "\n"


def write_draft(draft: Draft, path: str | Path, *, overwrite: bool = False) -> Path:
    """Render ``draft``, check that it loads as a questionnaire, and write it atomically.

    Raises
    ------
    SkipwiseError
        OUTPUT_EXISTS unless ``overwrite``; any loader problem (which would be a defect of the draft).
    """
    text = render_draft(draft)
    loads_questionnaire(text, file=str(path))
    with atomic_output(path, overwrite=overwrite) as tmp:
        tmp.write_text(text, encoding="utf-8")
    return Path(path)
