"""The report's figures, drawn with matplotlib (Agg, no display needed).

Each function takes plain numbers (lists, numpy arrays) and returns a
:class:`matplotlib.figure.Figure` with a title, axis labels with units and a
legend where there is more than one series. The adjacency picture is a spy
plot (the nonzero pattern of a sparse matrix, as drawn by
``matplotlib.pyplot.spy``) of the graph with rows and columns in the linear
order: the order of Aydin, Bateni & Mirrokni (WSDM 2016) puts related nodes
next to each other, so its blocks lie along the diagonal. The cut matrix is a
heatmap of the shard × shard cut weights.
"""

from __future__ import annotations

import numpy as np

from partition.errors import ShardlineError

__all__ = ["require_matplotlib", "load_bars", "cut_heatmap", "spy_plot", "hierarchy_rounds", "refinement_cuts",
           "start_cuts", "baseline_bars", "fanout_histogram", "hit_rate_curves", "SPY_MAX_POINTS"]

SPY_MAX_POINTS = 300_000
"""Largest number of adjacency entries the spy plot draws; larger graphs are sampled (seeded)."""

DENSITY_ABOVE = 20_000
"""Above this many nodes the spy plot shows entries per grid cell (a dot would be far below a pixel)."""

DENSITY_BINS = 400
"""Grid cells per side of the density picture."""

INSTALL_HINT = "pip install 'shardline[report]' (or: pip install matplotlib)"


def require_matplotlib():
    """The :class:`matplotlib.figure.Figure` class; a :class:`ShardlineError` telling how to install matplotlib if absent."""
    try:
        import matplotlib
    except ImportError:
        raise ShardlineError(f"the report's figures need matplotlib, which is not installed: {INSTALL_HINT}") \
            from None
    from matplotlib.figure import Figure

    return Figure


def _figure(width=7.0, height=4.0):
    # a Figure of its own (not pyplot's): nothing global is kept, nothing needs closing
    fig = require_matplotlib()(figsize=(width, height), dpi=100)
    return fig, fig.add_subplot(1, 1, 1)


def load_bars(weights, cap, floor=None, unit="nodes"):
    """Per-shard load bars against the balance cap (and the floor, when above 0)."""
    weights = np.asarray(weights, dtype=float)
    k = weights.size
    fig, ax = _figure(7.5, 3.8)
    over = weights > cap
    ax.bar(np.arange(k), weights, color=np.where(over, "#c0392b", "#2e86c1"), width=0.8 if k <= 64 else 1.0,
           label="shard load")
    ax.axhline(cap, color="#c0392b", linestyle="-", linewidth=1.2, label=f"cap {cap:,.0f}")
    ax.axhline(weights.sum() / k, color="#555555", linestyle="--", linewidth=1.0,
               label=f"even share {weights.sum() / k:,.1f}")
    if floor:
        ax.axhline(floor, color="#7d3c98", linestyle=":", linewidth=1.0, label=f"floor {floor:,.0f}")
    low = min(weights.min(), floor or weights.min())
    ax.set_ylim(max(0.0, low - 0.15 * (cap - low + 1)), cap + 0.1 * (cap - low + 1))
    ax.set_title("Shard loads against the balance cap")
    ax.set_xlabel("shard")
    ax.set_ylabel(f"load ({unit}; axis not from 0)" if ax.get_ylim()[0] > 0 else f"load ({unit})")
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.16), ncol=3, fontsize=8)
    fig.tight_layout()
    return fig


def cut_heatmap(matrix, unit="edge weight"):
    """The shard × shard cut matrix as a heatmap (diagonal blank)."""
    m = np.asarray(matrix, dtype=float)
    k = m.shape[0]
    fig, ax = _figure(6.0, 5.0)
    shown = np.ma.masked_where(np.eye(k, dtype=bool), m)
    img = ax.imshow(shown, cmap="viridis", interpolation="nearest", origin="upper")
    bar = fig.colorbar(img, ax=ax)
    bar.set_label(f"cut between the two shards ({unit})")
    ax.set_title("Cut between shard pairs")
    ax.set_xlabel("shard")
    ax.set_ylabel("shard")
    if k <= 16:
        ax.set_xticks(range(k))
        ax.set_yticks(range(k))
    fig.tight_layout()
    return fig


def spy_plot(indptr, indices, position, shard_of_position=None, seed=0, max_points=SPY_MAX_POINTS,
             order_name="linear order"):
    """Adjacency pattern with rows and columns in a node order; sampled above ``max_points`` entries.

    Parameters
    ----------
    indptr, indices : ndarray
        The graph's CSR arrays (both directions of every edge).
    position : ndarray of int64, shape (n,)
        Position of each node in the order.
    shard_of_position : ndarray or None
        Shard of the node at each position; the boundaries between runs of
        one shard are drawn when there are at most 256 runs.
    seed : int
        Seed of the sample (the same run draws the same picture).

    Returns
    -------
    Figure, int
        The figure and the number of entries drawn.
    """
    n = int(indptr.shape[0] - 1)
    total = int(indices.shape[0])
    rows = np.repeat(np.arange(n, dtype=np.int64), np.diff(indptr))
    if total > max_points:
        pick = np.sort(np.random.default_rng(seed).choice(total, size=max_points, replace=False))
        rows, cols = rows[pick], indices[pick]
    else:
        cols = indices
    x, y = position[cols], position[rows]
    fig, ax = _figure(5.6, 5.8)
    if n <= DENSITY_ABOVE:
        size = 4.0 if x.size < 20_000 else 1.0
        ax.scatter(x, y, s=size, marker="s", linewidths=0, color="#1b4f72", rasterized=True)
    else:  # too many nodes for one dot per pixel: entries per cell of a grid, on a log colour scale
        from matplotlib.colors import LogNorm

        bins = DENSITY_BINS
        counts, _, _ = np.histogram2d(y, x, bins=bins, range=[[-0.5, n - 0.5], [-0.5, n - 0.5]])
        img = ax.imshow(np.ma.masked_equal(counts, 0), cmap="Blues", norm=LogNorm(vmin=1, vmax=max(counts.max(), 2)),
                        extent=(-0.5, n - 0.5, n - 0.5, -0.5), interpolation="nearest", aspect="equal")
        fig.colorbar(img, ax=ax, shrink=0.8).set_label(f"entries per cell ({n / bins:,.0f} × {n / bins:,.0f} nodes)")
    if shard_of_position is not None and n:
        runs = np.asarray(shard_of_position)
        change = np.flatnonzero(np.diff(runs) != 0) + 0.5
        if change.size <= min(32, 2 * np.unique(runs).size):  # shards (nearly) contiguous on the line
            for c in change:
                ax.axvline(c, color="#e67e22", linewidth=0.4, alpha=0.5, zorder=0)
                ax.axhline(c, color="#e67e22", linewidth=0.4, alpha=0.5, zorder=0)
    ax.set_xlim(-0.5, n - 0.5)
    ax.set_ylim(n - 0.5, -0.5)
    ax.set_aspect("equal")
    sampled = f"\n({x.size:,} of {total:,} entries, sampled)" if total > max_points else ""
    ax.set_title(f"Adjacency in the {order_name}{sampled}", fontsize=9)
    ax.set_xlabel("node position (column)")
    ax.set_ylabel("node position (row)")
    fig.tight_layout()
    return fig, int(x.size)


def hierarchy_rounds(clusters, edges=None):
    """Clusters (and edges) left after each hierarchy round, log scale."""
    fig, ax = _figure(6.0, 3.8)
    rounds = np.arange(len(clusters))
    ax.plot(rounds, clusters, marker="o", color="#2e86c1", label="clusters left")
    if edges is not None and len(edges) == len(clusters):
        ax.plot(rounds, np.maximum(np.asarray(edges, dtype=float), 0.8), marker="s", color="#e67e22",
                label="edges left between clusters")
    ax.set_yscale("log")
    ax.set_title("Hierarchy: what is left after each round")
    ax.set_xlabel("round (0 = the input graph)")
    ax.set_ylabel("count (log scale)")
    ax.set_xticks(rounds)
    ax.legend(fontsize=8)
    fig.tight_layout()
    return fig


def refinement_cuts(series):
    """Cut after each refinement stage, one line per start.

    ``series`` maps a start's name to a list of ``(stage label, cut fraction)``
    in the order the stages ran (the first entry is its line cut).
    """
    fig, ax = _figure(7.5, 4.2)
    labels = []
    for name, points in series.items():
        for label, _ in points:
            if label not in labels:
                labels.append(label)
    where = {label: i for i, label in enumerate(labels)}
    for name, points in series.items():
        ax.plot([where[p[0]] for p in points], [p[1] for p in points], marker="o", label=name)
    ax.set_xticks(range(len(labels)))
    ax.set_xticklabels(labels, rotation=35, ha="right", fontsize=8)
    ax.set_title("Cut after each refinement stage")
    ax.set_xlabel("stage (in the order run)")
    ax.set_yscale("log")
    ax.set_ylabel("cut fraction (log scale)")
    ax.legend(fontsize=8, title="start")
    fig.tight_layout()
    return fig


def start_cuts(starts, chosen=None):
    """Every start's raw line cut and its final cut, side by side."""
    fig, ax = _figure(7.0, 3.8)
    names = [s["start"] for s in starts]
    x = np.arange(len(names))
    ax.bar(x - 0.2, [s["raw"] for s in starts], width=0.4, color="#aab7b8", label="raw line cut")
    ax.bar(x + 0.2, [s["final"] for s in starts], width=0.4, color="#2e86c1", label="after refinement")
    ax.set_xticks(x)
    ax.set_xticklabels([f"{n} (chosen)" if n == chosen else n for n in names], rotation=20, ha="right", fontsize=8)
    ax.set_title("Each start: raw line cut and final cut")
    ax.set_xlabel("start (linear order)")
    ax.set_ylabel("cut fraction")
    ax.legend(fontsize=8)
    fig.tight_layout()
    return fig


def baseline_bars(rows):
    """Cut fraction and imbalance of Shardline's run beside the baselines (``rows``: name, cut_fraction, imbalance)."""
    fig = require_matplotlib()(figsize=(8.0, 3.8), dpi=100)
    ax1, ax2 = fig.add_subplot(1, 2, 1), fig.add_subplot(1, 2, 2)
    names = [r["name"] for r in rows]
    colours = ["#1e8449" if r.get("ours") else "#aab7b8" for r in rows]
    ax1.barh(names, [r["cut_fraction"] for r in rows], color=colours)
    ax1.invert_yaxis()
    ax1.set_title("Cut fraction (lower is better)", fontsize=10)
    ax1.set_xlabel("cut weight / all edge weight")
    ax2.barh(names, [r["imbalance"] for r in rows], color=colours)
    ax2.invert_yaxis()
    ax2.set_yticklabels([])
    ax2.set_title("Imbalance", fontsize=10)
    ax2.set_xlabel("largest shard / even share − 1")
    from matplotlib.patches import Patch

    fig.legend(handles=[Patch(color="#1e8449", label="this run"), Patch(color="#aab7b8", label="baseline")],
               loc="lower center", ncol=2, fontsize=8)
    fig.suptitle("This run beside the baselines")
    fig.tight_layout(rect=(0, 0.08, 1, 0.95))
    return fig


def fanout_histogram(policies):
    """Requests per fan-out, one bar group per routing policy."""
    fig, ax = _figure(7.0, 3.8)
    fanouts = sorted({f for pol in policies.values() for f, _ in pol["fanout"]})
    width = 0.8 / max(len(policies), 1)
    for i, (name, pol) in enumerate(policies.items()):
        counts = dict(pol["fanout"])
        total = sum(counts.values()) or 1
        ax.bar(np.arange(len(fanouts)) + (i - (len(policies) - 1) / 2) * width,
               [counts.get(f, 0) / total for f in fanouts], width=width, label=name)
    ax.set_xticks(range(len(fanouts)))
    ax.set_xticklabels([str(f) for f in fanouts])
    ax.set_title("Fan-out of the replayed requests")
    ax.set_xlabel("shards one request reaches")
    ax.set_ylabel("share of requests")
    ax.legend(fontsize=8, title="routing policy")
    fig.tight_layout()
    return fig


def hit_rate_curves(policies):
    """Cache hit rate against cache size, one line per routing policy (policies without rates are left out)."""
    fig, ax = _figure(7.0, 3.8)
    for name, pol in policies.items():
        if pol["hit_rate"]:
            ax.plot([c for c, _ in pol["hit_rate"]], [h for _, h in pol["hit_rate"]], marker="o", label=name)
    ax.set_title("Cache hit rate against cache size")
    ax.set_xlabel("cache size (entries per shard)")
    ax.set_ylabel("hit rate (share of lookups)")
    ax.set_ylim(0, 1.02)
    ax.legend(fontsize=8, title="routing policy")
    fig.tight_layout()
    return fig
