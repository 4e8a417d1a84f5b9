"""Stage 2: the sheet model built into a validated, flattened circuit."""
