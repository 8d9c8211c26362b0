"""Stage: hejhal."""
