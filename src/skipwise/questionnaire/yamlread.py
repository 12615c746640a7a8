"""Safe YAML reading that remembers the line of every key and value.

Definition files (questionnaires, plans) report each problem with its line,
so the loader keeps a line map beside the plain Python objects. Only
:class:`yaml.SafeLoader` is used: no Python objects can be constructed from
a file.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

import yaml

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["Mark", "LineDict", "LineList", "load_yaml_text", "read_text_file"]


@dataclass(frozen=True)
class Mark:
    line: int     # 1-based
    column: int   # 1-based
    style: str | None  # None (plain), "'" or '"' (quoted), "|" or ">" (block)


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


class LineList(list):
    """A list that also knows the line of each entry."""

    line: int = 0
    marks: list

    def item_line(self, i: int) -> int:
        return self.marks[i].line if i < len(self.marks) else self.line


class _Loader(yaml.SafeLoader):
    pass


def _mark(node: yaml.Node) -> Mark:
    style = getattr(node, "style", None)
    return Mark(node.start_mark.line + 1, node.start_mark.column + 1, style)


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


_Loader.add_constructor(yaml.resolver.BaseResolver.DEFAULT_MAPPING_TAG, _construct_mapping)
_Loader.add_constructor(yaml.resolver.BaseResolver.DEFAULT_SEQUENCE_TAG, _construct_sequence)


def read_text_file(path: str | Path) -> str:
    """Read a UTF-8 definition file, turning OS and decoding errors into user errors."""
    path = Path(path)
    if not path.exists():
        raise SkipwiseError(Problem(code=ProblemCode.FILE_NOT_FOUND, category=Category.USAGE, file=str(path),
                                    message="file not found", hint="check the path"))
    try:
        return path.read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        raise SkipwiseError(Problem(
            code=ProblemCode.FILE_UNREADABLE, file=str(path),
            message=f"not valid UTF-8 text (byte {exc.start})",
            hint="save the file as UTF-8")) from None
    except OSError as exc:
        raise SkipwiseError(Problem(code=ProblemCode.FILE_UNREADABLE, file=str(path),
                                    message=f"cannot read the file: {exc.strerror}")) from None


def load_yaml_text(text: str, file: str | None = None) -> Any:
    """Parse YAML text safely into :class:`LineDict` / :class:`LineList` objects."""
    try:
        return yaml.load(text, Loader=_Loader)  # noqa: S506 - _Loader derives from SafeLoader
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        raise SkipwiseError(Problem(
            code=ProblemCode.YAML_SYNTAX, file=file,
            line=mark.line + 1 if mark else None, column=mark.column + 1 if mark else None,
            message=f"not valid YAML: {exc.problem or exc.context}",
            hint="check indentation, colons and quotes on this line")) from None
    except yaml.YAMLError as exc:
        raise SkipwiseError(Problem(code=ProblemCode.YAML_SYNTAX, file=file,
                                    message=f"not valid YAML: {exc}")) from None
