"""Stage 4: exact results in their best closed form (expanded, series-parallel, elimination sequence)."""
