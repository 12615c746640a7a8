"""Atomic output (kept for its callers): the publisher in :mod:`skipwise.publish` does the work."""

from __future__ import annotations

from skipwise.publish import check_writable, publish_file as atomic_output, publish_files

__all__ = ["atomic_output", "check_writable", "publish_files"]
