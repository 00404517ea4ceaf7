"""Refinement of a balanced partition; every step keeps the balance rule.

Steps work in rounds of independent units (disjoint shard pairs, or disjoint
windows of the line); a unit's decisions depend only on the state at the start
of the round, so running the units one after another (in-memory engine) or in
parallel tasks (Spark engine) gives the same answer.
"""
