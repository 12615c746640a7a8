"""`skipwise report` (not yet written)."""
