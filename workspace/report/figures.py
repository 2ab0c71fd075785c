"""The report's figures, drawn with matplotlib from plain arrays.

Each function returns a ``matplotlib.figure.Figure`` built without pyplot (no
global state, no window). Colours come from ``workspace.palette``: community
colours are the terminal UI's (Okabe & Ito 2008), on a light "paper" ground.
"""

from __future__ import annotations

from typing import Any, Sequence

import numpy as np

from workspace import palette

#: Networks with more nodes than this are not drawn (the drawing would be a blot).
DRAW_LIMIT = 3000
#: Seed of the spring layout, so the drawing of a network never jumps between reports.
LAYOUT_SEED = 7


#: Seven colours cycle (``palette.COMMUNITY``); each further round of seven gets its own marker
#: (network drawing) and hatching (bars), so communities 0 and 7 never look alike.
MARKERS = ("o", "s", "^", "D", "v", "P")
HATCHES = ("", "///", "...", "xxx", "\\\\\\", "+++")


def marker_of(label: int) -> str:
    """Marker of community ``label``: one per round of ``len(palette.COMMUNITY)`` colours."""
    return MARKERS[(int(label) // len(palette.COMMUNITY)) % len(MARKERS)] if label >= 0 else "o"


def hatch_of(label: int) -> str:
    """Bar hatching of community ``label``: none for the first seven, then one per round."""
    return HATCHES[(int(label) // len(palette.COMMUNITY)) % len(HATCHES)] if label >= 0 else ""


def _figure(width: float, height: float):
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), dpi=100, facecolor=palette.PAPER, layout="constrained")
    return fig


def _axes(fig):
    ax = fig.add_subplot(1, 1, 1)
    ax.set_facecolor(palette.PAPER)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color(palette.INK_SOFT)
    ax.tick_params(colors=palette.INK, labelsize=9)
    ax.xaxis.label.set_color(palette.INK)
    ax.yaxis.label.set_color(palette.INK)
    ax.title.set_color(palette.INK)
    return ax


def _integer_y(ax) -> None:
    from matplotlib.ticker import MaxNLocator

    ax.yaxis.set_major_locator(MaxNLocator(integer=True))


def spectrum(eigenvalues: Sequence[float], gap_k: int | None):
    """Bar chart of the smallest eigenvalues, marking the chosen gap.

    With eigenvalues ``λ_1 <= λ_2 <= …`` of the normalised Laplacian, the
    eigengap heuristic picks ``k = argmax_i (λ_{i+1} - λ_i)``; bars
    ``λ_1 … λ_k`` are drawn in the lead colour, the rest faint, and a marker
    stands between ``λ_k`` and ``λ_{k+1}``.

    Parameters
    ----------
    eigenvalues : sequence of float
        In ascending order, as stored on the run.
    gap_k : int or None
        The run's eigengap suggestion (diagnostics); None draws no marker.

    References
    ----------
    U. von Luxburg, "A tutorial on spectral clustering", Statistics and
    Computing 17 (2007), section 8.3.
    """
    lam = np.asarray(eigenvalues, dtype=float)
    fig = _figure(6.4, 3.0)
    ax = _axes(fig)
    idx = np.arange(1, lam.size + 1)
    k = gap_k if gap_k is not None and 1 <= gap_k < lam.size else None
    colours = [palette.BEFORE_GAP if (k is None or i <= k) else palette.FAINT for i in idx]
    ax.bar(idx, lam, color=colours, width=0.7)
    if k is not None:
        ax.axvline(k + 0.5, color=palette.GAP_MARK, linewidth=2, linestyle="--")
        top = float(lam.max()) if lam.size else 1.0
        ax.annotate(f"largest gap: k = {k}\nλ{k + 1} − λ{k} = {lam[k] - lam[k - 1]:.3g}",
                    xy=(k + 0.5, top), xytext=(-8, -2), textcoords="offset points", va="top",
                    ha="right", fontsize=9, color=palette.INK)
    ax.set_xticks(idx)
    ax.set_xlabel("index i")
    ax.set_ylabel("eigenvalue λi")
    return fig


def community_sizes(sizes: Sequence[int]):
    """Bar chart of community sizes ``|C_c| = #{i : label_i = c}`` in label order.

    Parameters
    ----------
    sizes : sequence of int
        Size of community ``c`` at position ``c`` (a ``numpy.bincount`` of the
        membership); each bar in the community's colour.

    References
    ----------
    Common practice; colours after M. Okabe and K. Ito, "Color Universal
    Design" (2008).
    """
    sizes = np.asarray(sizes, dtype=np.int64)
    fig = _figure(6.4, 2.8)
    ax = _axes(fig)
    labels = np.arange(sizes.size)
    bars = ax.bar(labels, sizes, color=[palette.community_colour(c) for c in labels],
                  edgecolor=palette.INK_SOFT, linewidth=0.5, width=0.75)
    for c, bar in zip(labels.tolist(), bars):
        bar.set_hatch(hatch_of(c))
    if sizes.size <= 40:
        ax.set_xticks(labels)
    ax.set_xlabel("community")
    ax.set_ylabel("nodes")
    _integer_y(ax)
    return fig


def stability_histogram(stability: Sequence[float], repeats: int):
    """Histogram of per-node stability over repeated runs, ten bins on [0, 1].

    Stability of node ``i`` is the share ``s_i = c_i / R`` of the ``R``
    perturbed repeats in which its community (labels aligned) equals the
    reported one, as stored on the run.

    Parameters
    ----------
    stability : sequence of float
        One value in [0, 1] per node.
    repeats : int
        ``R``, shown in the axis label.

    References
    ----------
    A. Strehl and J. Ghosh, "Cluster ensembles", JMLR 3 (2002) (agreement of
    repeated partitions); common practice.
    """
    s = np.asarray(stability, dtype=float)
    fig = _figure(6.4, 2.6)
    ax = _axes(fig)
    ax.hist(s, bins=np.linspace(0.0, 1.0, 11), color=palette.BARS, edgecolor=palette.PAPER)
    ax.set_xlim(0, 1)
    ax.set_xlabel(f"share of {repeats} repeats that agree with the reported community")
    ax.set_ylabel("nodes")
    _integer_y(ax)
    return fig


def layout_iterations(n: int) -> int:
    """Force-directed iterations for ``n`` nodes: 100 up to 500 nodes, 50 up to 1500, else 30.

    Each iteration costs ``O(n^2)`` (all-pairs repulsion); fewer rounds keep a
    3000-node drawing to seconds while the seeded start keeps it stable.
    """
    return 100 if n <= 500 else 50 if n <= 1500 else 30


def spring_positions(n: int, edge_u: np.ndarray, edge_v: np.ndarray, weight: np.ndarray,
                     *, seed: int = LAYOUT_SEED) -> np.ndarray:
    """Node positions from a seeded force-directed layout, shape (n, 2).

    Fruchterman–Reingold: attraction ``d^2 / k`` along edges (times the
    weight), repulsion ``k^2 / d`` between all pairs, ``k = 1/sqrt(n)``;
    ``networkx.spring_layout`` with a fixed seed and :func:`layout_iterations`
    rounds, so the same network is drawn the same way each time.

    Parameters
    ----------
    n : int
    edge_u, edge_v : ndarray of int
    weight : ndarray of float
    seed : int, default ``LAYOUT_SEED``

    References
    ----------
    T. M. J. Fruchterman and E. M. Reingold, "Graph drawing by force-directed
    placement", Software: Practice and Experience 21 (1991).
    """
    import networkx as nx

    g = nx.Graph()
    g.add_nodes_from(range(n))
    g.add_weighted_edges_from(zip(np.asarray(edge_u).tolist(), np.asarray(edge_v).tolist(),
                                  np.asarray(weight, dtype=float).tolist()))
    pos = nx.spring_layout(g, seed=seed, iterations=layout_iterations(n))
    return np.array([pos[i] for i in range(n)], dtype=float).reshape(n, 2)


def network_drawing(positions: np.ndarray, edge_u: np.ndarray, edge_v: np.ndarray,
                    labels: np.ndarray):
    """The network drawn at ``positions``, nodes coloured by community.

    Parameters
    ----------
    positions : ndarray of float, shape (n, 2)
    edge_u, edge_v : ndarray of int
        Edges drawn as thin lines under the nodes.
    labels : ndarray of int, shape (n,)
        Community per node (-1: none, drawn grey); colour ``palette.community_colour``,
        marker :func:`marker_of` (a new shape after each seven colours).

    References
    ----------
    Common practice; colours after Okabe and Ito (2008).
    """
    from matplotlib.collections import LineCollection

    pos = np.asarray(positions, dtype=float)
    labels = np.asarray(labels)
    fig = _figure(6.4, 6.0)
    ax = fig.add_subplot(1, 1, 1)
    ax.set_facecolor(palette.PAPER)
    ax.set_axis_off()
    ax.set_aspect("equal")
    if len(edge_u):
        segs = np.stack([pos[np.asarray(edge_u)], pos[np.asarray(edge_v)]], axis=1)
        ax.add_collection(LineCollection(segs, colors=palette.PAPER_RULE, linewidths=0.6, zorder=1))
    n = pos.shape[0]
    size = float(np.clip(2400.0 / max(n, 1), 4.0, 60.0))
    rounds = np.where(labels >= 0, labels // len(palette.COMMUNITY), 0)
    for r in np.unique(rounds).tolist():  # one scatter per marker; node order kept within each
        idx = np.flatnonzero(rounds == r)
        colours = [palette.community_colour(c) if c >= 0 else palette.FAINT for c in labels[idx].tolist()]
        ax.scatter(pos[idx, 0], pos[idx, 1], s=size, c=colours, marker=MARKERS[r % len(MARKERS)],
                   edgecolors=palette.INK, linewidths=0.3, zorder=2)
    ax.autoscale_view()
    return fig


def contingency_block(cells: Sequence[Sequence[int]], row_sizes: Sequence[int],
                      col_sizes: Sequence[int], *, top: int = 15):
    """The dense block of the contingency table over the ``top`` largest communities.

    ``n_ab = |A_a ∩ B_b|`` for the ``top`` largest communities of each side
    (ties by label), rows and columns in label order.

    Parameters
    ----------
    cells : sequence of [a, b, count]
        The non-zero cells (the diff's sparse form).
    row_sizes, col_sizes : sequence of int
        ``|A_a|`` and ``|B_b|``.
    top : int, default 15

    Returns
    -------
    rows, cols : ndarray of int
        Labels shown.
    table : ndarray of int64, shape (len(rows), len(cols))

    References
    ----------
    L. Hubert and P. Arabie, "Comparing partitions", Journal of
    Classification 2 (1985) (the contingency table).
    """
    rs, cs = np.asarray(row_sizes, dtype=np.int64), np.asarray(col_sizes, dtype=np.int64)
    rows = np.sort(np.argsort(-rs, kind="stable")[:top])
    cols = np.sort(np.argsort(-cs, kind="stable")[:top])
    r_at = {int(a): i for i, a in enumerate(rows)}
    c_at = {int(b): j for j, b in enumerate(cols)}
    table = np.zeros((rows.size, cols.size), dtype=np.int64)
    for a, b, count in cells:
        if a in r_at and b in c_at:
            table[r_at[a], c_at[b]] = count
    return rows, cols, table


def contingency_heatmap(cells: Sequence[Sequence[int]], row_sizes: Sequence[int],
                        col_sizes: Sequence[int], *, top: int = 15):
    """Heat map of the contingency table of two partitions, largest communities only.

    Cell ``(a, b)`` holds ``n_ab = |A_a ∩ B_b|`` (see :func:`contingency_block`),
    shaded on a single-hue ramp from the paper colour, counts written in the
    cells when the block has at most 400 of them.

    Parameters
    ----------
    cells : sequence of [a, b, count]
    row_sizes, col_sizes : sequence of int
    top : int, default 15

    References
    ----------
    L. Hubert and P. Arabie, "Comparing partitions", Journal of
    Classification 2 (1985).
    """
    from matplotlib.colors import ListedColormap

    rows, cols, table = contingency_block(cells, row_sizes, col_sizes, top=top)
    fig = _figure(6.4, max(2.4, 0.35 * rows.size + 1.4))
    ax = _axes(fig)
    peak = max(int(table.max()) if table.size else 0, 1)
    # vector cells (pcolormesh), not an embedded raster: sharp in print, no data: image in the page
    # empty cells stay paper-white; any shared node gets at least the first shade
    im = ax.pcolormesh(np.ma.masked_equal(table, 0), cmap=ListedColormap(palette.PAPER_HEAT[1:]),
                       vmin=0, vmax=peak,
                       edgecolors=palette.PAPER_RULE, linewidth=0.5)
    ax.set_xlim(0, cols.size)
    ax.set_ylim(rows.size, 0)
    ax.set_xticks(np.arange(cols.size) + 0.5, [str(b) for b in cols])
    ax.set_yticks(np.arange(rows.size) + 0.5, [str(a) for a in rows])
    ax.set_xlabel("community in run B")
    ax.set_ylabel("community in run A")
    if table.size <= 400:
        for i in range(rows.size):
            for j in range(cols.size):
                if table[i, j]:
                    ax.text(j + 0.5, i + 0.5, str(table[i, j]), ha="center", va="center", fontsize=8,
                            color=palette.PAPER if table[i, j] > 0.55 * peak else palette.INK)
    cb = fig.colorbar(im, ax=ax, shrink=0.8)
    cb.ax.tick_params(colors=palette.INK, labelsize=8)
    cb.set_label("shared nodes", color=palette.INK)
    return fig


def composition_bars(communities: Sequence[dict], categories: Sequence[Any], attribute: str):
    """Stacked horizontal bars: each community's shares of an attribute's values.

    Bar ``c`` is split into segments of width ``n_cv / Σ_v n_cv`` (the
    composition's ``shares``), in the order of ``categories``; values take the
    palette's colours in turn (up to 12 values are named in the legend).

    Parameters
    ----------
    communities : sequence of dict
        Rows of ``compare.composition.composition``: ``community``, ``shares``.
    categories : sequence
        The attribute's values, in the order of ``shares``.
    attribute : str
        Named in the axis label.

    References
    ----------
    Common practice (stacked share bars); colours after Okabe and Ito (2008).
    """
    fig = _figure(6.4, max(2.2, 0.32 * len(communities) + 1.6))
    ax = _axes(fig)
    y = np.arange(len(communities))
    left = np.zeros(len(communities))
    colours = palette.COMMUNITY
    for j, value in enumerate(categories):
        widths = np.array([row["shares"][j] for row in communities], dtype=float)
        ax.barh(y, widths, left=left, color=colours[j % len(colours)],
                hatch=HATCHES[(j // len(colours)) % len(HATCHES)], edgecolor=palette.PAPER, linewidth=0.5,
                label=str(value) if j < 12 else None)
        left += widths
    ax.set_yticks(y, [str(row["community"]) for row in communities])
    ax.set_ylim(len(communities) - 0.5, -0.5)
    ax.set_xlim(0, 1)
    ax.set_xlabel(f"share of the community's nodes, by {attribute}")
    ax.set_ylabel("community")
    if categories:
        legend = ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8, frameon=False)
        for text in legend.get_texts():
            text.set_color(palette.INK)
    return fig
