"""Placement operations: lookups, relabelling, migration plans, hashing for keys outside the graph."""

from partition.placement.bounded_hash import (  # noqa: E402,F401
    BoundedLoadRing,
    bounded_assign,
    consistent_assign,
    mod_assign,
)
