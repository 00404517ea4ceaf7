"""A run's report as one self-contained HTML page with figures (``shardline report``).

:func:`build_report` (:mod:`partition.report.build`) draws the figures with
matplotlib — shard loads against the cap, the shard × shard cut matrix, the
adjacency matrix in the linear order (Aydin, Bateni & Mirrokni, WSDM 2016),
clusters left per hierarchy round, the cut after each refinement stage, every
start's raw and final cut, the baselines side by side, and a workload
replay's fan-out and cache hit rates; :func:`write_report`
(:mod:`partition.report.html`) embeds them as base64 PNG in one page that
opens from disk. Published figures for catalog graphs come from
:mod:`partition.report.references`. matplotlib is an optional dependency
(``pip install 'shardline[report]'``); importing this package does not need it.
"""

from partition.report.build import Report, build_report
from partition.report.html import render_html, write_report

__all__ = ["Report", "build_report", "render_html", "write_report"]
