"""Request-log workloads: co-access graphs, request nets, routing and held-out replay.

The path from an access log to a routing decision: :mod:`.log` reads the log
(which keys each request touched, in time order), :mod:`.coaccess` turns it
into a weighted co-access graph, :mod:`.nets` refines a partition of the keys
for the number of shards each request touches, :mod:`.routing` turns a
key→shard table into routing decisions, and :mod:`.replay` replays held-out
requests against those decisions (fan-out, load, LRU cache hits).
:mod:`.synthetic` generates seeded workloads of an invented scenario.
"""
