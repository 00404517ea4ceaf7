"""The HTML report in a real browser: headless Chromium draws the demo's report and a screenshot is kept.

Chromium's ``--headless --dump-dom`` prints the page's DOM after its scripts
ran (``--virtual-time-budget`` lets the load event fire first) and
``--screenshot`` writes a PNG; both are Chromium's own command-line switches.
The page's inline hook (partition/report/html.py) writes image failures,
script errors and console errors into ``#page-errors`` and the count of drawn
figures into ``<body data-images-ok>``; a control page with a broken image and
a failing script shows that the hook catches both. The numbers of the summary
table are compared with the run's JSON report. The demo graph is the invented
Larkspur Bay Bikes scenario (datasets/demo).

Chromium comes from Debian (``apt-get install chromium``); ``.ci/run``
installs it in CI. Without it the test skips locally and fails in CI
(``CI=true``).
"""

from __future__ import annotations

import html.parser
import json
import os
import shutil
import subprocess
from pathlib import Path

import pytest

from partition.cli import main

pytest.importorskip("matplotlib", reason="the report needs matplotlib: pip install 'shardline[report]'")

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "datasets" / "demo" / "larkspur-bay-rides.csv.gz"


def chromium():
    for name in ("chromium", "chromium-browser"):
        path = shutil.which(name)
        if path:
            return path
    if os.environ.get("CI") == "true":
        pytest.fail("Chromium is missing in CI: .ci/run should have installed it (apt-get install -y chromium)")
    pytest.skip("Chromium is not installed; install it with: apt-get update && apt-get install -y chromium")


def browse(browser, page, tmp, *switches):
    cmd = [browser, "--headless", "--no-sandbox", "--disable-gpu", "--hide-scrollbars", "--no-first-run",
           f"--user-data-dir={tmp / 'profile'}", "--virtual-time-budget=10000", *switches, page.as_uri()]
    done = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr[-2000:]
    return done.stdout


class Dom(html.parser.HTMLParser):
    def __init__(self):
        super().__init__()
        self.body, self.errors, self.cells, self._in = {}, None, {}, None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "body":
            self.body = a
        if tag == "pre" and a.get("id") == "page-errors":
            self.errors, self._in = {"count": a.get("data-count"), "text": ""}, "errors"
        if tag == "td" and "data-key" in a:
            self._in = a["data-key"]
            self.cells[self._in] = ""

    def handle_data(self, data):
        if self._in == "errors":
            self.errors["text"] += data
        elif self._in is not None:
            self.cells[self._in] += data

    def handle_endtag(self, tag):
        if tag in ("td", "pre"):
            self._in = None


def dom_of(text):
    dom = Dom()
    dom.feed(text)
    return dom


def test_the_demo_report_draws_every_figure_in_chromium(tmp_path):
    browser = chromium()
    from partition.api import partition_edges

    run = partition_edges(DEMO, 8, imbalance=0.03, seed=1, read_options={"weight_column": "rides"},
                          starts="hierarchy,spectral", refine="window,multilevel,pick,swaps")
    run.write(tmp_path / "docks.csv", order_path=tmp_path / "order.csv")
    page = tmp_path / "report.html"
    assert main(["report", str(tmp_path / "docks.csv"), "-o", str(page), "--weight-column", "rides",
                 "--run-baselines", "ldg,fennel", "--quiet"]) == 0
    figures = page.read_text(encoding="utf-8").count("<img data-figure=")
    assert figures == 7

    dom = dom_of(browse(browser, page, tmp_path, "--dump-dom"))
    assert dom.errors is not None, "the page's error hook is missing from the DOM"
    assert dom.errors["count"] == "0" and dom.errors["text"] == "", dom.errors
    assert dom.body.get("data-images-ok") == f"{figures}/{figures}"  # every image decoded with a width > 0

    report = json.loads((tmp_path / "docks.csv.report.json").read_text())
    res = report["result"]
    assert int(dom.cells["result.cut_edges"].replace(",", "")) == res["cut_edges"]
    assert float(dom.cells["result.cut_weight"].replace(",", "")) == res["cut_weight"]
    assert float(dom.cells["result.cut_fraction"]) == pytest.approx(res["cut_fraction"], abs=5e-7)
    assert float(dom.cells["result.imbalance"]) == pytest.approx(res["imbalance"], abs=5e-7)
    assert int(dom.cells["result.communication_volume"].replace(",", "")) == res["communication_volume"]
    assert float(dom.cells["result.fanout"]) == pytest.approx(res["fanout"], abs=5e-7)
    assert int(dom.cells["input.nodes"].replace(",", "")) == report["input"]["nodes"] == 3150
    assert int(dom.cells["k"]) == report["k"] == 8
    assert dom.cells["engine"] == "memory"

    shot = tmp_path / "report-screenshot.png"
    browse(browser, page, tmp_path, f"--screenshot={shot}", "--window-size=1200,2400")
    import matplotlib.image as mpimg

    pixels = mpimg.imread(shot)
    assert pixels.shape[:2] == (2400, 1200)
    assert pixels[..., :3].std() > 0.05  # text and figures, not a blank page
    print(f"\nscreenshot of the demo report: {shot} ({shot.stat().st_size:,} bytes); page {page.stat().st_size:,} bytes")


def test_the_error_hook_reports_a_broken_image_and_a_script_error(tmp_path):
    """Control: the same hook on a page with a broken figure and a failing script shows both."""
    browser = chromium()
    from partition.report.html import _SCRIPT

    page = tmp_path / "broken.html"
    page.write_text("<!DOCTYPE html><html><head>" + _SCRIPT + "</head><body>"
                    "<img data-figure='loads' src='data:image/png;base64,bm90IGEgcG5n'>"
                    "<script>undefinedFunction();</script>"
                    "<pre id='page-errors' data-count='0'></pre></body></html>", encoding="utf-8")
    dom = dom_of(browse(browser, page, tmp_path, "--dump-dom"))
    assert "image failed: loads" in dom.errors["text"]
    assert "script error" in dom.errors["text"] and "undefinedFunction" in dom.errors["text"]
    assert dom.body.get("data-images-ok") == "0/1"
