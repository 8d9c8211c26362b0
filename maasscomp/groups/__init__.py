"""Stage: groups."""
