"""One-to-one matching of communities by maximum total overlap (an exact assignment).

Only numpy at import; scipy's sparse solver loads when a table needs it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from workspace.compare.contingency import ContingencyTable

# Rounds of the exchange bound before the rest goes to the exact solver.
_MAX_ROUNDS = 8
# A left-over block up to this many cells is solved dense (fast on dense blocks);
# larger ones by the sparse solver (memory O(non-zero cells)).
_DENSE_BLOCK = 1 << 24


@dataclass(frozen=True)
class CommunityMatch:
    """A matched pair of communities.

    Attributes
    ----------
    a, b : int
        Community labels in A and in B.
    overlap : int
        ``n_ab``, nodes in both.
    jaccard : float
        ``n_ab / (|A_a| + |B_b| - n_ab)``.
    size_a, size_b : int
        ``|A_a|`` and ``|B_b|`` over the compared nodes.
    """

    a: int
    b: int
    overlap: int
    jaccard: float
    size_a: int
    size_b: int

    def to_dict(self) -> dict:
        return {"a": self.a, "b": self.b, "overlap": self.overlap, "jaccard": self.jaccard,
                "size_a": self.size_a, "size_b": self.size_b}


def _dominant_pairs(r: int, c: int, cr: np.ndarray, cc: np.ndarray, w: np.ndarray
                    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Cells that some optimal matching contains, by the exchange bound; see
    :func:`match_communities`. Returns (mask of fixed cells, fixed rows, fixed cols)."""
    # Heaviest and second heaviest cell of each row (ties: lowest column first).
    o = np.lexsort((cc, -w, cr))
    cr_o = cr[o]
    first = np.ones(o.shape[0], dtype=bool)
    first[1:] = cr_o[1:] != cr_o[:-1]
    second = np.zeros(o.shape[0], dtype=bool)
    second[1:] = first[:-1] & ~first[1:]
    row_best = np.full(r, -1, dtype=np.int64)
    row_best[cr_o[first]] = o[first]
    row_second = np.zeros(r, dtype=np.float64)
    row_second[cr_o[second]] = w[o[second]]
    o = np.lexsort((cr, -w, cc))
    cc_o = cc[o]
    first = np.ones(o.shape[0], dtype=bool)
    first[1:] = cc_o[1:] != cc_o[:-1]
    second = np.zeros(o.shape[0], dtype=bool)
    second[1:] = first[:-1] & ~first[1:]
    col_best = np.full(c, -1, dtype=np.int64)
    col_best[cc_o[first]] = o[first]
    col_second = np.zeros(c, dtype=np.float64)
    col_second[cc_o[second]] = w[o[second]]
    # Cell e = (p, q) is fixed when it is the chosen heaviest cell of its row and of its
    # column and w_e >= (heaviest other cell of row p) + (heaviest other cell of column q).
    cand = row_best[row_best >= 0]
    cand = cand[col_best[cc[cand]] == cand]
    ok = w[cand] >= row_second[cr[cand]] + col_second[cc[cand]]
    fixed = cand[ok]
    mask = np.zeros(w.shape[0], dtype=bool)
    mask[fixed] = True
    return mask, cr[fixed], cc[fixed]


def _solve_dense(r: int, c: int, cr: np.ndarray, cc: np.ndarray, w: np.ndarray
                 ) -> tuple[np.ndarray, np.ndarray]:
    """Exact maximum-weight partial matching with ``scipy.optimize.linear_sum_assignment``
    on the dense r x c block (zero where no cell); pairs of weight 0 are dropped."""
    from scipy.optimize import linear_sum_assignment

    block = np.zeros((r, c), dtype=np.float64)
    block[cr, cc] = w
    ri, ci = linear_sum_assignment(block, maximize=True)
    ok = block[ri, ci] > 0
    return ri[ok].astype(np.int64), ci[ok].astype(np.int64)


def _solve_sparse(r: int, c: int, cr: np.ndarray, cc: np.ndarray, w: np.ndarray
                  ) -> tuple[np.ndarray, np.ndarray]:
    """Exact maximum-weight partial matching on the non-zero cells (all w > 0).

    Padded to a perfect matching problem on (rows + dummy columns) x (columns +
    dummy rows) and solved by ``scipy.sparse.csgraph.min_weight_full_bipartite_matching``.
    """
    from scipy.sparse import csr_array
    from scipy.sparse.csgraph import min_weight_full_bipartite_matching

    m = cr.shape[0]
    big = float(w.max()) * 2.0 + 1.0
    # Vertices: rows 0..r-1, then one dummy per column (r..r+c-1) on the left;
    # columns 0..c-1, then one dummy per row (c..c+r-1) on the right.
    # Real cell (p, q): cost big - w; row p left alone: (p, dummy p) cost big; column q
    # left alone: (dummy q, q) cost big; (dummy q, dummy p) for every real cell, cost big,
    # so a matched pair frees its two dummies. Every perfect matching has r + c edges, so
    # the constant shift by big changes no optimum, and all costs are > 0 (sparse zeros
    # would be missing edges).
    rr = np.concatenate([cr, np.arange(r), r + np.arange(c), r + cc])
    kk = np.concatenate([cc, c + np.arange(r), np.arange(c), c + cr])
    cost = np.concatenate([big - w, np.full(r + c + m, big)])
    g = csr_array((cost, (rr, kk)), shape=(r + c, r + c))
    left, right = min_weight_full_bipartite_matching(g)
    real = (left < r) & (right < c)
    return left[real].astype(np.int64), right[real].astype(np.int64)


def _solve_rest(cr: np.ndarray, cc: np.ndarray, w: np.ndarray):
    """Yield exact matched (row, col) positions for each connected block of the cells."""
    from scipy.sparse import coo_array
    from scipy.sparse.csgraph import connected_components

    ur, ir = np.unique(cr, return_inverse=True)
    uc, ic = np.unique(cc, return_inverse=True)
    ir, ic = ir.reshape(-1), ic.reshape(-1)
    nr, nc = ur.shape[0], uc.shape[0]
    g = coo_array((np.ones(ir.shape[0]), (ir, ic + nr)), shape=(nr + nc, nr + nc)).tocsr()
    _, comp = connected_components(g, directed=False)
    cell_comp = comp[ir]
    order = np.argsort(cell_comp, kind="stable")
    bounds = np.flatnonzero(np.diff(cell_comp[order])) + 1
    for idx in np.split(order, bounds):
        br, jr = np.unique(ir[idx], return_inverse=True)
        bc, jc = np.unique(ic[idx], return_inverse=True)
        solve = _solve_dense if br.shape[0] * bc.shape[0] <= _DENSE_BLOCK else _solve_sparse
        pr, pc = solve(br.shape[0], bc.shape[0], jr.reshape(-1), jc.reshape(-1), w[idx])
        yield ur[br[pr]], uc[bc[pc]]


def _match_positions(table: ContingencyTable) -> tuple[np.ndarray, np.ndarray]:
    """Matched (row position, column position) pairs; see :func:`match_communities`."""
    rows_ok = table.rows >= 0
    cols_ok = table.cols >= 0
    keep = rows_ok[table.cell_row] & cols_ok[table.cell_col]
    cr = table.cell_row[keep]
    cc = table.cell_col[keep]
    cn = table.cell_count[keep]
    if cn.shape[0] == 0:
        empty = np.zeros(0, dtype=np.int64)
        return empty, empty.copy()
    r, c = table.shape
    # Jaccard is the tie-break: weight = overlap * (K + 1) + jaccard with
    # K = min(r, c) >= any total Jaccard, so one unit of overlap always wins.
    jac = cn / (table.row_sizes[cr] + table.col_sizes[cc] - cn)
    K = min(r, c)
    weight = cn.astype(np.float64) * (K + 1) + jac
    out_r: list[np.ndarray] = []
    out_c: list[np.ndarray] = []
    # Fix dominant cells, drop their rows and columns, repeat on what is left: removing
    # cells only lowers the bounds, so every round's cells are optimal together.
    for _ in range(_MAX_ROUNDS):
        mask, fr, fc = _dominant_pairs(r, c, cr, cc, weight)
        if fr.shape[0] == 0:
            break
        out_r.append(fr)
        out_c.append(fc)
        row_gone = np.zeros(r, dtype=bool)
        row_gone[fr] = True
        col_gone = np.zeros(c, dtype=bool)
        col_gone[fc] = True
        rest = ~(row_gone[cr] | col_gone[cc])
        cr, cc, weight = cr[rest], cc[rest], weight[rest]
        if cr.shape[0] == 0:
            break
    if cr.shape[0]:
        # What the bound leaves open goes to an exact solver, one connected block of
        # the "shares a node" graph at a time (cells across blocks are zero).
        for br, bc in _solve_rest(cr, cc, weight):
            out_r.append(br)
            out_c.append(bc)
    mr = np.concatenate(out_r).astype(np.int64) if out_r else np.zeros(0, dtype=np.int64)
    mc = np.concatenate(out_c).astype(np.int64) if out_c else np.zeros(0, dtype=np.int64)
    o = np.argsort(mr, kind="stable")
    return mr[o], mc[o]


def match_communities(table: ContingencyTable) -> list[CommunityMatch]:
    """Hungarian matching of A's communities to B's maximising total overlap.

    .. math:: \\max_{\\pi} \\sum_{p} n_{p\\,\\pi(p)}

    over partial one-to-one maps pi from communities of A to communities of B;
    among maximising maps, the total Jaccard index
    ``J_pq = n_pq / (a_p + b_q - n_pq)`` is maximised.

    Parameters
    ----------
    table : ContingencyTable
        Table of A (rows) against B (columns). Rows and columns with a
        negative label (-1 unassigned, -2 absent) are never matched.

    Returns
    -------
    list of CommunityMatch
        Sorted by A label; only pairs with overlap > 0 (a community that
        shares no node with any unmatched community stays unmatched), so at
        most ``min(k_a, k_b)`` matches.

    Raises
    ------
    None

    Notes
    -----
    Works on the non-zero cells only (zero cells cannot contribute), in time
    about proportional to their number. The lexicographic objective is
    encoded as the weight ``w_pq = n_pq (K + 1) + J_pq`` with
    ``K = min(k_a, k_b)`` (total Jaccard never reaches K + 1).

    1. *Exchange bound.* A cell (p, q) that is the heaviest of its row and of
       its column and satisfies ``w_pq >= max_{q' != q} w_pq' + max_{p' != p} w_p'q``
       belongs to some optimal matching: in any matching, replacing the (at
       most two) pairs using row p and column q by (p, q) loses nothing. All
       such cells are fixed at once (they share no row or column), their rows
       and columns removed, and the test repeated on the rest (removal only
       lowers the right-hand sides). For two partitions that mostly agree this
       settles every community; no solver is loaded.
    2. *Exact solver* for whatever is left: per connected block of cells, a
       block of at most 2^24 cells (128 MB) by
       ``scipy.optimize.linear_sum_assignment`` on the dense block (fastest on
       the near-dense blocks of unrelated partitions); a larger one padded to
       a perfect matching (a dummy partner per row and per column, cost
       shifted to be positive) and solved by
       ``scipy.sparse.csgraph.min_weight_full_bipartite_matching`` on the
       sparse cost, never as a dense array.

    The result maximises total overlap exactly (equal, up to ties, to
    ``scipy.optimize.linear_sum_assignment`` on the dense table). Renaming the
    labels of either side leaves the matched pairs unchanged up to the
    renaming (except for exact ties).

    References
    ----------
    Kuhn, H. W. (1955). The Hungarian method for the assignment problem.
    Naval Research Logistics Quarterly 2, 83-97.
    Jonker, R. & Volgenant, A. (1987). A shortest augmenting path algorithm
    for dense and sparse linear assignment problems. Computing 38, 325-340
    (the family of scipy's sparse solver; recalled from memory).
    """
    mr, mc = _match_positions(table)
    return _matches_from_positions(table, mr, mc)


def _matches_from_positions(table: ContingencyTable, mr: np.ndarray, mc: np.ndarray
                           ) -> list[CommunityMatch]:
    """Build :class:`CommunityMatch` objects for matched positions."""
    if mr.shape[0] == 0:
        return []
    c = table.shape[1]
    key = table.cell_row * c + table.cell_col  # sorted ascending (row, col)
    want = mr * c + mc
    overlap = table.cell_count[np.searchsorted(key, want)]
    size_a = table.row_sizes[mr]
    size_b = table.col_sizes[mc]
    jac = overlap / (size_a + size_b - overlap)
    return [CommunityMatch(int(a), int(b), int(o), float(j), int(x), int(y))
            for a, b, o, j, x, y in zip(table.rows[mr].tolist(), table.cols[mc].tolist(),
                                        overlap.tolist(), jac.tolist(), size_a.tolist(),
                                        size_b.tolist())]
