"""``python -m skipwise``."""

from skipwise.cli import main

if __name__ == "__main__":  # worker processes of a local cluster import this module again
    main()
