"""Stage 6, live: reduce and flag runs while the test is still running."""
