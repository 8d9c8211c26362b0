"""Stage: pipeline."""
