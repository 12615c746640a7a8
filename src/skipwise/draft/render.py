"""The draft as questionnaire YAML text (format 1), every guess with its review comment."""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

import numpy as np
import yaml

from skipwise.draft.model import KIND_NOTE, ROUTING_NOTE, TEXT_FROM_LABEL, TEXT_NOTE, Draft, DraftCode, Value
from skipwise.io.atomic import atomic_output
from skipwise.questionnaire.loader import loads_questionnaire

__all__ = ["render_draft", "write_draft", "scalar"]

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
        if it.level:
            out.append(f"        level: {it.level}")
        if it.values is not None:
            out.append("        values:")
            out += [f"          {scalar(k)}: {scalar(v)}" for k, v in it.values.items()]
        if it.range is not None:
            out.append(f"        range: [{scalar(it.range[0])}, {scalar(it.range[1])}]  {it.range_note}")
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
