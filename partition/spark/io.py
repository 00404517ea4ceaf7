"""Read edge lists with Spark and normalise them exactly like :func:`partition.graph.build_graph`.

Input: text edge lists (one ``u v`` or ``u v w`` pair a line; blanks, tabs,
commas or semicolons between fields; lines whose first non-blank character is
``#`` or ``%`` are comments; gzip/bzip2 by Spark's codecs), CSV/TSV and Parquet
(the first two columns, or named ones, and a weight column). A node-weights
file holds ``id weight`` text rows. The reading rules are those of
:mod:`partition.edgelist`, decided by the same code where it can run on the
driver (delimiter sniffing, column choice) and by the same tests in Spark SQL
otherwise: ids follow :mod:`partition.ids` (integers only when every id is a
canonical int64, tested with :func:`partition.ids.CANONICAL_INT_SQL`, else
strings kept byte for byte), a line that is not UTF-8 is an error naming it
(``is_valid_utf8``), and the header rule is the same. Normalisation follows
the in-memory builder: dense ids in sorted id order
(integer ids: sorted on the driver, which holds O(n) arrays anyway, and found
per edge by binary search in a broadcast copy; string ids: a range-partitioned
rank, :func:`partition.spark.frames.dense_rank`, and joins); edges
undirected with ``u < v``; self-loops dropped (their node kept); repeated pairs
merged (weights summed, unweighted pairs counted once). A malformed line raises
:class:`partition.errors.InputError` naming the file and the line.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

import numpy as np
import pandas as pd

from partition.edgelist import decode_delimiter, is_number, pick_columns, sniff_delimiter
from partition.errors import InputError
from partition.ids import CANONICAL_INT_SQL
from partition.spark.frames import dense_rank, to_numpy

__all__ = ["SparkGraph", "read_graph_df", "collect_graph", "detect_format"]


@dataclass(eq=False)
class SparkGraph:
    """A normalised graph held in Spark.

    Attributes
    ----------
    edges : DataFrame
        ``u < v`` (long) dense ids, ``w`` (double, 1.0 when unweighted): each
        undirected edge once.
    nodes : DataFrame
        ``node`` (long, dense id) and ``id`` (user id, long or string).
    n, m : int
    weighted : bool
    node_weights : DataFrame or None
        ``node``, ``weight`` (long).
    id_kind : {"int", "str"}
    source : str
    """

    edges: object
    nodes: object
    n: int
    m: int
    weighted: bool
    node_weights: object
    id_kind: str
    source: str


def detect_format(path, fmt="auto"):
    """The input format: folders of Parquet parts are ``"parquet"``, else as :func:`partition.edgelist.detect_format`."""
    from partition.edgelist import detect_format as by_name  # noqa: F811 - the in-memory rule for files

    if fmt != "auto":
        return by_name(path, fmt)
    p = str(path).rstrip("/")
    if os.path.isdir(p) and any(f.endswith(".parquet") for f in os.listdir(p)):
        return "parquet"
    return by_name(p)


class _Source:
    """A file Spark reads, with rows numbered cheaply and line numbers found on demand.

    Rows carry ``key`` = ``monotonically_increasing_id()`` taken at the scan
    (partition index in the upper bits, row within the partition below): it
    costs nothing in the JVM and orders rows as the file does, since Spark keeps
    a file's splits in file order. Only when a row is at fault does
    :meth:`error` turn its key into a 1-based line (text) or row (Parquet)
    number of its file: one aggregation counts the rows of every (partition,
    file) and the rows of the file's earlier partitions give the offset.
    """

    def __init__(self, spark, path, kind="text"):
        self.spark, self.path, self.kind = spark, str(path), kind

    def read(self):
        from pyspark.sql import functions as F

        try:
            if self.kind == "parquet":
                df = self.spark.read.parquet(self.path)
            else:
                df = self.spark.read.text(self.path).withColumnRenamed("value", "line")
        except Exception as exc:  # noqa: BLE001
            raise InputError(self.path, f"cannot read: {exc}".splitlines()[0]) from exc
        return df.withColumn("key", F.monotonically_increasing_id())

    def locate(self, key):
        """``(file, number)`` of the row with ``key``: the file Spark read it from and its 1-based number."""
        from pyspark.sql import functions as F

        key = int(key)
        df = self.read().select("key", F.input_file_name().alias("file"))
        groups = (df.groupBy(F.shiftright("key", 33).alias("pid"), "file")
                    .agg(F.count("*").alias("n"), F.min("key").alias("first")).collect())
        pid = key >> 33
        for g in groups:
            if g["pid"] == pid and g["first"] <= key < g["first"] + g["n"]:
                before = sum(h["n"] for h in groups if h["file"] == g["file"] and h["pid"] < pid)
                return g["file"], before + key - g["first"] + 1
        return None, None

    def error(self, message, key):
        """:class:`InputError` naming the file and line of the row with ``key``."""
        file, line = self.locate(key)
        where = self.path
        if file is not None and os.path.isdir(self.path):
            where = file[len("file:"):] if file.startswith("file:") else file
        return InputError(where, message, line)


def _first(df, col="key"):
    """The smallest ``col`` of ``df`` or ``None`` (the first faulty row in file order)."""
    from pyspark.sql import functions as F

    got = df.agg(F.min(col).alias("x")).collect()[0]["x"]
    return None if got is None else int(got)


def _data_lines(src, leading_comments=False):
    """Non-blank, non-comment lines of a text source: ``line`` (text) and ``key`` (see :class:`_Source`).

    With ``leading_comments`` (CSV/TSV, as :mod:`partition.edgelist` reads
    them) only the comment lines above the first data line are comments;
    below it a line starting with ``#`` or ``%`` is a row.
    """
    from pyspark.sql import functions as F

    df = src.read()
    t = F.trim(F.col("line"))
    comment = F.substring(t, 1, 1).isin("#", "%")
    df = df.filter(F.length(t) > 0)
    if leading_comments:
        first = _first(df.filter(~comment))
        df = df.filter(~comment | (F.col("key") > F.lit(-1 if first is None else first)))
    else:
        df = df.filter(~comment)
    # the UTF-8 test reads the raw bytes: regexp_replace (and split) decode to Java strings, which
    # would turn a bad byte into U+FFFD and make the line look valid
    return df.select(F.regexp_replace("line", "\r$", "").alias("line"), "key",
                     F.is_valid_utf8("line").alias("utf8"))


def _csv_fields(src, delim, header, wanted, weighted, kind):
    """CSV/TSV rows as ``s``, ``d`` (strings), ``key`` and ``w`` (double) when weighted.

    Follows :func:`partition.edgelist.read_graph` on CSV/TSV: comment and blank
    lines skipped, the first remaining line is the header (unless ``header`` is
    false: columns ``1, 2, 3, ...``), columns picked by name or position,
    quoted fields allowed; a row with another number of fields, or an empty
    value in a picked column, is an error naming its line.
    """
    import csv
    import io
    import re

    from pyspark.sql import functions as F

    path = src.path
    lines = _data_lines(src, leading_comments=True)
    _refuse_invalid_utf8(src, lines)
    first = lines.orderBy("key").limit(5).collect()
    if not first:
        raise InputError(path, "the file is empty")
    delim = delim or sniff_delimiter([r["line"] for r in first], kind)
    head = next(csv.reader(io.StringIO(first[0]["line"]), delimiter=delim))
    width = len(head)
    if header is None and width and all(is_number(f) for f in head):
        raise src.error(f"the first row {first[0]['line'].strip()[:80]!r} looks like data, not a header: pass "
                        "--no-header to read it as data (or --header if it names the columns)", first[0]["key"])
    names = [h.strip() for h in head] if header is not False else [str(i + 1) for i in range(width)]
    chosen = pick_columns(path, names, wanted, weighted, 3, delim)
    body = lines.filter(F.col("key") != first[0]["key"]) if header is not False else lines
    plain = ~F.col("line").contains('"')
    bad = body.filter(plain & (F.size(F.split("line", re.escape(delim))) != width))
    got = _first(bad)
    if got is not None:
        raise src.error(f"malformed row: expected {width} fields", got)
    schema = ", ".join(f"`c{i}` string" for i in range(width))
    # RFC 4180: a quote inside a quoted field is doubled (Spark's CSV escape is a backslash unless told)
    parsed = body.select(F.from_csv("line", schema, {"sep": delim, "escape": '"'}).alias("r"), "key")
    idx = [names.index(c) for c in chosen]
    cols = [F.col(f"r.c{idx[0]}").alias("s"), F.col(f"r.c{idx[1]}").alias("d"), "key"]
    if weighted:
        cols.append(F.expr(f"try_cast(r.c{idx[2]} as double)").alias("w"))
    raw = parsed.select(*cols)
    for c, name in (("s", chosen[0]), ("d", chosen[1])):
        empty = _first(raw.filter(F.col(c).isNull() | (F.col(c) == "")))
        if empty is not None:
            raise src.error(f"empty value in column {name!r}", empty)
    return raw


def _text_fields(src, need, delimiter=None):
    """Data lines of a text source as ``f`` (fields array) and ``key`` (see :class:`_Source`).

    Fields are split on runs of blanks, tabs, commas and semicolons (or on the
    given delimiter), as the in-memory reader's line parser does.
    """
    import re

    from pyspark.sql import functions as F

    lines = _data_lines(src)
    split = r"[\s,;]+" if delimiter is None else (rf"\s*{re.escape(delimiter)}\s*" if delimiter.strip() else r"\s+")
    df = lines.select(F.array_remove(F.split(F.trim("line"), split), "").alias("f"), "key", "line", "utf8")
    bad = df.filter((F.size("f") != need) | ~F.col("utf8")).agg(F.min_by("line", "key").alias("line"),
                                                                          F.min("key").alias("key")).collect()[0]
    if bad["key"] is not None:
        _refuse_invalid_utf8(src, lines.filter(F.col("key") == bad["key"]))
        found = len([f for f in re.split(split, (bad["line"] or "").strip()) if f])
        hint = "; pass --weighted to read the third field as an edge weight" if need == 2 and found == 3 else ""
        raise src.error(f"expected {need} fields, found {found}: {bad['line'].strip()[:80]!r}{hint}", bad["key"])
    return df.drop("line", "utf8")


def _refuse_invalid_utf8(src, lines):
    """The first line of ``lines`` that is not valid UTF-8, as an error naming it (Spark keeps the raw bytes)."""
    from pyspark.sql import functions as F

    bad = _first(lines.filter(~F.col("utf8")))
    if bad is not None:
        raise src.error("is not valid UTF-8 text; ids must be UTF-8 text", bad)


def _text_header(src, raw, header, weighted, canon):
    """The header rule on a text edge list: skip the first line (``header``) or refuse one that looks like a header.

    As :mod:`partition.edgelist`: with ``header`` unset, a first line whose
    ids are not canonical integers above lines whose ids all are (or whose
    weight is not a number above lines whose weights all are) stops the read.
    """
    from pyspark.sql import functions as F

    if header:
        return raw.filter(F.col("key") != _first(raw))
    bad_ids = ~(canon("s") & canon("d"))
    checks = [bad_ids] + ([F.col("w").isNull()] if weighted else [])
    aggs = [F.min("key").alias("first")]
    for i, cond in enumerate(checks):
        aggs += [F.sum(cond.cast("long")).alias(f"n{i}"), F.min(F.when(cond, F.col("key"))).alias(f"k{i}")]
    got = raw.agg(*aggs, F.count("*").alias("rows")).collect()[0]
    if got["rows"] > 1 and any(got[f"n{i}"] == 1 and got[f"k{i}"] == got["first"] for i in range(len(checks))):
        first = raw.filter(F.col("key") == got["first"]).collect()[0]
        shown = " ".join(str(first[c]) for c in ("s", "d"))
        raise src.error(f"the first line {shown!r} looks like a header (every later line is numeric): pass "
                        "--header to skip it, or --no-header to read it as data", got["first"])
    return raw


def _weights_ok(src, df, col, what="weight", integer=False):
    from pyspark.sql import functions as F

    v = F.col(col)
    cond = v.isNull() | F.isnan(v) | (v < 0) | (v == float("inf"))
    if integer:
        cond = cond | (v != F.floor(v))
    bad = _first(df.filter(cond))
    if bad is not None:
        kind = "a non-negative integer" if integer else "a finite number >= 0"
        raise src.error(f"{what} must be {kind}", bad)


def read_graph_df(spark, path, fmt="auto", weighted=False, source_column=None, target_column=None,
                  weight_column=None, node_weights=None, allow_isolated=False, header=None, delimiter=None):
    """Read and normalise an edge list into a :class:`SparkGraph`.

    Parameters
    ----------
    spark : pyspark.sql.SparkSession
    path : str
        Any path Spark reads (file or folder).
    fmt : {"auto", "text", "csv", "tsv", "parquet"}
    weighted : bool
        Read a weight (third field, or ``weight_column``).
    source_column, target_column, weight_column : str or None
        CSV/TSV/Parquet column names (default: the first two, then the third).
    node_weights : str or None
        Text file of ``id weight`` rows (non-negative integers), or a Parquet
        table with the columns ``id`` and ``weight``.
    allow_isolated : bool
        Ids of the node-weights file without edges become isolated nodes.
    header : bool or None
        Whether the first data line is a header; ``None``: the header rule of
        :mod:`partition.edgelist`.
    delimiter : str or None
        Field delimiter (default: as :mod:`partition.edgelist` detects it).

    Returns
    -------
    SparkGraph

    Raises
    ------
    InputError
        Malformed lines, bad weights, an empty graph, node-weights problems;
        the message names the file and line.
    """
    from pyspark.sql import functions as F

    if weight_column is not None:
        weighted = True
    fmt = detect_format(path, fmt)
    delimiter = decode_delimiter(delimiter)
    canon = lambda c: F.expr(CANONICAL_INT_SQL(c))  # noqa: E731
    if fmt == "text":
        src = _Source(spark, path)
        df = _text_fields(src, 3 if weighted else 2, delimiter)
        cols = [F.col("f")[0].alias("s"), F.col("f")[1].alias("d"), "key"]
        if weighted:
            cols.append(F.expr("try_cast(f[2] as double)").alias("w"))
        raw = df.select(*cols)
        if header is not False:
            raw = _text_header(src, raw, header, weighted, canon)
    elif fmt in ("csv", "tsv"):
        src = _Source(spark, path)
        raw = _csv_fields(src, delimiter, header, [source_column, target_column, weight_column], weighted, fmt)
    else:
        src = _Source(spark, path, "parquet")
        pq = src.read()
        names = [c for c in pq.columns if c != "key"]
        need = 3 if weighted else 2
        if len(names) < need and (source_column is None or target_column is None):
            raise InputError(path, f"expected at least {need} columns, found {len(names)}")
        chosen = [source_column or names[0], target_column or names[1]]
        if weighted:
            chosen.append(weight_column or names[2])
        for c in chosen:
            if c not in names:
                raise InputError(path, f"no column named {c!r} (columns: {', '.join(names)})")
        kinds = dict(pq.dtypes)
        for c, label in zip(chosen[:2], ("source", "target")):
            if kinds[c] in ("float", "double") or kinds[c].startswith("decimal") and not kinds[c].endswith(",0)"):
                raise InputError(path, f"the {label} column holds floating-point numbers; ids must be integers "
                                       "or text")
        cols = [F.col(chosen[0]).cast("string").alias("s"), F.col(chosen[1]).cast("string").alias("d"), "key"]
        if weighted:
            cols.append(F.col(chosen[2]).cast("double").alias("w"))
        raw = pq.select(*cols)
        nulls = _first(raw.filter(F.col("s").isNull() | F.col("d").isNull()))
        if nulls is not None:
            raise src.error("null node id", nulls)
    if weighted:
        _weights_ok(src, raw, "w")
    raw = raw.drop("key").localCheckpoint()

    nw = None
    if node_weights is not None and detect_format(node_weights) == "parquet":  # a table of id, weight
        nws = _Source(spark, node_weights, "parquet")
        tab = nws.read()
        if "id" not in tab.columns or "weight" not in tab.columns:
            raise InputError(node_weights, f"a node-weights table needs the columns id and weight "
                                           f"(columns: {', '.join(c for c in tab.columns if c != 'key')})")
        nw = tab.select(F.col("id").cast("string").alias("s"), F.col("weight").cast("double").alias("wt"), "key")
        _weights_ok(nws, nw, "wt", "node weight", integer=True)
        nw = nw.localCheckpoint()
    elif node_weights is not None:
        nws = _Source(spark, node_weights)
        nwf = _text_fields(nws, 2)
        nw = nwf.select(F.col("f")[0].alias("s"), F.expr("try_cast(f[1] as double)").alias("wt"), "key")
        _weights_ok(nws, nw, "wt", "node weight", integer=True)
        nw = nw.localCheckpoint()

    id_cols = [raw.select(F.col("s").alias("id")), raw.select(F.col("d").alias("id"))]
    if nw is not None:
        id_cols.append(nw.select(F.col("s").alias("id")))
    allids = id_cols[0]
    for extra in id_cols[1:]:
        allids = allids.unionByName(extra)
    non_int = allids.filter(~canon("id")).limit(1).count()
    id_kind = "str" if non_int else "int"
    extra = ["w"] if weighted else []
    if id_kind == "int":
        # integer ids: the sorted distinct ids go to the driver (O(n), like the engine's other node arrays)
        # and every edge finds its dense ids by binary search in a broadcast copy — no joins over the edges
        got = allids.select(F.expr("cast(id as bigint)").alias("id")).distinct().toPandas()["id"]
        ids = np.sort(got.to_numpy(np.int64))
        n = int(ids.shape[0])
        if n == 0:
            raise InputError(path, "the graph is empty: no edges were found")
        nodes = spark.createDataFrame(pd.DataFrame({"node": np.arange(n, dtype=np.int64), "id": ids}))
        bids = spark.sparkContext.broadcast(ids)

        def dense(batches):
            table = bids.value
            for pdf in batches:
                a = np.searchsorted(table, pdf["sid"].to_numpy(np.int64))
                b = np.searchsorted(table, pdf["did"].to_numpy(np.int64))
                keep = a != b
                out = pd.DataFrame({"u": np.minimum(a, b)[keep], "v": np.maximum(a, b)[keep]})
                if weighted:
                    out["w"] = pdf["w"].to_numpy(np.float64)[keep]
                yield out

        conv = lambda c: F.expr(f"cast({c} as bigint)")  # noqa: E731
        e = raw.select(conv("s").alias("sid"), conv("d").alias("did"), *extra).mapInPandas(
            dense, "u long, v long" + (", w double" if weighted else ""))
    else:
        allids = allids.distinct().localCheckpoint()
        nodes = dense_rank(allids, "id", "node").select("node", "id").localCheckpoint()
        n = nodes.count()
        if n == 0:
            raise InputError(path, "the graph is empty: no edges were found")
        conv = lambda c: F.col(c)  # noqa: E731
        e = raw.select(F.col("s").alias("sid"), F.col("d").alias("did"), *extra)
        nmap = nodes.select("id", "node")
        e = (e.join(nmap.withColumnRenamed("id", "sid").withColumnRenamed("node", "a"), "sid")
              .join(nmap.withColumnRenamed("id", "did").withColumnRenamed("node", "b"), "did"))
        e = e.filter(F.col("a") != F.col("b")).select(
            F.least("a", "b").alias("u"), F.greatest("a", "b").alias("v"), *extra)
    if weighted:
        e = e.groupBy("u", "v").agg(F.sum("w").alias("w"))
    else:
        e = e.distinct().withColumn("w", F.lit(1.0))
    edges = e.localCheckpoint()
    m = edges.count()

    nwdf = None
    if nw is not None:
        nwdf = nw.select(conv("s").alias("id"), F.col("wt").cast("long").alias("weight"), "key")
        nwdf = nodes.join(nwdf, "id", "left")
        missing = nwdf.filter(F.col("weight").isNull()).select("id").limit(5).collect()
        if missing:
            raise InputError(node_weights, f"node(s) of the edge list have no weight in the node-weights file "
                                           f"(first: {', '.join(str(r['id']) for r in missing)})")
        if not allow_isolated:
            ends = raw.select(conv("s").alias("id")).unionByName(raw.select(conv("d").alias("id"))).distinct()
            extra = nwdf.join(ends, "id", "left_anti").select("id", "key").orderBy("key").limit(1).collect()
            if extra:
                raise nws.error(f"unknown node {extra[0]['id']!r} (not in the edge list)", extra[0]["key"])
        nwdf = nwdf.groupBy("node").agg(F.sum("weight").alias("weight")).localCheckpoint()
    return SparkGraph(edges=edges, nodes=nodes, n=int(n), m=int(m), weighted=bool(weighted),
                      node_weights=nwdf, id_kind=id_kind, source=str(path))


def node_ids(sg):
    """The user ids in dense-id order, as a numpy array (int64 or object)."""
    ids = to_numpy(sg.nodes, ["node", "id"], sort=["node"])["id"]
    return ids.astype(np.int64) if sg.id_kind == "int" else ids.astype(object)


def node_weight_array(sg):
    """Node weights by dense id (int64), or ``None`` for unit weights."""
    if sg.node_weights is None:
        return None
    got = to_numpy(sg.node_weights, ["node", "weight"], sort=["node"])
    out = np.zeros(sg.n, dtype=np.int64)
    out[got["node"].astype(np.int64)] = got["weight"].astype(np.int64)
    return out


def collect_graph(sg):
    """Collect a :class:`SparkGraph` into an in-memory :class:`partition.graph.Graph` (for the driver)."""
    from partition.graph import build_graph

    e = to_numpy(sg.edges, ["u", "v", "w"], sort=["u", "v"])
    g = build_graph(e["u"].astype(np.int64), e["v"].astype(np.int64),
                    weights=e["w"].astype(np.float64) if sg.weighted else None, ids=node_ids(sg),
                    source=sg.source)
    g.node_weights = node_weight_array(sg)
    return g
