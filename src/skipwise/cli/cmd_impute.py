"""`skipwise impute` (not yet written)."""
