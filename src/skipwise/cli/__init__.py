"""Command line of skipwise: one small module per subcommand."""

from __future__ import annotations

from skipwise.cli.app import app, run_app

# Each module registers its command on ``app`` when imported.
from skipwise.cli import (  # noqa: F401,E402
    cmd_draft, cmd_check, cmd_classify, cmd_report, cmd_diagnose, cmd_weigh, cmd_impute, cmd_run, cmd_demo, cmd_codebook,
)


def main() -> None:
    run_app()


__all__ = ["app", "main"]
