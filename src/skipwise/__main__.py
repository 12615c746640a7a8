"""``python -m skipwise``."""

from skipwise.cli import main

main()
