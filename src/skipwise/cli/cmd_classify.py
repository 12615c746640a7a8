"""`skipwise classify` (not yet written)."""
