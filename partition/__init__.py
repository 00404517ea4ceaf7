"""Shardline: balanced graph partitioning for placing related items on k shards.

The package reads top-down as the pipeline: input (``edgelist``, ``graph``) →
affinity → hierarchy → embedding → cut → refine → score → export.
"""

__version__ = "0.1.0"

from partition.errors import InputError, ParameterError, ShardlineError  # noqa: E402
from partition.graph import Graph  # noqa: E402

__all__ = ["Graph", "InputError", "ParameterError", "ShardlineError", "__version__"]
