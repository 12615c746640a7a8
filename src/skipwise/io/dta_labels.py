"""Stata value-label sets named after their variable.

pyreadstat writes one value-label set per labelled variable and names it after the variable and
its column position (``tenure0``, ``size5``), and its ``write_dta`` has no argument for the name.
Stata users expect ``label list tenure`` to show the labels of ``tenure``, so
:func:`name_label_sets` renames every set after the (first) variable using it, in place, after
the file is written.  The names are fixed-width fields, so no offset of the file changes.

Layout [memory: Stata manual, "dta — Description of .dta file format", releases 117-119]: the
``<map>`` element holds 14 little- or big-endian 8-byte offsets, among them those of
``<value_label_names>`` (one name field per variable, 33 bytes in release 117, 129 bytes from 118)
and ``<value_labels>`` (``<lbl>``, a 4-byte table length, the set's name in a field of the same
width, 3 padding bytes, the table, ``</lbl>``, per set).
"""

from __future__ import annotations

import re
import struct
from pathlib import Path

__all__ = ["name_label_sets", "replace_value_labels"]

_RELEASE = re.compile(rb"<release>(\d{3})</release>")
_ORDER = re.compile(rb"<byteorder>(MSF|LSF)</byteorder>")
_MAP_SLOTS = 14
_LABEL_NAMES_SLOT, _VARIABLE_LABELS_SLOT, _VALUE_LABELS_SLOT, _END_SLOT = 6, 7, 11, 12


def _map_of(fh) -> tuple[str, int, tuple[int, ...]] | None:
    """Byte order, position of the map's offsets and the offsets of an open ``.dta`` of release 117-119."""
    fh.seek(0)
    head = fh.read(4096)
    release, order = _RELEASE.search(head), _ORDER.search(head)
    if release is None or order is None or int(release.group(1)) not in (117, 118, 119):
        return None
    endian = "<" if order.group(1) == b"LSF" else ">"
    start = head.find(b"<map>")
    if start < 0:
        return None
    offsets = struct.unpack(f"{endian}{_MAP_SLOTS}Q", head[start + 5: start + 5 + 8 * _MAP_SLOTS])
    return endian, start + 5, offsets


def replace_value_labels(path: str | Path, source: str | Path) -> bool:
    """Put the ``<value_labels>`` element of ``source`` in place of that of ``path`` (both release 117-119).

    The element holds every value-label table and follows the data, so only the end of ``path``
    is rewritten, and the map's last two offsets (``</stata_dta>`` and the end of the file) move
    by the difference in length.  Used to write the data of a large file with pyreadstat
    declaring only the missing letters each column holds, and its label tables (letters included)
    from a file without rows written with the same labels and every letter declared.  Returns
    False, changing nothing, for another release.
    """
    with open(source, "rb") as fh:
        found = _map_of(fh)
        if found is None:
            return False
        offsets = found[2]
        fh.seek(offsets[_VALUE_LABELS_SLOT])
        tables = fh.read(offsets[_END_SLOT] - offsets[_VALUE_LABELS_SLOT])
    with open(path, "r+b") as fh:
        found = _map_of(fh)
        if found is None:
            return False
        endian, at, offsets = found
        fh.seek(offsets[_END_SLOT])
        tail = fh.read()
        fh.seek(offsets[_VALUE_LABELS_SLOT])
        fh.write(tables)
        fh.write(tail)
        fh.truncate()
        shift = len(tables) - (offsets[_END_SLOT] - offsets[_VALUE_LABELS_SLOT])
        moved = list(offsets)
        moved[_END_SLOT] += shift
        moved[_END_SLOT + 1] += shift
        fh.seek(at)
        fh.write(struct.pack(f"{endian}{_MAP_SLOTS}Q", *moved))
    return True


def _field(name: bytes, width: int) -> bytes:
    return name[: width - 1].ljust(width, b"\0")


def name_label_sets(path: str | Path) -> dict[str, str]:
    """Rename the value-label sets of a ``.dta`` (release 117-119) after their variables, in place.

    Returns ``{old name: new name}`` for the sets renamed (empty for a file without labels or of
    another release).
    """
    with open(path, "r+b") as fh:
        head = fh.read(4096)
        release, order = _RELEASE.search(head), _ORDER.search(head)
        if release is None or order is None or int(release.group(1)) not in (117, 118, 119):
            return {}
        width = 33 if int(release.group(1)) == 117 else 129
        endian = "<" if order.group(1) == b"LSF" else ">"
        start = head.find(b"<map>")
        if start < 0:
            return {}
        offsets = struct.unpack(f"{endian}{_MAP_SLOTS}Q", head[start + 5: start + 5 + 8 * _MAP_SLOTS])
        fh.seek(offsets[3])  # <varnames>
        names_block = fh.read(offsets[4] - offsets[3])
        fh.seek(offsets[_LABEL_NAMES_SLOT])
        lbl_block = bytearray(fh.read(offsets[_VARIABLE_LABELS_SLOT] - offsets[_LABEL_NAMES_SLOT]))
        fh.seek(offsets[_VALUE_LABELS_SLOT])
        tables = bytearray(fh.read(offsets[_END_SLOT] - offsets[_VALUE_LABELS_SLOT]))

        body = names_block[len(b"<varnames>"): names_block.rfind(b"</varnames>")]
        variables = [body[i: i + width].split(b"\0", 1)[0] for i in range(0, len(body), width)]
        tag = len(b"<value_label_names>")
        rename: dict[bytes, bytes] = {}
        for k, var in enumerate(variables):
            at = tag + k * width
            old = bytes(lbl_block[at: at + width]).split(b"\0", 1)[0]
            if old and old not in rename:
                rename[old] = var
        rename = {old: new for old, new in rename.items() if old != new}  # new names: distinct variables
        if not rename:
            return {}
        for k in range(len(variables)):
            at = tag + k * width
            old = bytes(lbl_block[at: at + width]).split(b"\0", 1)[0]
            if old in rename:
                lbl_block[at: at + width] = _field(rename[old], width)
        pos = 0
        while (pos := tables.find(b"<lbl>", pos)) >= 0:
            at = pos + 5 + 4
            old = bytes(tables[at: at + width]).split(b"\0", 1)[0]
            if old in rename:
                tables[at: at + width] = _field(rename[old], width)
            (length,) = struct.unpack(f"{endian}I", tables[pos + 5: pos + 9])
            pos = at + width + 3 + length + len(b"</lbl>")
        fh.seek(offsets[_LABEL_NAMES_SLOT])
        fh.write(lbl_block)
        fh.seek(offsets[_VALUE_LABELS_SLOT])
        fh.write(tables)
    return {o.decode("utf-8", "replace"): n.decode("utf-8", "replace") for o, n in rename.items()}
