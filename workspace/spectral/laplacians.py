r"""Degrees, normalised adjacency and the three graph Laplacians.

Conventions (Chung 1997): for a node of degree 0, ``D^-1/2`` and ``D^-1``
are taken as 0, so an isolated node has ``(L_sym)_ii = (L_rw)_ii = 0`` and
contributes the eigenvalue 0, like a component of its own. Row ``i`` is
node ``i`` throughout.

Self-loops (one convention for every Laplacian and quality measure): an
undirected loop of weight ``w`` at node ``i`` is given as ``A_ii = w`` (as
``networkx.to_scipy_sparse_array`` and ``GraphData.adjacency`` write it)
and counts **twice**, once per edge end: the matrices are built from
:math:`A' = A + \mathrm{diag}(A_{ii})` (:math:`A'_{ii} = 2w`), so
:math:`d_i = \sum_{j \ne i} A_{ij} + 2w`. This is the convention of
Newman's modularity formula and of ``networkx.degree`` and
``networkx.community.modularity`` (Newman 2010, Networks, Sec. 6.2).
``L = D - A'`` is unaffected by loops; ``L_sym`` and ``L_rw`` see them
through the degree and the diagonal (a random walker stays put with
probability :math:`2w/d_i`).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

__all__ = ["degrees", "inverse_sqrt_degrees", "normalized_adjacency", "laplacian_matrix",
           "with_loops_doubled"]


def with_loops_doubled(A) -> sp.csr_array:
    r"""The loop convention applied: :math:`A' = A + \mathrm{diag}(A_{11}, \dots, A_{nn})`.

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)
        Adjacency with an undirected self-loop of weight ``w`` stored as
        ``A_ii = w``.

    Returns
    -------
    scipy.sparse.csr_array, shape (n, n)
        ``A`` itself (no copy) when it has no self-loop; otherwise a new
        matrix with ``A'_ii = 2 A_ii``.

    References
    ----------
    Newman (2010), Networks: An Introduction, Sec. 6.2 (an undirected
    self-edge contributes 2 to :math:`A_{ii}`); Newman & Girvan (2004).
    """
    A = A if isinstance(A, sp.csr_array) else sp.csr_array(A)
    diag = A.diagonal()
    if not np.any(diag):
        return A
    out = sp.csr_array(A + sp.diags_array(diag.astype(A.dtype, copy=False)))
    out.sort_indices()
    return out


def degrees(A) -> np.ndarray:
    r"""Weighted degrees :math:`d_i = \sum_j A_{ij}` as float64, shape (n,).

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)

    Returns
    -------
    ndarray of float64, shape (n,)

    Notes
    -----
    Plain row sums of the matrix given: pass :func:`with_loops_doubled`
    of the adjacency for the package's loop convention (a loop counts
    twice). O(nnz); rows without entries get 0.

    References
    ----------
    Chung (1997), Spectral Graph Theory, Sec. 1.2.
    """
    A = sp.csr_array(A)
    out = np.zeros(A.shape[0], dtype=np.float64)
    if A.nnz:
        rows_nonempty = np.diff(A.indptr) > 0
        sums = np.add.reduceat(A.data.astype(np.float64, copy=False), A.indptr[:-1][rows_nonempty])
        out[rows_nonempty] = sums
    return out


def inverse_sqrt_degrees(d: np.ndarray) -> np.ndarray:
    r""":math:`d_i^{-1/2}` with the convention :math:`0^{-1/2} := 0` (no division by zero).

    Parameters
    ----------
    d : ndarray of float64, shape (n,)

    Returns
    -------
    ndarray of float64, shape (n,)

    References
    ----------
    Chung (1997), Spectral Graph Theory, Sec. 1.2 (the same convention for
    isolated vertices).
    """
    out = np.zeros_like(d, dtype=np.float64)
    pos = d > 0
    out[pos] = 1.0 / np.sqrt(d[pos])
    return out


def normalized_adjacency(A, d: np.ndarray | None = None, *, regularizer: float = 0.0) -> sp.csr_array:
    r"""The normalised adjacency :math:`N = D_\tau^{-1/2} A D_\tau^{-1/2}`.

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)
        Symmetric adjacency, weights >= 0.
    d : ndarray of float64, shape (n,), optional
        Degrees (computed if omitted).
    regularizer : float, default 0.0
        :math:`\tau` in :math:`D_\tau = D + \tau I` (Qin & Rohe 2013);
        0 gives the plain :math:`D^{-1/2} A D^{-1/2}` (Ng, Jordan & Weiss 2001).

    Returns
    -------
    scipy.sparse.csr_array, shape (n, n)
        Shares ``indices``/``indptr`` with ``A`` when ``A`` is CSR (only
        the values are new), so no second copy of the structure is made.

    Notes
    -----
    The spectrum of ``N`` lies in [-1, 1] (Chung 1997, Lemma 1.7).

    References
    ----------
    Chung (1997), Spectral Graph Theory, CBMS 92, AMS.
    """
    A = A if isinstance(A, sp.csr_array) else sp.csr_array(A)
    if d is None:
        d = degrees(A)
    s = inverse_sqrt_degrees(d + regularizer)
    data = A.data.astype(np.float64, copy=True)
    indptr, n = A.indptr, A.shape[0]
    step = 1 << 16                         # row chunks: temporaries of bounded size, not 2 x nnz
    for a in range(0, n, step):
        b = min(n, a + step)
        p0, p1 = int(indptr[a]), int(indptr[b])
        seg = data[p0:p1]
        seg *= np.repeat(s[a:b], np.diff(indptr[a:b + 1]))
        seg *= s[A.indices[p0:p1]]
    N = sp.csr_array((data, A.indices, A.indptr), shape=A.shape)
    N.has_sorted_indices = A.has_sorted_indices
    return N


def laplacian_matrix(A, kind: str = "sym") -> sp.csr_array:
    r"""A graph Laplacian as a sparse matrix.

    - ``"unnormalized"``: :math:`L = D - A`
    - ``"sym"``: :math:`L_{sym} = D^{-1/2} L D^{-1/2} = I' - D^{-1/2} A D^{-1/2}`
    - ``"rw"``: :math:`L_{rw} = D^{-1} L = I' - D^{-1} A` (not symmetric)

    where :math:`I'` has 1 on the diagonal of non-isolated nodes and 0 on
    isolated ones (Chung 1997).

    built from :math:`A' = A + \mathrm{diag}(A_{ii})` and its row sums
    :math:`D` (a self-loop counts twice; see the module notes).

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)
        Symmetric adjacency; a loop of weight ``w`` as ``A_ii = w``.
    kind : {"unnormalized", "sym", "rw"}, default "sym"

    Returns
    -------
    scipy.sparse.csr_array, shape (n, n), float64

    Raises
    ------
    ValueError
        Unknown ``kind``.

    References
    ----------
    Chung (1997), Spectral Graph Theory; von Luxburg (2007), A tutorial on
    spectral clustering, Statistics and Computing 17(4).
    """
    A = with_loops_doubled(sp.csr_array(A, dtype=np.float64))
    d = degrees(A)
    n = A.shape[0]
    if kind == "unnormalized":
        return sp.csr_array(sp.diags_array(d) - A)
    nonisolated = (d > 0).astype(np.float64)
    if kind == "sym":
        return sp.csr_array(sp.diags_array(nonisolated) - normalized_adjacency(A, d))
    if kind == "rw":
        inv = np.zeros(n)
        inv[d > 0] = 1.0 / d[d > 0]
        return sp.csr_array(sp.diags_array(nonisolated) - sp.diags_array(inv) @ A)
    raise ValueError(f"unknown Laplacian {kind!r}")
