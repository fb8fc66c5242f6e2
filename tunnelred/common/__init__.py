"""Stage 0: what every stage shares: the error types and the array adapter."""
