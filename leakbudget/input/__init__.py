"""input."""
