"""Every example in README.md and docs/*.md runs against the demo's output.

Shell blocks (``sh``, ``bash``, ``console``): every line starting with ``skipwise`` (or
``$ skipwise``) is run through the command line and must exit 0.  Python blocks are executed
and must not raise.  A block preceded by the line ``<!-- illustration -->`` is an illustration
(hypothetical file names, elided arguments) and is left out.  The commands run in a scratch
folder holding a copy of the demo output as ``out/`` and of ``questionnaires/``, so relative
paths read as they do from a clone's top folder after ``make demo``.
"""

from __future__ import annotations

import re
import shlex
import shutil
from pathlib import Path

import pytest
from typer.testing import CliRunner

from skipwise.cli import app

ROOT = Path(__file__).resolve().parents[1]
DOCS = [ROOT / "README.md", *sorted((ROOT / "docs").glob("*.md"))]
FENCE = re.compile(r"^(?P<indent> *)```(?P<lang>[A-Za-z]*)\s*$")
ILLUSTRATION = "<!-- illustration -->"


def blocks(path: Path) -> list[tuple[int, str, str]]:
    """(line, language, text) of every fenced block not marked as an illustration."""
    lines = path.read_text(encoding="utf-8").splitlines()
    out, i = [], 0
    while i < len(lines):
        m = FENCE.match(lines[i])
        if not m or not m["lang"]:
            i += 1
            continue
        start, indent, body = i, len(m["indent"]), []
        i += 1
        while i < len(lines) and not lines[i].strip().startswith("```"):
            body.append(lines[i][indent:])
            i += 1
        marked = any(lines[j].strip() == ILLUSTRATION for j in range(max(0, start - 2), start))
        if not marked:
            out.append((start + 1, m["lang"].lower(), "\n".join(body)))
        i += 1
    return out


def commands(text: str) -> list[str]:
    cmds = []
    for line in text.splitlines():
        line = line.strip()
        if line.startswith("$ "):
            line = line[2:]
        if line.startswith("skipwise "):
            cmds.append(line.split("  #")[0].strip())
    return cmds


SHELL = [(p, n, c) for p in DOCS for n, lang, text in blocks(p) if lang in ("sh", "bash", "console", "shell")
         for c in commands(text)]
PYTHON = [(p, n, text) for p in DOCS for n, lang, text in blocks(p) if lang == "python"]


@pytest.fixture(scope="module")
def workdir(demo_output, tmp_path_factory):
    out, _ = demo_output
    root = tmp_path_factory.mktemp("examples")
    shutil.copytree(out, root / "out")
    shutil.copytree(ROOT / "questionnaires", root / "questionnaires", symlinks=False)
    return root


def test_the_examples_are_found():
    # the README has classify commands and a Python block; a change of the fence format must not
    # make this test silently run nothing
    readme = [c for p, _, c in SHELL if p.name == "README.md"]
    assert any(c.startswith("skipwise classify") for c in readme)
    assert any(p.name == "README.md" for p, _, _ in PYTHON)


@pytest.mark.parametrize("path, line, command", SHELL,
                         ids=[f"{p.name}:{n}:{c.split()[1]}" for p, n, c in SHELL])
def test_shell_example(workdir, monkeypatch, path, line, command):
    monkeypatch.chdir(workdir)
    args = shlex.split(command)[1:]
    res = CliRunner().invoke(app, [*args, *(["--overwrite"] if _writes(args) else [])])
    assert res.exit_code == 0, f"{path.name}:{line}: {command}\n{res.output}"


def _writes(args: list[str]) -> bool:
    return ("--overwrite" not in args and args[0] not in ("check",)
            and any(a in ("-o", "--output", "--out") for a in args))


def test_examples_readme_quotes_the_demo_counts(demo_output):
    # examples/README.md quotes what the generator prints; the demo's own files are the reference,
    # read with pyreadstat and pandas
    import pandas as pd
    import pyreadstat

    out, _ = demo_output
    text = (ROOT / "examples" / "README.md").read_text(encoding="utf-8")
    m = re.search(r"(\d+) addresses sampled, (\d+) interviews", text)
    assert m, "examples/README.md no longer quotes the generator's counts"
    interviews, _meta = pyreadstat.read_sav(str(out / "data" / "marrowby-2026.sav"), metadataonly=True)
    n_interviews = _meta.number_rows
    n_sample = len(pd.read_parquet(out / "data" / "sample.parquet"))
    assert (int(m.group(1)), int(m.group(2))) == (n_sample, n_interviews)


@pytest.mark.parametrize("path, line, code", PYTHON, ids=[f"{p.name}:{n}" for p, n, _ in PYTHON])
def test_python_example(workdir, monkeypatch, path, line, code):
    monkeypatch.chdir(workdir)
    exec(compile(code, f"{path.name}:{line}", "exec"), {"__name__": "__docs__"})
