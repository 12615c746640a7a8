"""Guessing special codes: which labels and stored texts read like a reason for not answering.

Every guess is only a proposal: the draft marks it ``# guessed: confirm kind`` for review.
The wordings are common practice in survey exports (no source); the reasons are the
product's own vocabulary with built-in numbers (docs/statuses.md).
"""

from __future__ import annotations

import re

import numpy as np

from skipwise.draft.model import DATA_TEXT, DraftCode, Value
from skipwise.questionnaire.loader import RESERVED_STATUSES
from skipwise.questionnaire.model import CodeKind

__all__ = ["CODE_PATTERNS", "normalize_wording", "guess_code", "guess_data_code", "reason_from", "make_code",
           "TYPICAL_CODES", "typical_codes_note"]

#: Wordings that mark a special code, in the order they are tried, matched against the
#: wording made case-, space- and apostrophe-insensitive by :func:`normalize_wording`.
#: Common practice in survey exports, no source.
CODE_PATTERNS: tuple[tuple[str, CodeKind, str], ...] = (
    ("dont_know", CodeKind.NONRESPONSE,
     r"\bdon ?t know\b|\bdo not know\b|\bdoesn ?t know\b|\bdoes not know\b|\bdk\b|\bnot sure\b"),
    ("refused", CodeKind.NONRESPONSE, r"\brefus|\bdeclined?\b|\bprefer(s|red)? not to\b|\brather not say\b"),
    ("not_stated", CodeKind.NONRESPONSE, r"\bnot stated\b"),
    ("cannot_choose", CodeKind.NONRESPONSE, r"\bcan ?t choose\b|\bcannot choose\b|\bcan not choose\b"),
    ("no_answer", CodeKind.NONRESPONSE,
     r"\bno answer\b|\bnot answered\b|\bno response\b|\bunknown\b|^na$"),
    ("not_applicable", CodeKind.STRUCTURAL,
     r"\bnot applicable\b|\binapplicable\b|\bn/a\b|\bn\.a\.|\bdoes not apply\b|\bdoesn ?t apply\b|\bnot asked\b"
     r"|\brouted out\b|\bskipped\b"),
)
_COMPILED = tuple((r, k, re.compile(p)) for r, k, p in CODE_PATTERNS)
_APOSTROPHES = re.compile("['\u2019\u2018`\u00b4\u02bc]")
#: A stored text longer than this is an answer in words, not a code (common practice, no source).
DATA_CODE_WORDS = 5

#: Numbers often used as missing-value codes.  From plain data they are never proposed as codes
#: (only a label can say what they mean); the draft notes them when they stand apart from the
#: other values.  Common practice, no source.
TYPICAL_CODES = frozenset([-1, -2, -3, -4, -5, -6, -7, -8, -9, -97, -98, -99, -997, -998, -999,
                           97, 98, 99, 997, 998, 999, 9997, 9998, 9999])


def normalize_wording(text: str) -> str:
    """Lower case, apostrophes dropped, runs of spaces and underscores as one space.

    >>> normalize_wording("  DON\u2019T   know ")
    'dont know'
    """
    text = _APOSTROPHES.sub("", str(text).lower())
    return re.sub(r"[\s_]+", " ", text).strip()


def guess_code(label: str) -> tuple[str, CodeKind] | None:
    """Reason and kind for a value label that reads like a special code, else None.

    >>> guess_code("Don't know / can't say")
    ('dont_know', <CodeKind.NONRESPONSE: 'nonresponse'>)
    """
    text = normalize_wording(label)
    for reason, kind, rx in _COMPILED:
        if rx.search(text):
            return reason, kind
    return None


def guess_data_code(value: str) -> tuple[str, CodeKind] | None:
    """Like :func:`guess_code`, for a text stored in a cell: only a short text is a code.

    >>> guess_data_code("Refused"), guess_data_code("I refused to go by bus because of the fares")
    (('refused', <CodeKind.NONRESPONSE: 'nonresponse'>), None)
    """
    if len(normalize_wording(value).split()) > DATA_CODE_WORDS:
        return None
    return guess_code(value)


def reason_from(label: str | None, value: Value) -> str:
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


def make_code(value: Value, label: str | None, source: str) -> DraftCode:
    """A draft code for ``value``: reason and kind from the label, else made up (and so marked)."""
    guess = guess_code(label) if label else None
    if guess:
        return DraftCode(value=value, reason=guess[0], kind=guess[1], label=label, source=source)
    return DraftCode(value=value, reason=reason_from(label, value), kind=CodeKind.NONRESPONSE, label=label,
                     source=source, reason_guessed=True)


def data_text_codes(texts: np.ndarray, taken: set) -> list[DraftCode]:
    """Codes for the stored texts (not numbers) that read like a reason for not answering."""
    found = []
    for value in sorted(set(texts.tolist()) - taken):
        guess = guess_data_code(value)
        if guess:
            found.append(DraftCode(value=value, reason=guess[0], kind=guess[1], source=DATA_TEXT))
    return found


def typical_codes_note(seen: np.ndarray) -> str | None:
    """A review note naming observed numbers that look like missing-value codes, else None.

    A number of :data:`TYPICAL_CODES` counts when it stands apart: below every other value
    (a negative among non-negatives) or above every other value.
    """
    values = np.unique(seen[np.isfinite(seen)])
    if values.size < 2:
        return None
    odd = []
    for v in values:
        if float(v).is_integer() and int(v) in TYPICAL_CODES:
            rest = values[values != v]
            if (v < 0 <= rest.min()) or (v > 0 and v > rest.max() and not int(v) - 1 in rest):
                odd.append(int(v))
    if not odd:
        return None
    shown = ", ".join(str(v) for v in odd)
    return (f"# confirm: {shown} look(s) like a missing-value code, but no label says so: if so, declare it "
            "under codes (with its reason) and leave it out of the values and range")
