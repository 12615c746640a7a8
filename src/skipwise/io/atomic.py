"""Atomic output: write to a temporary name beside the target, then rename."""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path
from typing import Iterable, Iterator

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["atomic_output", "check_writable"]


def check_writable(path: str | Path, *, overwrite: bool = True, inputs: Iterable[str | Path] = ()) -> Path:
    """Refuse to replace an existing output unless ``overwrite`` is set, and never an input file."""
    path = Path(path)
    for source in inputs:
        if Path(source).resolve() == path.resolve():
            raise SkipwiseError(Problem(
                code=ProblemCode.OUTPUT_IS_INPUT, category=Category.USAGE, file=str(path),
                message="the output would replace an input file",
                hint="inputs are never modified: choose another output name"))
    if path.exists() and not overwrite:
        raise SkipwiseError(Problem(
            code=ProblemCode.OUTPUT_EXISTS, category=Category.USAGE, file=str(path),
            message="output file already exists",
            hint="choose another name or pass --overwrite to replace it",
        ))
    return path


@contextlib.contextmanager
def atomic_output(path: str | Path, *, overwrite: bool = True) -> Iterator[Path]:
    """Yield a temporary path in the target's folder; rename it onto ``path`` on success.

    If the body raises (or the process is interrupted), the temporary file is
    removed and any existing file at ``path`` is left untouched.
    """
    path = check_writable(path, overwrite=overwrite)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.stem}.", suffix=f".part{path.suffix}", dir=path.parent)
    os.close(fd)
    tmp_path = Path(tmp)
    try:
        yield tmp_path
        # mkstemp creates the file private (0600); give the output the usual permissions.
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp_path, 0o666 & ~umask)
        os.replace(tmp_path, path)
    finally:
        if tmp_path.exists():
            tmp_path.unlink()
