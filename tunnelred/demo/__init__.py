"""Stage 5, demo: synthetic campaigns with known truth from a forward model."""
