"""`skipwise demo` (not yet written)."""
