"""A tiny document model rendered to Markdown and to HTML (escaped with :func:`html.escape`).

A document is a list of blocks, each a tuple:

``("h", level, text)``, ``("p", text)``, ``("ul", [text, ...])`` and
``("table", [header, ...], [[cell, ...], ...])``; ``("anchor", name)`` marks a
place other blocks may link to, and ``("links", [(text, name), ...])`` is a list
of links to such places (a table of contents).  Text is escaped in both forms:
raw HTML in a label never reaches a reader's browser as markup.
"""

from __future__ import annotations

import html
import re
from typing import Iterable, Sequence

__all__ = ["Block", "to_markdown", "to_html", "anchor_name"]

Block = tuple

_CSS = (
    "body{font-family:system-ui,sans-serif;margin:2em auto;max-width:72em;line-height:1.4;color:#222}"
    "table{border-collapse:collapse;margin:.5em 0 1.2em}th,td{border:1px solid #bbb;padding:.2em .5em;"
    "vertical-align:top;text-align:left}th{background:#eee}code{background:#f4f4f4;padding:0 .2em}"
    "h2{border-bottom:1px solid #ccc;margin-top:2em}"
)


def anchor_name(text: str) -> str:
    """A stable anchor id for a variable or section name."""
    return "v-" + re.sub(r"[^A-Za-z0-9_-]+", "-", str(text)).strip("-").lower()


def _md_text(value: object) -> str:
    """Markdown text with raw HTML escaped outside `code` spans (a label cannot inject markup)."""
    parts = str("" if value is None else value).split("`")
    return "`".join(p if i % 2 else html.escape(p, quote=False) for i, p in enumerate(parts))


def _md_cell(value: object) -> str:
    text = _md_text(value)
    return text.replace("\\", "\\\\").replace("|", "\\|").replace("\n", " ")


def to_markdown(blocks: Iterable[Block]) -> str:
    """Render blocks as GitHub-flavoured Markdown."""
    out: list[str] = []
    for b in blocks:
        kind = b[0]
        if kind == "h":
            out += ["#" * b[1] + " " + _md_text(b[2]).replace("\n", " "), ""]
        elif kind == "p":
            out += [_md_text(b[1]), ""]
        elif kind == "links":
            out += [f"- [{_md_cell(text).replace('[', '&#91;').replace(']', '&#93;')}](#{anchor_name(name)})"
                    for text, name in b[1]] + [""]
        elif kind == "ul":
            out += [f"- {_md_cell(x)}" for x in b[1]] + [""]
        elif kind == "table":
            header: Sequence[object] = b[1]
            out.append("| " + " | ".join(_md_cell(h) for h in header) + " |")
            out.append("|" + "|".join("---" for _ in header) + "|")
            out += ["| " + " | ".join(_md_cell(c) for c in row) + " |" for row in b[2]]
            out.append("")
        elif kind == "anchor":
            out += [f'<a id="{anchor_name(b[1])}"></a>', ""]
        else:  # pragma: no cover - programming error
            raise ValueError(f"unknown block {kind!r}")
    return "\n".join(out).rstrip() + "\n"


def _inline(text: object) -> str:
    """Escape text; `code` spans become <code> (their content escaped too)."""
    parts = str("" if text is None else text).split("`")
    return "".join(f"<code>{html.escape(p)}</code>" if i % 2 else html.escape(p) for i, p in enumerate(parts))


def to_html(blocks: Iterable[Block], title: str) -> str:
    """Render blocks as one self-contained HTML page."""
    out = ["<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
           f"<title>{html.escape(title)}</title>", f"<style>{_CSS}</style>", "</head>", "<body>"]
    for b in blocks:
        kind = b[0]
        if kind == "h":
            level = min(max(int(b[1]), 1), 6)
            out.append(f"<h{level}>{_inline(b[2])}</h{level}>")
        elif kind == "p":
            out.append(f"<p>{_inline(b[1])}</p>")
        elif kind == "ul":
            out.append("<ul>" + "".join(f"<li>{_inline(x)}</li>" for x in b[1]) + "</ul>")
        elif kind == "links":
            out.append("<ul>" + "".join(f'<li><a href="#{html.escape(anchor_name(name))}">{_inline(text)}</a></li>'
                                        for text, name in b[1]) + "</ul>")
        elif kind == "table":
            head = "".join(f"<th>{_inline(h)}</th>" for h in b[1])
            rows = "".join("<tr>" + "".join(f"<td>{_inline(c)}</td>" for c in row) + "</tr>" for row in b[2])
            out.append(f"<table><thead><tr>{head}</tr></thead><tbody>{rows}</tbody></table>")
        elif kind == "anchor":
            out.append(f'<a id="{html.escape(anchor_name(b[1]))}"></a>')
        else:  # pragma: no cover
            raise ValueError(f"unknown block {kind!r}")
    out += ["</body>", "</html>", ""]
    return "\n".join(out)
