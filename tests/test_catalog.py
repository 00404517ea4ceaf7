"""Tests for partition/catalog.py, datasets/catalog.json and the ``datasets`` subcommand."""

from __future__ import annotations

import functools
import gzip
import hashlib
import io
import json
import struct
import tarfile
import threading
from http.server import SimpleHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
import scipy.io
import scipy.sparse as sp

from partition import catalog
from partition.catalog import (
    degrees_sha256, edges_sha256, fetch, file_sha256, get_dataset, list_datasets, load_catalog, read_pairs,
)
from partition.errors import InputError, ParameterError

from conftest import SHARED, SHARED_MISSING, shared_graph_rows  # noqa: E402
needs_shared = pytest.mark.skipif(not SHARED.is_dir(), reason=SHARED_MISSING)


# ----------------------------------------------------------------------------
# independent reference implementations of the checksum definitions
# ----------------------------------------------------------------------------
def ref_edges_sha256(pairs):
    """sha256 of sorted distinct (min, max) pairs, u != v, packed as little-endian int64."""
    canon = sorted({(min(u, v), max(u, v)) for u, v in pairs if u != v})
    return hashlib.sha256(b"".join(struct.pack("<qq", u, v) for u, v in canon)).hexdigest()


def ref_degrees_sha256(graph):
    """sha256 of the sorted degree sequence (self-loops removed) as little-endian int64."""
    g = nx.Graph(graph)
    g.remove_edges_from(list(nx.selfloop_edges(g)))
    degs = sorted(d for _, d in g.degree())
    return hashlib.sha256(struct.pack(f"<{len(degs)}q", *degs)).hexdigest()


def catalog_md_rows():
    """(file, nodes, edges, sha256 prefix) from the graph table of the shared folder's CATALOG.md."""
    return shared_graph_rows()


# ----------------------------------------------------------------------------
# the catalog file
# ----------------------------------------------------------------------------
def test_catalog_entries_are_complete():
    entries = load_catalog()
    assert len(entries) == 17
    names = [e["name"] for e in entries]
    assert len(set(names)) == len(names)
    for e in entries:
        assert e["url"].startswith(("https://snap.stanford.edu/data/", "https://sparse.tamu.edu/MM/"))
        assert e["url_from_memory"] is True
        assert e["citation"] and e["license"]
        assert all(len(e[k]) == 64 for k in ("file_sha256", "edges_sha256", "degrees_sha256"))
        if e["upstream_format"] == "matrix-market.tar.gz":
            assert e["upstream_member"].endswith(".mtx")
        for ref in e["reference"]:
            assert ref.get("citation")  # every published figure names its source
    assert [e["name"] for e in list_datasets()] == sorted(names, key=str.lower)


@needs_shared
def test_catalog_matches_shared_catalog_md():
    # Expected counts and sha256 prefixes: the table of ../shared/datasets/CATALOG.md.
    rows = catalog_md_rows()
    assert len(rows) == 17
    entries = {e["file"]: e for e in load_catalog()}
    assert set(entries) == set(rows)
    for name, (nodes, edges, prefix) in rows.items():
        e = entries[name]
        assert (e["nodes"], e["edges"]) == (nodes, edges), name
        assert e["file_sha256"].startswith(prefix), name


@needs_shared
def test_file_sha256_matches_shared_files():
    for e in load_catalog():
        assert file_sha256(SHARED / e["file"]) == e["file_sha256"], e["name"]


@needs_shared
def test_edge_and_degree_checksums_recomputed_from_shared_files():
    for e in load_catalog():
        raw = (SHARED / e["file"]).read_bytes()
        src, dst = read_pairs(gzip.decompress(raw) if raw[:2] == b"\x1f\x8b" else raw, e["file"])
        assert edges_sha256(src, dst) == e["edges_sha256"], e["name"]
        assert degrees_sha256(src, dst) == e["degrees_sha256"], e["name"]


@needs_shared
@pytest.mark.parametrize("name", ["email-Eu-core", "minnesota", "USPowerGrid", "3elt", "facebook_combined"])
def test_checksums_agree_with_networkx_reading(name):
    # networkx.read_edgelist parses the file independently; the reference hashes above
    # implement the catalog's published definitions in plain Python.
    e = get_dataset(name)
    g = nx.read_edgelist(SHARED / e["file"], nodetype=int, data=False)
    assert ref_edges_sha256(g.edges()) == e["edges_sha256"]
    assert ref_degrees_sha256(g) == e["degrees_sha256"]
    g.remove_edges_from(list(nx.selfloop_edges(g)))
    assert (g.number_of_nodes(), g.number_of_edges()) == (e["nodes"], e["edges"])


def test_edges_sha256_definition_on_a_small_example():
    src = np.array([2, 2, 3, 3, 5])
    dst = np.array([1, 3, 2, 3, 1])
    # distinct undirected pairs without the self-loop: (1,2), (1,5), (2,3), in sorted order
    want = hashlib.sha256(struct.pack("<6q", 1, 2, 1, 5, 2, 3)).hexdigest()
    assert edges_sha256(src, dst) == want
    assert edges_sha256(dst[::-1], src[::-1]) == want
    # degrees: node 1 -> 2, node 2 -> 2, node 3 -> 1, node 5 -> 1 (self-loop not counted)
    assert degrees_sha256(src, dst) == hashlib.sha256(struct.pack("<4q", 1, 1, 2, 2)).hexdigest()
    with pytest.raises(ParameterError):
        edges_sha256(np.array(["a"], dtype=object), np.array(["b"], dtype=object))


def test_read_pairs_names_the_bad_line():
    src, dst = read_pairs(b"# c\n1\t2\t-1\n3\t4\t0\n", "x")
    assert src.tolist() == [1, 3] and dst.tolist() == [2, 4]
    with pytest.raises(InputError, match=r"x, line 3"):
        read_pairs(b"# c\n1 2\n3 four\n", "x")


def test_unknown_name_lists_the_catalog():
    with pytest.raises(ParameterError, match="wiki-Vote"):
        get_dataset("no-such-graph")


def test_bad_catalog_file(tmp_path):
    bad = tmp_path / "c.json"
    bad.write_text('{"datasets": [{"name": "x"}]}')
    with pytest.raises(InputError, match="lacks"):
        load_catalog(bad)
    bad.write_text("{not json")
    with pytest.raises(InputError, match="line 1"):
        load_catalog(bad)


# ----------------------------------------------------------------------------
# fetch from a local folder
# ----------------------------------------------------------------------------
@needs_shared
def test_fetch_from_local_folder(tmp_path):
    got = fetch("minnesota", tmp_path / "out", from_dir=SHARED)
    assert got.path == tmp_path / "out" / "minnesota.txt.gz"
    assert got.path.read_bytes() == (SHARED / "minnesota.txt.gz").read_bytes()
    assert "sha256" in got.checked


def test_fetch_from_local_folder_checksum_mismatch_leaves_nothing(tmp_path):
    entry = dict(get_dataset("minnesota"))
    src_dir, out = tmp_path / "src", tmp_path / "out"
    src_dir.mkdir()
    (src_dir / entry["file"]).write_bytes(b"1 2\n2 3\n")
    with pytest.raises(InputError, match="does not match"):
        fetch("minnesota", out, from_dir=src_dir)
    assert not out.exists() or list(out.iterdir()) == []
    with pytest.raises(InputError, match="no such file"):
        fetch("minnesota", out, from_dir=tmp_path / "empty")


# ----------------------------------------------------------------------------
# download from a local HTTP server (127.0.0.1 only, stopped after each test)
# ----------------------------------------------------------------------------
class _QuietHandler(SimpleHTTPRequestHandler):
    def log_message(self, *args):
        pass


@pytest.fixture
def server(tmp_path):
    root = tmp_path / "www"
    root.mkdir()
    httpd = ThreadingHTTPServer(("127.0.0.1", 0), functools.partial(_QuietHandler, directory=str(root)))
    httpd.timeout = 5
    thread = threading.Thread(target=httpd.serve_forever, kwargs={"poll_interval": 0.05}, daemon=True)
    thread.start()
    try:
        yield root, f"http://127.0.0.1:{httpd.server_address[1]}"
    finally:
        httpd.shutdown()
        httpd.server_close()
        thread.join(timeout=5)


def _entry(name, url, fmt, file, nodes, edges, check, edges_hash="0" * 64, degrees_hash="0" * 64, **extra):
    return dict(name=name, collection="test", kind="test", url=url, upstream_format=fmt, file=file,
                nodes=nodes, edges=edges, file_sha256="0" * 64, edges_sha256=edges_hash,
                degrees_sha256=degrees_hash, download_check=check, **extra)


def _tar_gz(member, data):
    buf = io.BytesIO()
    with tarfile.open(fileobj=buf, mode="w:gz") as tar:
        info = tarfile.TarInfo(member)
        info.size = len(data)
        tar.addfile(info, io.BytesIO(data))
    return buf.getvalue()


def test_fetch_downloads_snap_style_edge_list(server, tmp_path):
    root, base = server
    g = nx.petersen_graph()
    lines = ["# Directed graph: both directions, a self-loop and a repeat"]
    lines += [f"{u + 1}\t{v + 1}" for u, v in g.edges()] + [f"{v + 1}\t{u + 1}" for u, v in g.edges()]
    lines += ["4\t4", "1\t2"]
    (root / "pet.txt.gz").write_bytes(gzip.compress(("\n".join(lines) + "\n").encode()))
    want = ref_edges_sha256((u + 1, v + 1) for u, v in g.edges())
    cat = [_entry("pet", f"{base}/pet.txt.gz", "edgelist.gz", "pet.txt.gz", 10, 15, "edges", want)]
    got = fetch("pet", tmp_path / "out", catalog=cat, timeout=5)
    assert got.path.read_bytes() == (root / "pet.txt.gz").read_bytes()  # kept as downloaded
    assert got.source.startswith(base)
    # the same download written uncompressed when the catalog's file name has no .gz
    cat[0]["file"] = "pet.txt"
    got = fetch("pet", tmp_path / "out", catalog=cat, timeout=5)
    h = nx.read_edgelist(got.path, nodetype=int)
    assert ref_edges_sha256(h.edges()) == want


def test_fetch_converts_matrix_market_archive(server, tmp_path):
    root, base = server
    g = nx.convert_node_labels_to_integers(nx.grid_2d_graph(3, 4))
    g.add_edge(12, 12)  # a node whose only entry is on the diagonal: still a node
    buf = io.BytesIO()
    scipy.io.mmwrite(buf, sp.coo_matrix(nx.to_scipy_sparse_array(g, format="coo")), symmetry="symmetric")
    (root / "mesh.tar.gz").write_bytes(_tar_gz("mesh/mesh.mtx", buf.getvalue()))
    want = ref_edges_sha256((u + 1, v + 1) for u, v in g.edges())  # Matrix Market ids are 1-based
    cat = [_entry("mesh", f"{base}/mesh.tar.gz", "matrix-market.tar.gz", "mesh.txt.gz", 13, 17, "edges",
                  want, upstream_member="mesh/mesh.mtx")]
    got = fetch("mesh", tmp_path / "out", catalog=cat, timeout=5)
    h = nx.read_edgelist(got.path, nodetype=int)
    assert {tuple(sorted(e)) for e in h.edges()} == {(u + 1, v + 1) for u, v in g.edges()}
    assert h.number_of_nodes() == 13
    assert "matrix-market" in got.checked


def test_fetch_largest_component_checked_by_shape(server, tmp_path):
    root, base = server
    big = nx.relabel_nodes(nx.cycle_graph(8), {i: 100 + 7 * i for i in range(8)})
    big.add_edge(100, 121)  # a chord, so the degree sequence is not all 2
    small = nx.path_graph(3)
    lines = [f"{u} {v}" for u, v in list(big.edges()) + list(small.edges())]
    (root / "two.txt").write_text("\n".join(lines) + "\n")
    # the catalog's copy of the component was relabelled 1..n: compare label-free
    relabelled = nx.convert_node_labels_to_integers(big, first_label=1)
    cat = [_entry("two", f"{base}/two.txt", "edgelist", "two-lcc.txt", 8, 9, "shape",
                  degrees_hash=ref_degrees_sha256(relabelled), subset="largest-component")]
    got = fetch("two", tmp_path / "out", catalog=cat, timeout=5)
    h = nx.read_edgelist(got.path, nodetype=int)
    assert set(map(frozenset, h.edges())) == set(map(frozenset, big.edges()))  # the small path is gone
    assert "degrees_sha256" in got.checked


def test_download_checksum_mismatch_leaves_no_file(server, tmp_path):
    root, base = server
    (root / "p.txt").write_text("1 2\n2 3\n")
    out = tmp_path / "out"
    cat = [_entry("p", f"{base}/p.txt", "edgelist", "p.txt", 3, 2, "edges", "f" * 64)]
    with pytest.raises(InputError, match="edges_sha256 .* does not match"):
        fetch("p", out, catalog=cat, timeout=5)
    cat[0].update(nodes=4)
    with pytest.raises(InputError, match="3 nodes and 2 edges"):
        fetch("p", out, catalog=cat, timeout=5)
    assert not out.exists() or list(out.iterdir()) == []


def test_download_http_error(server, tmp_path):
    _, base = server
    cat = [_entry("gone", f"{base}/missing.txt.gz", "edgelist.gz", "gone.txt.gz", 1, 1, "edges")]
    with pytest.raises(InputError, match="HTTP 404"):
        fetch("gone", tmp_path, catalog=cat, timeout=5)


def test_offline_error_names_url_and_suggests_from(tmp_path):
    url = "http://127.0.0.1:9/graph.txt.gz"  # port 9 (discard): nothing listens here
    cat = [_entry("off", url, "edgelist.gz", "off.txt.gz", 1, 1, "edges")]
    with pytest.raises(InputError) as info:
        fetch("off", tmp_path / "out", catalog=cat, timeout=5)
    assert url in str(info.value) and "--from DIR" in str(info.value)
    assert not (tmp_path / "out").exists()
    cat[0]["url"] = "ftp://example.invalid/graph.txt.gz"
    with pytest.raises(ParameterError, match="http"):
        fetch("off", tmp_path / "out", catalog=cat)


# ----------------------------------------------------------------------------
# the command line
# ----------------------------------------------------------------------------
def _run(argv, capsys):
    import argparse

    from partition.commands import datasets as cmd

    parser = argparse.ArgumentParser(prog="shardline datasets")
    cmd.add_arguments(parser)
    status = cmd.run(parser.parse_args(argv))
    return status, capsys.readouterr().out


def test_cli_list(capsys):
    status, out = _run(["list", "--json"], capsys)
    assert status == 0
    assert [e["name"] for e in json.loads(out)] == [e["name"] for e in list_datasets()]
    status, out = _run(["list"], capsys)
    assert status == 0 and "wiki-Vote" in out


@needs_shared
def test_cli_fetch_from_folder(tmp_path, capsys):
    status, out = _run(["fetch", "USPowerGrid", "--from", str(SHARED), "-o", str(tmp_path), "--json"], capsys)
    assert status == 0
    assert Path(json.loads(out)["path"]).read_bytes() == (SHARED / "USPowerGrid.txt.gz").read_bytes()


def test_catalog_module_default_path():
    assert catalog.DEFAULT_CATALOG.name == "catalog.json" and catalog.DEFAULT_CATALOG.is_file()


def test_cli_main_reports_unknown_name(capsys):
    from partition.cli import main

    assert main(["datasets", "fetch", "no-such-graph"]) == 2
    assert "shardline: error: no dataset called 'no-such-graph'" in capsys.readouterr().err


def test_cli_list_never_cuts_a_name(capsys, monkeypatch):
    # a narrow terminal: every name and file still appears whole, so it can be pasted into 'datasets fetch'
    monkeypatch.setenv("COLUMNS", "40")
    status, out = _run(["list"], capsys)
    assert status == 0
    for entry in list_datasets():
        assert entry["name"] in out and entry["file"] in out, entry["name"]
