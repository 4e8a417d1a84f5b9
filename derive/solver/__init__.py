"""Stage 3: the circuit stamped into an exact sparse polynomial system and solved (Cramer ratios)."""
