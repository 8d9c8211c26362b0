"""Stage: special."""
