"""Stage: spectrum."""
