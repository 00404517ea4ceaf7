"""The notebooks of notebooks/ run top to bottom (nbclient), and are kept with their outputs cleared.

The notebook's own assertions check the balance rule and the moved share;
here its printed figures are compared with the same calls made in this
process (the engine is deterministic for a seed), and its time is printed.
"""

from __future__ import annotations

import re
import time
from pathlib import Path

import pytest

nbformat = pytest.importorskip("nbformat", reason="running notebooks needs nbformat: pip install -e '.[test]'")
nbclient = pytest.importorskip("nbclient", reason="running notebooks needs nbclient: pip install -e '.[test]'")
pytest.importorskip("matplotlib", reason="the notebook draws the report's figures: pip install 'shardline[report]'")

NOTEBOOKS = Path(__file__).resolve().parents[1] / "notebooks"
PATHS = sorted(NOTEBOOKS.glob("*.ipynb"))


def test_there_is_a_notebook():
    assert [p.name for p in PATHS] == ["larkspur-bay-regions.ipynb"]


@pytest.mark.parametrize("path", PATHS, ids=lambda p: p.name)
def test_notebook_is_stored_without_outputs(path):
    nb = nbformat.read(path, as_version=4)
    for cell in nb.cells:
        if cell.cell_type == "code":
            assert cell.outputs == [] and cell.execution_count is None, cell.source[:60]


@pytest.mark.parametrize("path", PATHS, ids=lambda p: p.name)
def test_notebook_runs_top_to_bottom(path, capsys):
    nb = nbformat.read(path, as_version=4)
    started = time.perf_counter()
    nbclient.NotebookClient(nb, timeout=300, kernel_name="python3",
                            resources={"metadata": {"path": str(NOTEBOOKS)}}).execute()
    seconds = time.perf_counter() - started
    with capsys.disabled():
        print(f"\n{path.name} ran in {seconds:.1f} s")
    text = "\n".join(out.get("text", "") for cell in nb.cells if cell.cell_type == "code" for out in cell.outputs
                     if out.get("output_type") == "stream")
    errors = [out for cell in nb.cells if cell.cell_type == "code" for out in cell.outputs
              if out.get("output_type") == "error"]
    assert not errors
    images = sum(1 for cell in nb.cells if cell.cell_type == "code" for out in cell.outputs
                 if "image/png" in out.get("data", {}))
    assert images == 5

    # the same calls here give the same figures (same seed, same output)
    from partition.api import partition_edges
    from partition.placement.recut import recut

    demo = NOTEBOOKS.parent / "datasets" / "demo" / "larkspur-bay-rides.csv.gz"
    run = partition_edges(demo, 8, imbalance=0.03, seed=1, read_options={"weight_column": "rides"},
                          starts="hierarchy,spectral", refine="window,multilevel,pick,swaps")
    assert "3,150 docks, 26,392 dock pairs with rides" in text  # datasets/README.md: 3,150 docks, 26,392 pairs
    cut = re.search(r"cut fraction (0\.\d{4})\)", text).group(1)
    assert cut == f"{run.report['result']['cut_fraction']:.4f}"
    _, stats = recut(run.graph, run.order, 9, eps=0.03, previous=run.parts, seed=1)
    assert f"docks that change region: {stats['stability']['moved_nodes']:,} of 3,150" in text
    # id mod 8 == id mod 9 exactly when id mod 72 < 8 (Chinese remainder theorem): of the ids 0..3149
    # (3150 = 43·72 + 54) 43·8 + 8 = 352 stay, so 1 − 352/3150 = 88.8 % move
    assert "hash mod 8 -> mod 9 would move 88.8%" in text
