"""Stage 1: sheet text -> parse tree -> sheet model (grammar, parser, units, expressions)."""
