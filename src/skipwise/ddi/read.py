"""A questionnaire draft from a DDI-Codebook 2.5 document (an archive's metadata as a starting point).

Names, labels, question text, categories and missing-value codes are taken
over; universes are free text in DDI, so they become comments beside each item
for the user to turn into ``asked_if`` rules.  Status, weight and replicate
variables that skipwise itself wrote are left out.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from pathlib import Path

from skipwise.draft import Draft, DraftCode, DraftItem, guess_code, lift_codes as _lift
from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError
from skipwise.publish import clean_message
from skipwise.questionnaire.model import CodeKind, ItemType

__all__ = ["draft_from_ddi"]

_NS = {"d": "ddi:codebook:2_5"}
#: Largest DDI document read (bytes): archives' codebooks are far smaller.
MAX_BYTES = 64 * 1024 * 1024


def _fail(path: Path, message: str, hint: str) -> SkipwiseError:
    return SkipwiseError(Problem(code=ProblemCode.FILE_FORMAT, category=Category.USAGE, file=str(path),
                                 message=message, hint=hint))


def _number(text: str | None) -> int | float | str | None:
    if text is None:
        return None
    t = text.strip()
    try:
        f = float(t)
    except ValueError:
        return t
    return int(f) if f.is_integer() else f


def _text(el: ET.Element | None, path: str) -> str:
    found = el.find(path, _NS) if el is not None else None
    return " ".join((found.text or "").split()) if found is not None and found.text else ""


def _parse(path: Path) -> ET.Element:
    try:
        raw = path.read_bytes()
    except OSError as err:
        raise _fail(path, f"cannot read the file: {err.strerror or err}", "check the path") from None
    if len(raw) > MAX_BYTES:
        raise _fail(path, f"the document is larger than {MAX_BYTES // 2**20} MB", "split it or draft from the data file")
    if re.search(rb"<!(DOCTYPE|ENTITY)", raw[:4096], re.IGNORECASE):
        raise _fail(path, "the document declares a DOCTYPE or entities, which are not read",
                    "remove the DOCTYPE declaration (DDI-Codebook 2.5 documents need none)")
    try:
        root = ET.fromstring(raw)
    except ET.ParseError as err:
        raise _fail(path, f"not well-formed XML ({clean_message(err)})", "check that the file is a DDI-Codebook XML document") from None
    if root.tag != "{ddi:codebook:2_5}codeBook":
        raise _fail(path, f"the root element is {root.tag.split('}')[-1]!r}, not a DDI-Codebook 2.5 codeBook",
                    "export the codebook as DDI-Codebook 2.5 (namespace ddi:codebook:2_5)")
    return root


def _codes(var: ET.Element) -> tuple[dict, list[DraftCode]]:
    values: dict = {}
    codes: list[DraftCode] = []
    for cat in var.findall("d:catgry", _NS):
        value = _number(_text(cat, "d:catValu"))
        if value is None or value == "":
            continue
        label = _text(cat, "d:labl")
        if cat.get("missing") == "Y":
            note = _text(cat, "d:txt")
            kind_m = re.search(r"kind (structural|nonresponse|substantive)", note)
            guessed = guess_code(label) if label else None
            reason = cat.get("missType") or (guessed[0] if guessed else f"code_{str(value).replace('-', 'm')}")
            reason = re.sub(r"[^0-9a-z_]+", "_", reason.lower()).strip("_") or "missing"
            kind = CodeKind(kind_m.group(1)) if kind_m else (guessed[1] if guessed else CodeKind.NONRESPONSE)
            codes.append(DraftCode(value=value, reason=reason, kind=kind, label=label or None,
                                   source="DDI missing category", reason_guessed=cat.get("missType") is None))
        else:
            values[value] = label or str(value)
    return values, codes


def _item(var: ET.Element) -> DraftItem:
    name = var.get("name", "")
    values, codes = _codes(var)
    fmt = var.find("d:varFormat", _NS)
    character = fmt is not None and fmt.get("type") == "character"
    rng = var.find("d:valrng/d:range", _NS)
    notes = []
    qtext = _text(var, "d:qstn/d:qstnLit")
    if qtext:
        notes.append(f"# question text: {qtext}")
    universe = _text(var, "d:universe")
    if universe:
        notes.append(f"# universe (from the DDI document, as free text): {universe}")
    if values:
        kind = ItemType.CATEGORICAL
    elif character:
        kind = ItemType.TEXT
    else:
        whole = all(isinstance(_number(s.text), int) for s in var.findall("d:sumStat", _NS)
                    if s.get("type") in ("min", "max"))
        kind = ItemType.INTEGER if whole else ItemType.NUMBER
    rng_values = None
    if rng is not None and kind in (ItemType.INTEGER, ItemType.NUMBER):
        lo, hi = _number(rng.get("min")), _number(rng.get("max"))
        if isinstance(lo, (int, float)) and isinstance(hi, (int, float)):
            rng_values = (lo, hi)
    return DraftItem(name=name, type=kind, label=_text(var, "d:labl"), values=values or None, range=rng_values,
                     codes=tuple(codes), notes=tuple(notes))


def _skip(var: ET.Element, status_names: set[str]) -> bool:
    """Variables skipwise derives: status columns, weights and replicates."""
    return var.get("wgt") == "wgt" or var.get("name", "") in status_names


def draft_from_ddi(path: str | Path, *, case_id: str | None = None, name: str | None = None) -> Draft:
    """Draft a questionnaire from a DDI-Codebook 2.5 document.

    Raises
    ------
    SkipwiseError
        FILE_FORMAT when the file is not a readable DDI-Codebook 2.5 document;
        MISSING_COLUMN when ``case_id`` names no variable of it.
    """
    path = Path(path)
    root = _parse(path)
    variables = root.findall("d:dataDscr/d:var", _NS)
    names = [v.get("name", "") for v in variables]
    status_names = {f"{n}_status" for n in names}
    if case_id is None:
        case_id = next((v.get("name") for v in variables if _text(v, "d:txt").startswith("Case identifier")),
                       names[0] if names else None)
    if case_id not in names:
        raise SkipwiseError(Problem(code=ProblemCode.MISSING_COLUMN, category=Category.USAGE, file=str(path),
                                    message=f"case id '{case_id}' is not a variable of the document",
                                    hint="name it with --case-id"))
    items = [_item(v) for v in variables if v.get("name") != case_id and not _skip(v, status_names)]
    codes, shared, items = _lift(items)
    title = _text(root, "d:stdyDscr/d:citation/d:titlStmt/d:titl")
    ident = _text(root, "d:stdyDscr/d:citation/d:titlStmt/d:IDNo")
    short = name or re.sub(r"[^0-9a-z]+", "-", (ident or path.stem).lower()).strip("-") or "survey"
    return Draft(name=short, title=title or short, case_id=str(case_id), case_id_note="", codes=tuple(codes),
                 shared=tuple(shared), items=tuple(items), source=path.name)
