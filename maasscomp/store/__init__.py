"""Stage: store."""
