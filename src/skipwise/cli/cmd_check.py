"""`skipwise check` (not yet written)."""
