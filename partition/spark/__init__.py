"""The Spark engine: the in-memory partitioner's pipeline as Spark jobs, with identical results.

Importing this package does not import pyspark (the modules below do), but it
checks that pyspark and pandas are installed: they are the optional extra
``spark`` (``pip install 'shardline[spark]'``), and without them any use of
the engine stops with a :class:`~partition.errors.ParameterError` saying so.
"""

from importlib.util import find_spec as _find_spec

from partition.errors import ParameterError as _ParameterError

SPARK_EXTRA_HINT = "pip install 'shardline[spark]'"

_missing = [name for name in ("pyspark", "pandas") if _find_spec(name) is None]
if _missing:
    raise _ParameterError(
        f"the Spark engine needs {' and '.join(_missing)}, which the base install leaves out; "
        f"install them with: {SPARK_EXTRA_HINT}"
    )
