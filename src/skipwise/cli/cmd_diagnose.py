"""`skipwise diagnose` (not yet written)."""
