"""Stage: supnorm."""
