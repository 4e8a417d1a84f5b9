"""Stage 6: one module per request family."""
