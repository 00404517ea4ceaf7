"""Shardline: balanced graph partitioning for placing related items on k shards.

The package reads top-down as the pipeline: input (``edgelist``, ``graph``) →
affinity → hierarchy → embedding → cut → refine → score → export.
"""

__version__ = "0.1.0"

from partition.errors import InputError, ParameterError, ShardlineError  # noqa: E402

__all__ = ["Graph", "InputError", "ParameterError", "ShardlineError", "__version__"]


def __getattr__(name):
    # ``partition.Graph`` on first use, so that importing the package (and
    # ``shardline --version``) does not load numpy and scipy.
    if name == "Graph":
        from partition.graph import Graph

        return Graph
    raise AttributeError(f"module 'partition' has no attribute {name!r}")
