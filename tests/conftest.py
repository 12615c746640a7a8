"""Shared fixtures: the demo's output, built once per test session."""

from __future__ import annotations

import pytest
from typer.testing import CliRunner


@pytest.fixture(scope="session")
def demo_output(tmp_path_factory):
    """``skipwise demo --out DIR`` run once: (DIR, the command's output).

    Tests must not modify the folder (copy what they change).
    """
    from skipwise.cli import app

    out = tmp_path_factory.mktemp("demo-session")
    result = CliRunner().invoke(app, ["demo", "--out", str(out)])
    assert result.exit_code == 0, result.output
    return out, result.output
