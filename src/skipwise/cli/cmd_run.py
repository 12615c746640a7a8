"""`skipwise run` (not yet written)."""
