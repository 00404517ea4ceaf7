"""The Spark engine: the in-memory partitioner's pipeline as Spark jobs, with identical results.

Importing this package does not import pyspark; the modules below do, so
``import partition`` keeps working where Spark is not installed.
"""
