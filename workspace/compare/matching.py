"""One-to-one matching of communities by maximum total overlap (Hungarian method)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.optimize import linear_sum_assignment
from scipy.sparse.csgraph import connected_components

from workspace.compare.contingency import ContingencyTable


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
    # Connected components of the bipartite "shares a node" graph: cells across
    # components are zero, so the optimum is the union of per-component optima.
    g = sp.coo_array((np.ones(cn.shape[0]), (cr, cc + r)), shape=(r + c, r + c)).tocsr()
    _, comp = connected_components(g, directed=False)
    cell_comp = comp[cr]
    n_comp = int(comp.max()) + 1
    # Distinct rows / columns per component (each row and column lies in one).
    row_has = np.flatnonzero(np.bincount(cr, minlength=r))
    col_has = np.flatnonzero(np.bincount(cc, minlength=c))
    rows_per = np.bincount(comp[row_has], minlength=n_comp)
    cols_per = np.bincount(comp[col_has + r], minlength=n_comp)
    simple = (rows_per[cell_comp] == 1) | (cols_per[cell_comp] == 1)
    out_r: list[np.ndarray] = []
    out_c: list[np.ndarray] = []
    # A component with one row or one column: its heaviest cell (first on ties).
    si = np.flatnonzero(simple)
    if si.shape[0]:
        o = np.lexsort((si, -weight[si], cell_comp[si]))
        first = np.ones(o.shape[0], dtype=bool)
        first[1:] = cell_comp[si][o][1:] != cell_comp[si][o][:-1]
        best = si[o[first]]
        out_r.append(cr[best])
        out_c.append(cc[best])
    hard = np.flatnonzero(~simple)
    if hard.shape[0]:
        order = hard[np.argsort(cell_comp[hard], kind="stable")]
        bounds = np.flatnonzero(np.diff(cell_comp[order])) + 1
        for idx in np.split(order, bounds):
            ur, ir = np.unique(cr[idx], return_inverse=True)
            uc, ic = np.unique(cc[idx], return_inverse=True)
            block = np.zeros((ur.shape[0], uc.shape[0]), dtype=np.float64)
            block[ir.reshape(-1), ic.reshape(-1)] = weight[idx]
            ri, ci = linear_sum_assignment(block, maximize=True)
            ok = block[ri, ci] > 0
            out_r.append(ur[ri[ok]])
            out_c.append(uc[ci[ok]])
    mr = np.concatenate(out_r).astype(np.int64)
    mc = np.concatenate(out_c).astype(np.int64)
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
    Solved with ``scipy.optimize.linear_sum_assignment`` (a Hungarian-type
    solver) on each connected component of the bipartite graph of non-zero
    cells separately; zero cells cannot contribute, so the result is a global
    optimum, and tables that split into many small blocks (for example many
    small communities) stay cheap. The lexicographic objective is encoded as
    the weight ``n_pq (K + 1) + J_pq`` with ``K = min(k_a, k_b)``. Renaming
    the labels of either side leaves the matched pairs unchanged up to the
    renaming (except for exact ties).

    References
    ----------
    Kuhn, H. W. (1955). The Hungarian method for the assignment problem.
    Naval Research Logistics Quarterly 2, 83-97.
    Crouse, D. F. (2016). On implementing 2D rectangular assignment
    algorithms. IEEE Trans. Aerospace and Electronic Systems 52, 1679-1696
    (the algorithm behind scipy's solver).
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
