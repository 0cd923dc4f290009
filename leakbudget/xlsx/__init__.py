"""xlsx."""
