"""`skipwise weigh` (not yet written)."""
