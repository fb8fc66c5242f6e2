"""Stage 3, engine: one run end to end and its quality flags."""
