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


#: Node names are written beside the nodes of drawings with at most this many nodes.
NAME_LIMIT = 80


def network_drawing(positions: np.ndarray, edge_u: np.ndarray, edge_v: np.ndarray,
                    labels: np.ndarray, *, node_labels: Sequence[str] | None = None):
    """The network drawn at ``positions``, nodes coloured by community.

    Parameters
    ----------
    positions : ndarray of float, shape (n, 2)
        Layout or coordinates (drawn with equal aspect).
    edge_u, edge_v : ndarray of int
        Edges drawn as thin lines under the nodes.
    labels : ndarray of int, shape (n,)
        Community per node (-1: none, drawn grey); colour ``palette.community_colour``,
        marker :func:`marker_of` (a new shape after each seven colours).
    node_labels : sequence of str or None
        Names written beside the nodes when there are at most ``NAME_LIMIT`` of them.

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
    if node_labels is not None and 0 < n <= NAME_LIMIT:
        for (x, y), name in zip(pos.tolist(), node_labels):
            ax.annotate(str(name), (x, y), xytext=(3, 3), textcoords="offset points", fontsize=6,
                        color=palette.INK_SOFT, zorder=3)
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


# --- sweeps ----------------------------------------------------------------------------------

#: Quality measures drawn against k in a sweep report, with how they read.
SWEEP_MEASURES = (("modularity", "modularity Q (higher is better)"),
                  ("conductance", "largest conductance (lower is better)"),
                  ("normalized_cut", "normalised cut (lower is better)"))


def _by_value(points: Sequence[dict]) -> dict[Any, list[dict]]:
    groups: dict[Any, list[dict]] = {}
    for p in points:
        if p.get("k") is not None:
            groups.setdefault(repr(p.get("value")), []).append(p)
    return groups


def sweep_quality(points: Sequence[dict], recommended: int | None = None):
    """Quality measures of a sweep against k, one panel per measure, one line per varied value.

    For each k the first repeat's run gives modularity ``Q = (1/2m) Σ_ij (A_ij − k_i k_j / 2m) δ(c_i, c_j)``,
    the largest conductance ``max_c φ(C_c)``, ``φ(C) = cut(C) / min(vol C, vol V∖C)``, and the normalised cut
    ``Σ_c cut(C_c) / vol(C_c)`` as stored on the runs; a dashed line marks the recommended k.

    Parameters
    ----------
    points : sequence of dict
        The sweep's points (``k``, ``value``, and the measures), as ``services.sweeps.show_sweep`` gives them.
    recommended : int or None

    References
    ----------
    M. E. J. Newman, "Modularity and community structure in networks", PNAS 103 (2006);
    J. Shi and J. Malik, "Normalized cuts and image segmentation", IEEE TPAMI 22 (2000);
    R. Kannan, S. Vempala and A. Vetta, "On clusterings: good, bad and spectral", JACM 51 (2004).
    """
    groups = _by_value(points)
    shown = [(name, text) for name, text in SWEEP_MEASURES
             if any(p.get(name) is not None for ps in groups.values() for p in ps)]
    fig = _figure(6.4, 1.0 + 1.9 * max(len(shown), 1))
    axes = fig.subplots(max(len(shown), 1), 1, sharex=True, squeeze=False)[:, 0]
    for ax, (name, text) in zip(axes, shown):
        _style(ax)
        for j, (value, ps) in enumerate(groups.items()):
            ps = sorted(ps, key=lambda p: p["k"])
            ks = [p["k"] for p in ps if p.get(name) is not None]
            ys = [p[name] for p in ps if p.get(name) is not None]
            ax.plot(ks, ys, marker=MARKERS[j % len(MARKERS)], color=palette.COMMUNITY[(j + 1) % len(palette.COMMUNITY)],
                    linewidth=1.5, markersize=4, label=None if value == "None" else f"value {value}")
        if recommended is not None:
            ax.axvline(recommended, color=palette.GAP_MARK, linestyle="--", linewidth=1.5)
        ax.set_ylabel(text, fontsize=8)
    if len(groups) > 1:
        legend = axes[0].legend(fontsize=8, frameon=False)
        for t in legend.get_texts():
            t.set_color(palette.INK)
    axes[-1].set_xlabel("k (communities asked for)")
    axes[-1].xaxis.set_major_locator(_int_locator())
    return fig


def sweep_stability(points: Sequence[dict], recommended: int | None = None, stable_ari: float | None = None):
    """Stability of a sweep against k: mean pairwise adjusted Rand index of the repeats, ± one sd.

    ``ARI`` between every two repeats' memberships at the same k (Hubert and Arabie 1985), its mean
    and standard deviation as the sweep records them; a dotted line at the sweep's stability
    threshold and a dashed one at the recommended k.

    Parameters
    ----------
    points : sequence of dict
        ``k``, ``value``, ``ari_mean``, ``ari_sd``.
    recommended : int or None
    stable_ari : float or None

    References
    ----------
    L. Hubert and P. Arabie, "Comparing partitions", Journal of Classification 2 (1985);
    A. Ben-Hur, A. Elisseeff and I. Guyon, "A stability based method for discovering structure in
    clustered data", Pacific Symposium on Biocomputing (2002).
    """
    groups = _by_value(points)
    fig = _figure(6.4, 2.8)
    ax = _axes(fig)
    for j, (value, ps) in enumerate(groups.items()):
        ps = sorted((p for p in ps if p.get("ari_mean") is not None), key=lambda p: p["k"])
        if not ps:
            continue
        ax.errorbar([p["k"] for p in ps], [p["ari_mean"] for p in ps], yerr=[p.get("ari_sd") or 0.0 for p in ps],
                    marker=MARKERS[j % len(MARKERS)], color=palette.COMMUNITY[(j + 1) % len(palette.COMMUNITY)],
                    capsize=3, linewidth=1.5, markersize=4, label=None if value == "None" else f"value {value}")
    if stable_ari is not None:
        ax.axhline(stable_ari, color=palette.INK_SOFT, linestyle=":", linewidth=1)
    if recommended is not None:
        ax.axvline(recommended, color=palette.GAP_MARK, linestyle="--", linewidth=1.5)
    ax.set_ylim(min(0.0, ax.get_ylim()[0]), 1.05)
    ax.set_xlabel("k (communities asked for)")
    ax.set_ylabel("ARI between repeats")
    ax.xaxis.set_major_locator(_int_locator())
    if len(groups) > 1:
        legend = ax.legend(fontsize=8, frameon=False)
        for t in legend.get_texts():
            t.set_color(palette.INK)
    return fig


def _style(ax) -> None:
    ax.set_facecolor(palette.PAPER)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color(palette.INK_SOFT)
    ax.tick_params(colors=palette.INK, labelsize=8)
    ax.yaxis.label.set_color(palette.INK)
    ax.xaxis.label.set_color(palette.INK)


def _int_locator():
    from matplotlib.ticker import MaxNLocator

    return MaxNLocator(integer=True)


# --- chains across versions ------------------------------------------------------------------

def flow_layout(columns: Sequence[Sequence[tuple[int, int]]], steps: Sequence[Sequence[Sequence[int]]],
                *, gap: float = 0.04) -> tuple[list[dict], list[dict]]:
    """Boxes and bands of a flow chart of communities across a chain of runs.

    Column ``i`` stacks its communities top to bottom (the given order), box height ``|C| / H`` with
    ``H`` the largest column's node count plus its gaps; between columns ``i`` and ``i+1`` each
    contingency cell ``n_ab = |A_a ∩ B_b|`` becomes a band of width ``n_ab / H`` that leaves box
    ``a`` and enters box ``b``, bands stacked in the order of the other side's boxes.

    Parameters
    ----------
    columns : sequence of sequence of (community, size)
        Per run, its communities in drawing order.
    steps : sequence of sequence of [a, b, count]
        Per consecutive pair of runs, the non-zero contingency cells.
    gap : float, default 0.04
        Space between boxes, as a share of the drawing's height.

    Returns
    -------
    boxes : list of dict
        ``column``, ``community``, ``size``, ``y0``, ``y1`` (top at 1).
    bands : list of dict
        ``step``, ``a``, ``b``, ``count``, ``a0``, ``a1`` (on box a), ``b0``, ``b1`` (on box b).

    References
    ----------
    Common practice (alluvial flow charts of changing groupings); M. Rosvall and C. T. Bergstrom,
    "Mapping change in large networks", PLoS ONE 5 (2010).
    """
    scale_nodes = max([sum(size for _, size in col) for col in columns] + [1])
    unit = (1.0 - gap * max([len(col) - 1 for col in columns] + [0])) / scale_nodes
    boxes: list[dict] = []
    at: list[dict[int, dict]] = []
    for i, col in enumerate(columns):
        y = 1.0
        here = {}
        for community, size in col:
            box = {"column": i, "community": int(community), "size": int(size), "y0": y - size * unit, "y1": y}
            boxes.append(box)
            here[int(community)] = box
            y -= size * unit + gap
        at.append(here)
    bands: list[dict] = []
    for i, cells in enumerate(steps):
        left, right = at[i], at[i + 1]
        order_a = {c: j for j, c in enumerate(left)}
        order_b = {c: j for j, c in enumerate(right)}
        cells = [(int(a), int(b), int(n)) for a, b, n in cells if int(a) in left and int(b) in right and n > 0]
        out_used = {a: left[a]["y1"] for a in left}
        for a, b, n in sorted(cells, key=lambda c: (order_a[c[0]], order_b[c[1]])):
            top = out_used[a]
            out_used[a] = top - n * unit
            bands.append({"step": i, "a": a, "b": b, "count": n, "a0": top - n * unit, "a1": top})
        in_used = {b: right[b]["y1"] for b in right}
        for band in sorted((bd for bd in bands if bd["step"] == i), key=lambda bd: (order_b[bd["b"]], order_a[bd["a"]])):
            top = in_used[band["b"]]
            in_used[band["b"]] = top - band["count"] * unit
            band["b0"], band["b1"] = top - band["count"] * unit, top
    return boxes, bands


def community_flow(columns: Sequence[Sequence[tuple[int, int]]], steps: Sequence[Sequence[Sequence[int]]],
                   colour_of: Sequence[dict[int, int]], titles: Sequence[str]):
    """Flow chart of communities across a chain of runs: boxes per community, bands by shared nodes.

    Layout by :func:`flow_layout`; each box and the bands leaving it take the colour of its thread
    (the chain of communities matched step by step by the diff's Hungarian matching), so a
    community that continues keeps its colour; bands are drawn as cubic Bézier ribbons.

    Parameters
    ----------
    columns, steps : as :func:`flow_layout`
    colour_of : sequence of dict
        Per run, community -> colour index (``palette.community_colour``); -1 or missing: faint.
    titles : sequence of str
        A heading per column (run and version).

    References
    ----------
    H. W. Kuhn, "The Hungarian method for the assignment problem", Naval Research Logistics
    Quarterly 2 (1955) (the matching); M. Rosvall and C. T. Bergstrom, PLoS ONE 5 (2010)
    (alluvial diagrams).
    """
    from matplotlib.patches import PathPatch, Rectangle
    from matplotlib.path import Path

    boxes, bands = flow_layout(columns, steps)
    n_cols = len(columns)
    fig = _figure(max(4.0, 1.9 * n_cols + 1.0), 4.6)
    ax = fig.add_subplot(1, 1, 1)
    ax.set_facecolor(palette.PAPER)
    ax.set_axis_off()
    width = 0.14

    def colour(i: int, c: int) -> str:
        idx = colour_of[i].get(c, -1) if i < len(colour_of) else -1
        return palette.community_colour(idx) if idx is not None and idx >= 0 else palette.FAINT

    for band in bands:
        x0, x1 = band["step"] + width / 2, band["step"] + 1 - width / 2
        xm = (x0 + x1) / 2
        verts = [(x0, band["a1"]), (xm, band["a1"]), (xm, band["b1"]), (x1, band["b1"]),
                 (x1, band["b0"]), (xm, band["b0"]), (xm, band["a0"]), (x0, band["a0"]), (x0, band["a1"])]
        codes = [Path.MOVETO, Path.CURVE4, Path.CURVE4, Path.CURVE4, Path.LINETO, Path.CURVE4, Path.CURVE4,
                 Path.CURVE4, Path.CLOSEPOLY]
        ax.add_patch(PathPatch(Path(verts, codes), facecolor=colour(band["step"], band["a"]), alpha=0.45,
                               edgecolor="none", zorder=1))
    for box in boxes:
        i = box["column"]
        ax.add_patch(Rectangle((i - width / 2, box["y0"]), width, box["y1"] - box["y0"],
                               facecolor=colour(i, box["community"]), edgecolor=palette.INK, linewidth=0.5,
                               hatch=hatch_of(colour_of[i].get(box["community"], -1) if i < len(colour_of) else -1),
                               zorder=2))
        if box["y1"] - box["y0"] > 0.035:
            ax.text(i - width / 2 - 0.02, (box["y0"] + box["y1"]) / 2, f"{box['community']} ({box['size']})",
                    ha="right", va="center", fontsize=7, color=palette.INK)
    for i, title in enumerate(titles):
        ax.text(i, 1.03, title, ha="center", va="bottom", fontsize=8, color=palette.INK)
    ax.set_xlim(-0.6, n_cols - 0.4)
    ax.set_ylim(min([b["y0"] for b in boxes] + [0.0]) - 0.02, 1.12)
    return fig
