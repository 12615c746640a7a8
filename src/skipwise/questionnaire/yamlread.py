"""Safe YAML reading that remembers the line of every key and value.

Definition files (questionnaires, plans) report each problem with its line,
so the loader keeps a line map beside the plain Python objects.  One rule
for every definition file:

* Only the YAML 1.2 core schema resolves plain scalars (YAML 1.2, section
  10.3, "Core Schema"): ``true``/``false`` are booleans, ``null``/``~``/empty
  is null, decimal, ``0o`` octal and ``0x`` hexadecimal integers, floats and
  ``.inf``.  ``yes``, ``no``, ``on``, ``off``, ``y``, ``n``, dates and
  sexagesimal numbers stay text, as written.
* Every scalar keeps its source text (:attr:`Mark.text`), so a label written
  ``2024`` or ``1.50`` is the text "2024" or "1.50" (:meth:`LineDict.text`).
* ``.nan`` is refused everywhere: no key of a definition file takes "not a
  number" (quote it to mean the text).
* The input is bounded: at most :data:`MAX_CHARS` characters, nesting depth
  :data:`MAX_DEPTH`, and aliases may repeat at most :data:`MAX_ALIAS_NODES`
  nodes in all (a few hundred bytes of nested aliases could otherwise
  expand to billions of nodes); an alias to the block that contains it is
  refused.

Only safe construction is used: no Python objects can be built from a file.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import yaml
from yaml.composer import Composer
from yaml.constructor import SafeConstructor
from yaml.parser import Parser
from yaml.reader import Reader
from yaml.resolver import BaseResolver
from yaml.scanner import Scanner

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["Mark", "LineDict", "LineList", "load_yaml_text", "read_text_file", "is_number",
           "is_version", "MAX_CHARS", "MAX_DEPTH", "MAX_ALIAS_NODES"]

#: Largest definition file read, in characters (a 10,000-item questionnaire is about 1 MB).
MAX_CHARS = 4_000_000
#: Deepest nesting of lists and mappings.
MAX_DEPTH = 64
#: Most nodes that aliases may repeat in one file, all aliases together.
MAX_ALIAS_NODES = 100_000


@dataclass(frozen=True)
class Mark:
    line: int     # 1-based
    column: int   # 1-based
    style: str | None  # None (plain), "'" or '"' (quoted), "|" or ">" (block)
    text: str | None = None  # a scalar's source text (None for a list or mapping)


def is_number(value: Any) -> bool:
    """True for an int or a finite-or-infinite float that is not a bool (never NaN)."""
    return isinstance(value, (int, float)) and not isinstance(value, bool) and not (
        isinstance(value, float) and math.isnan(value))


def is_version(value: Any, version: int) -> bool:
    """True when ``value`` is the whole number ``version`` (``true`` and ``1.0`` are not ``1``)."""
    return type(value) is int and value == version


class LineDict(dict):
    """A dict that also knows where each key and value stood in the file."""

    line: int = 0
    key_marks: dict
    value_marks: dict
    duplicate_keys: list

    def key_line(self, key: Any) -> int:
        return self.key_marks.get(key, Mark(self.line, 1, None)).line

    def value_mark(self, key: Any) -> Mark:
        return self.value_marks.get(key, Mark(self.line, 1, None))

    def text(self, key: Any, default: str | None = None) -> str | None:
        """The value of ``key`` as the text written in the file; ``default`` when absent.

        Returns None when the value is a list or a mapping (not a text): the caller reports it.
        """
        if key not in self:
            return default
        value = self[key]
        if isinstance(value, (list, dict)):
            return None
        if isinstance(value, str):
            return value
        mark = self.value_marks.get(key)
        if mark is not None and mark.text is not None:
            return mark.text
        return "" if value is None else str(value)


class LineList(list):
    """A list that also knows the line of each entry."""

    line: int = 0
    marks: list

    def item_line(self, i: int) -> int:
        return self.marks[i].line if i < len(self.marks) else self.line

    def text(self, i: int) -> str | None:
        """Entry ``i`` as the text written in the file (None for a list or mapping)."""
        value = self[i]
        if isinstance(value, (list, dict)):
            return None
        if isinstance(value, str):
            return value
        mark = self.marks[i] if i < len(self.marks) else None
        if mark is not None and mark.text is not None:
            return mark.text
        return "" if value is None else str(value)


class _Limit(Exception):
    def __init__(self, mark: Any, message: str, hint: str):
        super().__init__(message)
        self.mark, self.message, self.hint = mark, message, hint


class _BoundedComposer(Composer):
    """A composer that counts what aliases repeat and how deep the document nests."""

    def __init__(self) -> None:
        super().__init__()
        self._depth = 0
        self._repeated = 0
        self._sizes: dict[int, int] = {}

    def compose_node(self, parent: Any, index: Any) -> yaml.Node:
        event = self.peek_event()
        if isinstance(event, yaml.AliasEvent):
            node = self.anchors.get(event.anchor)
            if node is not None:
                size = self._sizes.get(id(node))
                if size is None:
                    raise _Limit(event.start_mark, f"the alias *{event.anchor} refers to the block that "
                                 "contains it", "an alias may only repeat a block that is complete")
                self._repeated += size
                if self._repeated > MAX_ALIAS_NODES:
                    raise _Limit(event.start_mark, f"aliases repeat more than {MAX_ALIAS_NODES:,} values "
                                 f"(at *{event.anchor})", "write the repeated parts out, or use fewer "
                                 "nested aliases")
            return super().compose_node(parent, index)
        self._depth += 1
        try:
            if self._depth > MAX_DEPTH:
                raise _Limit(event.start_mark, f"lists and mappings nest deeper than {MAX_DEPTH} levels",
                             "a definition file needs only a few levels")
            node = super().compose_node(parent, index)
        finally:
            self._depth -= 1
        if isinstance(node, yaml.MappingNode):
            size = 1 + sum(self._sizes.get(id(k), 1) + self._sizes.get(id(v), 1) for k, v in node.value)
        elif isinstance(node, yaml.SequenceNode):
            size = 1 + sum(self._sizes.get(id(c), 1) for c in node.value)
        else:
            size = 1
        self._sizes[id(node)] = size
        return node


class _CoreResolver(BaseResolver):
    """Implicit tags of the YAML 1.2 core schema only (plus the ``<<`` merge key)."""


_CoreResolver.yaml_implicit_resolvers = {}
for _tag, _regexp, _first in (
        ("tag:yaml.org,2002:bool", r"^(?:true|True|TRUE|false|False|FALSE)$", "tTfF"),
        ("tag:yaml.org,2002:null", r"^(?:~|null|Null|NULL|)$", ["~", "n", "N", ""]),
        ("tag:yaml.org,2002:int", r"^(?:[-+]?[0-9]+|0o[0-7]+|0x[0-9a-fA-F]+)$", "-+0123456789"),
        ("tag:yaml.org,2002:float",
         r"^(?:[-+]?(?:\.[0-9]+|[0-9]+(?:\.[0-9]*)?)(?:[eE][-+]?[0-9]+)?|[-+]?\.(?:inf|Inf|INF)"
         r"|\.(?:nan|NaN|NAN))$", "-+.0123456789"),
        ("tag:yaml.org,2002:merge", r"^(?:<<)$", "<")):
    _CoreResolver.add_implicit_resolver(_tag, re.compile(_regexp), list(_first))


class _Loader(Reader, Scanner, Parser, _BoundedComposer, SafeConstructor, _CoreResolver):
    def __init__(self, stream: str):
        Reader.__init__(self, stream)
        Scanner.__init__(self)
        Parser.__init__(self)
        _BoundedComposer.__init__(self)
        SafeConstructor.__init__(self)
        _CoreResolver.__init__(self)
        self.nan_marks: list[Mark] = []


def _mark(node: yaml.Node) -> Mark:
    style = getattr(node, "style", None)
    text = node.value if isinstance(node, yaml.ScalarNode) else None
    return Mark(node.start_mark.line + 1, node.start_mark.column + 1, style, text)


def _construct_mapping(loader: _Loader, node: yaml.MappingNode) -> LineDict:
    loader.flatten_mapping(node)
    out = LineDict()
    out.line = node.start_mark.line + 1
    out.key_marks, out.value_marks, out.duplicate_keys = {}, {}, []
    for key_node, value_node in node.value:
        key = loader.construct_object(key_node, deep=True)
        try:
            hash(key)
        except TypeError:
            key = str(key)
        if key in out:
            out.duplicate_keys.append((key, key_node.start_mark.line + 1))
        out[key] = loader.construct_object(value_node, deep=True)
        out.key_marks[key] = _mark(key_node)
        out.value_marks[key] = _mark(value_node)
    return out


def _construct_sequence(loader: _Loader, node: yaml.SequenceNode) -> LineList:
    out = LineList(loader.construct_object(child, deep=True) for child in node.value)
    out.line = node.start_mark.line + 1
    out.marks = [_mark(child) for child in node.value]
    return out


def _construct_int(loader: _Loader, node: yaml.ScalarNode) -> int:
    text = node.value
    if text.startswith("0o"):
        return int(text[2:], 8)
    if text.startswith("0x"):
        return int(text[2:], 16)
    return int(text, 10)


def _construct_float(loader: _Loader, node: yaml.ScalarNode) -> float:
    text = node.value
    if text.lower().lstrip("+-") == ".inf":
        return -math.inf if text.startswith("-") else math.inf
    if text.lower() == ".nan":
        loader.nan_marks.append(_mark(node))
        return math.nan
    return float(text)


_Loader.add_constructor(BaseResolver.DEFAULT_MAPPING_TAG, _construct_mapping)
_Loader.add_constructor(BaseResolver.DEFAULT_SEQUENCE_TAG, _construct_sequence)
_Loader.add_constructor("tag:yaml.org,2002:int", _construct_int)
_Loader.add_constructor("tag:yaml.org,2002:float", _construct_float)


def _too_long(file: str | None, size: int, unit: str) -> SkipwiseError:
    return SkipwiseError(Problem(
        code=ProblemCode.FILE_FORMAT, file=file,
        message=f"the file is too large for a definition file ({size:,} {unit}; at most {MAX_CHARS:,})",
        hint="check that this is the questionnaire or plan file and not a data file"))


def read_text_file(path: str | Path) -> str:
    """Read a UTF-8 definition file, turning OS and decoding errors into user errors."""
    path = Path(path)
    if not path.exists():
        raise SkipwiseError(Problem(code=ProblemCode.FILE_NOT_FOUND, category=Category.USAGE, file=str(path),
                                    message="file not found", hint="check the path"))
    try:
        size = path.stat().st_size
        if path.is_file() and size > 4 * MAX_CHARS:  # UTF-8 takes at most 4 bytes a character
            raise _too_long(str(path), size, "bytes")
        text = path.read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        raise SkipwiseError(Problem(
            code=ProblemCode.FILE_UNREADABLE, file=str(path),
            message=f"not valid UTF-8 text (byte {exc.start})",
            hint="save the file as UTF-8")) from None
    except OSError as exc:
        raise SkipwiseError(Problem(code=ProblemCode.FILE_UNREADABLE, file=str(path),
                                    message=f"cannot read the file: {exc.strerror}")) from None
    if len(text) > MAX_CHARS:
        raise _too_long(str(path), len(text), "characters")
    return text


def load_yaml_text(text: str, file: str | None = None) -> Any:
    """Parse YAML text safely into :class:`LineDict` / :class:`LineList` objects.

    Raises
    ------
    SkipwiseError
        ``yaml-syntax`` with the line of the problem (also for a file past the
        nesting and alias bounds), ``file-format`` for text longer than
        :data:`MAX_CHARS`, ``bad-value`` for every ``.nan``, all at once.
    """
    if len(text) > MAX_CHARS:
        raise _too_long(file, len(text), "characters")
    try:
        loader = _Loader(text)
    except yaml.reader.ReaderError as exc:
        line = text.count("\n", 0, exc.position) + 1
        raise SkipwiseError(Problem(
            code=ProblemCode.YAML_SYNTAX, file=file, line=line,
            message=f"not valid YAML: the control character U+{exc.character:04X} is not allowed",
            hint="remove control characters (save the file as plain UTF-8 text)")) from None
    try:
        doc = loader.get_single_data()
    except _Limit as exc:
        raise SkipwiseError(Problem(
            code=ProblemCode.YAML_SYNTAX, file=file, line=exc.mark.line + 1, column=exc.mark.column + 1,
            message=exc.message, hint=exc.hint)) from None
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        raise SkipwiseError(Problem(
            code=ProblemCode.YAML_SYNTAX, file=file,
            line=mark.line + 1 if mark else None, column=mark.column + 1 if mark else None,
            message=f"not valid YAML: {exc.problem or exc.context}",
            hint="check indentation, colons and quotes on this line")) from None
    except yaml.YAMLError as exc:
        raise SkipwiseError(Problem(code=ProblemCode.YAML_SYNTAX, file=file,
                                    message=f"not valid YAML: {_clean(exc)}")) from None
    except RecursionError:
        raise SkipwiseError(Problem(code=ProblemCode.YAML_SYNTAX, file=file,
                                    message="the file nests too deeply to read",
                                    hint="a definition file needs only a few levels")) from None
    finally:
        loader.dispose()
    if loader.nan_marks:
        raise SkipwiseError([Problem(
            code=ProblemCode.BAD_VALUE, file=file, line=m.line, column=m.column,
            message=f"'{m.text}' (not a number) cannot be used in a definition file",
            hint="write a number, or quote it ('.nan') if you mean the text") for m in loader.nan_marks])
    return doc


def _clean(exc: Exception) -> str:
    from skipwise.publish import clean_message

    return clean_message(exc)
