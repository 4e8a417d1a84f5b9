"""Stage 5: derivation steps and their verification."""
