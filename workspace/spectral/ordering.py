r"""A cache-friendly computation order for the sparse products of the eigensolver.

In the order nodes arrive from a file, the neighbours of node ``i`` are
scattered over the whole vector, so every entry of a product
:math:`y = S x` reads ``x`` at a random place: on large graphs the product
is limited by memory latency, not arithmetic. Renumbering the nodes in
breadth-first order (the order of Cuthill & McKee 1969 without its degree
sort) puts most neighbours of a node within a narrow band of numbers, so
``x`` is read almost sequentially.

The order is applied *inside* the engine, to the operator only: the
eigensolver runs on :math:`P S P^T`, its start vector is the one drawn in
the original node order and permuted (:math:`P v_0`), and the eigenvectors
are permuted back (:math:`P^T V`) before anything else sees them, so the
embedding, the k-means assignment, labels, stored memberships and hashes
stay in the original order. The order is a pure function of the sparsity
pattern (:func:`computation_order`), so a caller may cache it per version.

References
----------
Cuthill & McKee (1969), Reducing the bandwidth of sparse symmetric matrices,
Proc. 24th ACM National Conference; George & Liu (1981), Computer Solution
of Large Sparse Positive Definite Systems, Prentice-Hall (reverse ordering).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import breadth_first_order, reverse_cuthill_mckee

__all__ = ["ORDER_MIN_NODES", "ORDER_MIN_GAIN", "computation_order", "inverse_order",
           "permuted_scaled", "span_reduction"]

#: Graphs with fewer nodes are solved in their own order: their vectors fit in
#: the processor caches, so a new order cannot pay for itself.
ORDER_MIN_NODES = 500_000

#: The order is used only when it shortens the mean edge span |i - j| at least
#: this many times (:func:`span_reduction`). Measured on a 2-core Xeon with a
#: 480 MB L3 at 3M nodes: a shuffled 2-D grid (span 650x shorter) multiplied
#: 5-10x faster in breadth-first order; a planted partition (a random
#: expander: span only 1.3x shorter) gained nothing and would pay 4 bytes per
#: stored entry for the permuted copy.
ORDER_MIN_GAIN = 4.0

#: Rows per chunk of the in-place passes (bounded temporaries).
_CHUNK_ROWS = 1 << 16


def computation_order(A, *, kind: str = "bfs", min_nodes: int | None = None,
                      min_gain: float | None = None, search: np.ndarray | None = None) -> np.ndarray | None:
    r"""A node order with locality, or None when the graph would not gain from one.

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)
        Symmetric adjacency of a connected graph (one component; rows
        without entries are appended at the end in their own order).
    kind : {"bfs", "rcm"}, default "bfs"
        ``"bfs"``: breadth-first order from the first node with an edge
        (``scipy.sparse.csgraph.breadth_first_order``; O(nnz), several times
        cheaper than RCM on a million nodes and about as local for sparse
        random graphs); ``"rcm"``: reverse Cuthill–McKee
        (``scipy.sparse.csgraph.reverse_cuthill_mckee``).
    min_nodes : int, optional
        Below this many nodes return None; default :data:`ORDER_MIN_NODES`.
    min_gain : float, optional
        Return None when the order shortens the mean edge span less than
        this many times (:func:`span_reduction`); default :data:`ORDER_MIN_GAIN`.
    search : ndarray of int, shape (n,), optional
        For ``kind="bfs"``: the breadth-first order from the first node with
        an edge when the caller has it already (the engine's component search
        is that search); used as it is instead of searching again.

    Returns
    -------
    ndarray of int32 or int64, shape (n,), or None
        ``order[i]`` = the original node at computation position ``i``.

    References
    ----------
    Cuthill & McKee (1969), Proc. 24th ACM National Conference; George & Liu
    (1981), Computer Solution of Large Sparse Positive Definite Systems.
    """
    A = A if isinstance(A, sp.csr_array) else sp.csr_array(A)
    n = A.shape[0]
    if n < (ORDER_MIN_NODES if min_nodes is None else min_nodes) or n < 2:
        return None
    order = search if search is not None and kind == "bfs" and search.shape[0] == n else _search_order(A, kind)
    if order is None:
        return None
    gain = ORDER_MIN_GAIN if min_gain is None else min_gain
    if gain > 0 and span_reduction(A, order) < gain:
        return None
    return order


def _sampled_entries(A: sp.csr_array, rows: int) -> tuple[np.ndarray, np.ndarray]:
    """(row, column) of the stored entries of an evenly spaced sample of at most ``rows`` rows."""
    n = A.shape[0]
    pick = np.unique(np.linspace(0, n - 1, min(n, rows)).astype(np.int64))
    counts = np.diff(A.indptr)[pick]
    starts = A.indptr[pick]
    # entry positions of the sampled rows, without a Python loop
    offsets = np.arange(int(counts.sum())) - np.repeat(np.cumsum(counts) - counts, counts)
    cols = A.indices[np.repeat(starts, counts) + offsets].astype(np.int64)
    return np.repeat(pick, counts), cols


def span_reduction(A: sp.csr_array, order: np.ndarray, rows: int = 65536) -> float:
    r"""How many times shorter the mean edge span :math:`|i - j|` is in ``order``.

    :math:`\bar s(\pi) = \mathrm{mean}_{A_{ij} \ne 0} |\pi_i - \pi_j|` over the
    stored entries of an evenly spaced sample of at most ``rows`` rows;
    returns :math:`\bar s(\mathrm{id}) / \bar s(\pi)` (the mean bandwidth
    measure of Cuthill & McKee 1969, as a ratio). Deterministic.
    """
    rws, cols = _sampled_entries(A, rows)
    if cols.size == 0:
        return 1.0
    inv = inverse_order(order)
    before = float(np.mean(np.abs(rws - cols)))
    after = float(np.mean(np.abs(inv[rws].astype(np.int64) - inv[cols])))
    return before / max(after, 1e-300)


def median_span(A: sp.csr_array, rows: int = 65536) -> float:
    r"""The median edge span :math:`\mathrm{median}_{A_{ij} \ne 0} |i - j|` of ``A`` in its own
    node order, over the stored entries of an evenly spaced sample of at most ``rows`` rows
    (0 for a matrix without entries). Deterministic.

    For ends drawn uniformly at random it is about :math:`(1 - 1/\sqrt 2)\, n \approx 0.29\, n`
    (the median of :math:`|U - V|` for independent uniform :math:`U, V` on :math:`[0, n)`); a node
    order with locality (a breadth-first order of a grid: about :math:`\sqrt n`) keeps it far
    smaller. The median, not the mean, so that a minority of long edges does not hide the locality
    of the rest (the mean is the bandwidth measure of Cuthill & McKee 1969).
    """
    rws, cols = _sampled_entries(A, rows)
    if cols.size == 0:
        return 0.0
    return float(np.median(np.abs(rws - cols)))


def _search_order(A: sp.csr_array, kind: str) -> np.ndarray | None:
    n = A.shape[0]
    if kind == "rcm":
        return reverse_cuthill_mckee(A, symmetric_mode=True)
    if kind != "bfs":
        raise ValueError(f"unknown computation order {kind!r}")
    has_edges = np.diff(A.indptr) > 0
    if not has_edges.any():
        return None
    start = int(np.argmax(has_edges))
    # directed=True on a symmetric pattern: the same search without a transposed copy
    order = breadth_first_order(A, start, directed=True, return_predecessors=False)
    if order.shape[0] < n:             # nodes not reached (other components, isolated): append them
        seen = np.zeros(n, dtype=bool)
        seen[order] = True
        order = np.concatenate([order, np.flatnonzero(~seen).astype(order.dtype)])
    return order


def inverse_order(order: np.ndarray) -> np.ndarray:
    """``inv`` with ``inv[order[i]] = i`` (int32 where it fits)."""
    n = order.shape[0]
    dtype = np.int32 if n < 2 ** 31 else np.int64
    inv = np.empty(n, dtype=dtype)
    inv[order] = np.arange(n, dtype=dtype)
    return inv


def permuted_scaled(A: sp.csr_array, order: np.ndarray, s: np.ndarray | None = None) -> sp.csr_array:
    r""":math:`P\,\mathrm{diag}(s) A\,\mathrm{diag}(s) P^T` in one copy of ``A``.

    Row ``i`` of the result is row ``order[i]`` of ``A`` with its entries in
    the same order, columns renumbered to computation positions; each value
    is ``(A_ij * s_i) * s_j``, the same floating-point operations as
    :func:`workspace.spectral.laplacians.normalized_adjacency`, so the
    entries are bit-identical to those of the normalised adjacency.

    Parameters
    ----------
    A : scipy.sparse.csr_array, shape (n, n)
    order : ndarray of int, shape (n,)
        From :func:`computation_order`.
    s : ndarray of float64, shape (n,), optional
        Symmetric scaling (e.g. :math:`d^{-1/2}`); None for none.

    Returns
    -------
    scipy.sparse.csr_array, shape (n, n)
        float64 values, int32 indices where they fit; peak memory one copy
        of ``A`` plus bounded chunks.
    """
    n = A.shape[0]
    P = A[order]                       # row gather (scipy csr_row_index): a new copy, rows in order
    P = P if isinstance(P, sp.csr_array) else sp.csr_array(P)
    data = P.data if P.data.dtype == np.float64 else P.data.astype(np.float64)
    indices, indptr = P.indices, P.indptr
    inv = inverse_order(order).astype(indices.dtype, copy=False)
    for a in range(0, n, _CHUNK_ROWS):
        b = min(n, a + _CHUNK_ROWS)
        p0, p1 = int(indptr[a]), int(indptr[b])
        if p0 == p1:
            continue
        cols = indices[p0:p1]
        if s is not None:
            seg = data[p0:p1]
            seg *= np.repeat(s[order[a:b]], np.diff(indptr[a:b + 1]))
            seg *= s[cols]
        indices[p0:p1] = inv[cols]
    out = sp.csr_array((data, indices, indptr), shape=(n, n))
    out.has_sorted_indices = False
    return out
