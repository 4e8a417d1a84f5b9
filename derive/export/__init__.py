"""Stage 7: records (JSON, Markdown, LaTeX/PDF), code, plots, files."""
