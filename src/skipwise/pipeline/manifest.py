"""The manifest of a hand-over package: what went in, what came out, how, so a run can be checked.

``manifest.json`` records the skipwise version (and of the libraries doing the
work), the SHA-256 and size of every input and output, the plan as resolved
(absolute paths, defaults filled in), the seeds, and the time of each step.
"""

from __future__ import annotations

import hashlib
import json
import platform
from dataclasses import dataclass
from importlib import metadata
from pathlib import Path
from typing import Any, Iterable, Mapping

from skipwise import __version__

__all__ = ["sha256_file", "file_record", "StepRecord", "build_manifest", "manifest_text", "MANIFEST_FORMAT"]

MANIFEST_FORMAT = 1
_LIBRARIES = ("pandas", "numpy", "scipy", "statsmodels", "pyreadstat", "pyarrow", "openpyxl", "pyyaml")


def sha256_file(path: str | Path, *, chunk: int = 1 << 20) -> str:
    """Hex SHA-256 of a file, read in chunks (large survey files never sit in memory twice)."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(chunk), b""):
            h.update(block)
    return h.hexdigest()


def file_record(role: str, path: Path, *, name: str | None = None) -> dict[str, Any]:
    """``{role, file, bytes, sha256}`` of one file; ``name`` overrides the recorded file name."""
    return {"role": role, "file": name or str(path), "bytes": path.stat().st_size, "sha256": sha256_file(path)}


@dataclass(frozen=True, kw_only=True)
class StepRecord:
    """One step of a run: its name, whether it ran, and how long it took."""

    step: str
    status: str          # "done", "skipped" or "failed"
    seconds: float
    detail: str = ""


def _versions() -> dict[str, str]:
    out = {"skipwise": __version__, "python": platform.python_version()}
    for lib in _LIBRARIES:
        try:
            out[lib] = metadata.version(lib)
        except metadata.PackageNotFoundError:  # pragma: no cover - all are dependencies
            out[lib] = "not installed"
    return out


def build_manifest(*, plan: Mapping[str, Any], inputs: Iterable[Mapping[str, Any]],
                   outputs: Iterable[Mapping[str, Any]], steps: Iterable[StepRecord],
                   seeds: Mapping[str, Any], started: str, finished: str,
                   summary: Mapping[str, Any] | None = None) -> dict[str, Any]:
    """The manifest document (plain JSON values)."""
    return {
        "skipwise_manifest": MANIFEST_FORMAT,
        "skipwise_version": __version__,
        "versions": _versions(),
        "command": f"skipwise run {plan['file']}",
        "started": started,
        "finished": finished,
        "plan": dict(plan),
        "seeds": dict(seeds),
        "steps": [vars(s) | {"seconds": round(s.seconds, 3)} for s in steps],
        "inputs": list(inputs),
        "outputs": list(outputs),
        "summary": dict(summary or {}),
        "note": "Output file names are relative to the package folder (plan.output.folder). "
                "Check a file with: sha256sum FILE. The files hold respondents' answers.",
    }


def manifest_text(doc: Mapping[str, Any]) -> str:
    return json.dumps(doc, indent=2, ensure_ascii=False, default=str) + "\n"
