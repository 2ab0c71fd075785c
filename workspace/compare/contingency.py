"""Exact community-by-community contingency tables.

Only numpy is needed. Counts are int64 throughout: a table over n nodes holds
cells <= n, so nothing overflows for any n that fits in memory.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from workspace.errors import ComputeError, UsageError

#: Label of a node that its run left without a community ("not assigned").
UNASSIGNED = -1
#: Internal label of a node missing from one side of a cross-version comparison.
ABSENT = -2

# Dense bincount is used for the cell keys while r*c stays below this bound;
# above it the keys are sorted with np.unique instead (memory stays O(n)).
_DENSE_KEY_LIMIT = 1 << 24


@dataclass(frozen=True, eq=False)
class ContingencyTable:
    """Sparse exact contingency table N of two labelings of the same n nodes.

    ``N[p, q] = |{v : a_v = rows[p] and b_v = cols[q]}|``; only non-zero cells are
    stored (coordinate form, sorted by row position then column position).

    Attributes
    ----------
    rows : ndarray of int64, shape (r,)
        Distinct labels of ``a``, ascending (``-2`` absent, ``-1`` unassigned
        sort first when present).
    cols : ndarray of int64, shape (c,)
        Distinct labels of ``b``, ascending.
    cell_row, cell_col : ndarray of int64, shape (nnz,)
        Row / column *positions* (indices into ``rows`` / ``cols``) of the
        non-zero cells.
    cell_count : ndarray of int64, shape (nnz,)
        The cell counts ``n_pq > 0``.
    row_sizes : ndarray of int64, shape (r,)
        Row marginals ``a_p = sum_q n_pq`` (community sizes in ``a``).
    col_sizes : ndarray of int64, shape (c,)
        Column marginals ``b_q = sum_p n_pq``.
    n : int
        Number of nodes, ``sum(cell_count)``.
    """

    rows: np.ndarray
    cols: np.ndarray
    cell_row: np.ndarray
    cell_col: np.ndarray
    cell_count: np.ndarray
    row_sizes: np.ndarray
    col_sizes: np.ndarray
    n: int

    @property
    def shape(self) -> tuple[int, int]:
        """``(r, c)``: number of distinct labels in ``a`` and in ``b``."""
        return int(self.rows.shape[0]), int(self.cols.shape[0])

    @property
    def nnz(self) -> int:
        """Number of non-zero cells."""
        return int(self.cell_count.shape[0])

    def dense(self) -> np.ndarray:
        """Dense int64 array of shape ``(r, c)``; mind the size for large r, c."""
        r, c = self.shape
        out = np.zeros((r, c), dtype=np.int64)
        out[self.cell_row, self.cell_col] = self.cell_count
        return out

    def sparse(self):
        """``scipy.sparse.csr_array`` of shape ``(r, c)`` with int64 counts."""
        import scipy.sparse as sp

        return sp.csr_array((self.cell_count, (self.cell_row, self.cell_col)), shape=self.shape,
                            dtype=np.int64)

    def transpose(self) -> "ContingencyTable":
        """The table of ``(b, a)``: rows and columns swapped, cells re-sorted."""
        order = np.lexsort((self.cell_row, self.cell_col))
        return ContingencyTable(self.cols, self.rows, self.cell_col[order], self.cell_row[order],
                                self.cell_count[order], self.col_sizes, self.row_sizes, self.n)

    def is_one_to_one(self) -> bool:
        """True when every row and every column holds exactly one non-zero cell.

        That is exactly the case of two identical partitions up to a renaming
        of the labels.
        """
        r, c = self.shape
        return r == c == self.nnz


def _as_labels(x, name: str) -> np.ndarray:
    arr = np.asarray(x)
    if arr.ndim != 1:
        raise UsageError(f"{name} must be a 1-D array of integer labels, got shape {arr.shape}")
    if arr.dtype.kind not in "iu":
        if arr.size == 0:
            return np.zeros(0, dtype=np.int64)
        raise UsageError(f"{name} must hold integer labels, got dtype {arr.dtype}")
    if arr.dtype.kind == "u" and arr.size and int(arr.max()) > np.iinfo(np.int64).max:
        raise UsageError(f"{name} holds labels beyond the int64 range")
    return arr.astype(np.int64, copy=False)


def _factorize_labels(labels: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Distinct labels, per-node codes and sizes of an int64 label vector.

    Returns ``(values, codes, sizes)`` with ``values`` ascending (int64, shape
    (r,)), ``codes`` (int64, shape (n,)) such that ``values[codes] == labels``
    and ``sizes`` (int64, shape (r,)) the count of each value. Compact label
    ranges (the usual 0..k-1 plus -1/-2) use a bincount, O(n + range); other
    ranges fall back to sorting, O(n log n).
    """
    n = labels.shape[0]
    if n == 0:
        empty = np.zeros(0, dtype=np.int64)
        return empty, empty.copy(), empty.copy()
    lo = int(labels.min())
    hi = int(labels.max())
    span = hi - lo + 1
    if span <= 4 * n + 1024:
        shifted = labels - lo
        counts = np.bincount(shifted, minlength=span)
        present = counts > 0
        values = np.flatnonzero(present).astype(np.int64) + lo
        remap = np.cumsum(present, dtype=np.int64) - 1
        codes = remap[shifted]
        sizes = counts[present].astype(np.int64, copy=False)
        return values, codes, sizes
    values, codes, sizes = np.unique(labels, return_inverse=True, return_counts=True)
    return values.astype(np.int64), codes.reshape(-1).astype(np.int64), sizes.astype(np.int64)


def _table_from_codes(values_a, codes_a, values_b, codes_b) -> ContingencyTable:
    """Build the table from factorized labels (see :func:`_factorize_labels`)."""
    r = int(values_a.shape[0])
    c = int(values_b.shape[0])
    n = int(codes_a.shape[0])
    # int64 keys: r, c <= n, so r * c <= n**2 < 2**63 for any n < 3e9.
    key = codes_a * np.int64(c) + codes_b
    if r * c <= max(_DENSE_KEY_LIMIT // 4, min(_DENSE_KEY_LIMIT, 4 * n)):
        flat = np.bincount(key, minlength=r * c)
        cells = np.flatnonzero(flat)
        counts = flat[cells].astype(np.int64, copy=False)
    else:
        cells, counts = np.unique(key, return_counts=True)
        counts = counts.astype(np.int64, copy=False)
    cells = cells.astype(np.int64, copy=False)
    cell_row = cells // c
    cell_col = cells - cell_row * c
    row_sizes = np.bincount(codes_a, minlength=r).astype(np.int64, copy=False)
    col_sizes = np.bincount(codes_b, minlength=c).astype(np.int64, copy=False)
    return ContingencyTable(values_a, values_b, cell_row, cell_col, counts, row_sizes, col_sizes, n)


def contingency_table(a, b) -> ContingencyTable:
    """Exact contingency table of two labelings of the same nodes.

    .. math:: n_{pq} = |\\{v : a_v = u_p,\\; b_v = w_q\\}|,\\quad
              a_p = \\sum_q n_{pq},\\quad b_q = \\sum_p n_{pq}

    Parameters
    ----------
    a, b : array_like of int, shape (n,)
        Labels of the same n nodes in the same order. Any integer values are
        accepted (-1 for "not assigned" is an ordinary group here).

    Returns
    -------
    ContingencyTable
        Sparse exact int64 table with ``shape == (r, c)``, r and c the numbers
        of distinct labels; only non-zero cells are stored.

    Raises
    ------
    UsageError
        If ``a`` or ``b`` is not a 1-D integer array, or their lengths differ.

    Notes
    -----
    Cells are counted with int64 keys ``code_a * c + code_b`` (a dense
    ``np.bincount`` while ``r * c`` is small, ``np.unique`` on the keys
    otherwise), so counts are exact and memory stays O(n + nnz) for 10^7 nodes
    and thousands of communities. Node order does not matter.

    References
    ----------
    Hubert, L. & Arabie, P. (1985). Comparing partitions. Journal of
    Classification 2, 193-218 (the contingency table notation used here).
    """
    a = _as_labels(a, "a")
    b = _as_labels(b, "b")
    if a.shape[0] != b.shape[0]:
        raise UsageError(f"label arrays differ in length: {a.shape[0]} and {b.shape[0]}")
    va, ca, _ = _factorize_labels(a)
    vb, cb, _ = _factorize_labels(b)
    return _table_from_codes(va, ca, vb, cb)


def _require_nonempty(table: ContingencyTable) -> None:
    """Raise :class:`ComputeError` for a table over zero nodes."""
    if table.n == 0:
        raise ComputeError("cannot compare partitions of zero nodes")
