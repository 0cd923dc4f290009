"""planner.packing."""
