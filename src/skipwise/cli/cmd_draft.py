"""`skipwise draft` (not yet written)."""
