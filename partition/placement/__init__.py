"""Placement operations: lookups, relabelling, migration plans, hashing for keys outside the graph."""
