"""Quality measures of a partition of a weighted undirected graph."""

from __future__ import annotations

from typing import Any

import numpy as np
import scipy.sparse as sp

from workspace.errors import ComputeError

from .laplacians import degrees, with_loops_doubled

__all__ = ["quality_measures"]


def _as_csr(A) -> sp.csr_array:
    if not sp.issparse(A):
        raise ComputeError("adjacency must be a scipy.sparse matrix")
    A = sp.csr_array(A)
    if A.shape[0] != A.shape[1]:
        raise ComputeError(f"adjacency must be square (got shape {A.shape})")
    return A


#: Rows per step of the internal-weight sum (bounded temporaries on large graphs).
_QUALITY_CHUNK_ROWS = 1 << 18


def _dense_labels(labels: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``numpy.unique(labels, return_inverse=True)`` (sorted distinct values, int64 index of each
    label among them), by counting instead of sorting when the labels are integers not much larger
    than their number (a partition's labels): the same two arrays. The labels must be non-negative
    (:func:`quality_measures` checks that first)."""
    if (labels.size and labels.dtype.kind in "iu" and np.can_cast(labels.dtype, np.intp)
            and int(labels.max()) < 4 * labels.size + 1024):
        present = np.bincount(labels.ravel()) > 0
        rank = np.cumsum(present, dtype=np.int64) - 1
        return np.flatnonzero(present).astype(labels.dtype), rank[labels.ravel()]
    values, inverse = np.unique(labels, return_inverse=True)
    return values, inverse.ravel().astype(np.int64, copy=False)


def _internal_weights(A: sp.csr_array, data: np.ndarray, lab: np.ndarray, k: int) -> np.ndarray:
    """Per community, the summed weight of the stored entries with both ends in it, in row chunks.

    ``np.add.at`` adds the entries one by one in storage order into one accumulator, the
    operations ``np.bincount(rows, weights)`` performs over the whole matrix, so the sums are
    bit-identical to it while the temporaries stay at a few ``_QUALITY_CHUNK_ROWS`` rows
    instead of five arrays of ``nnz`` entries. The labels are gathered and repeated in the
    narrowest integer type that holds ``k`` (one byte a node for up to 127 communities: the
    gather stays in cache; 0.18 s instead of 0.22 s at 1M nodes, 15M entries).
    """
    internal = np.zeros(k, dtype=np.float64)
    lab = lab.astype(np.min_scalar_type(-max(k, 1)), copy=False)
    indptr, n = A.indptr, A.shape[0]
    for a in range(0, n, _QUALITY_CHUNK_ROWS):
        b = min(n, a + _QUALITY_CHUNK_ROWS)
        p0, p1 = int(indptr[a]), int(indptr[b])
        if p0 == p1:
            continue
        row_of = np.repeat(lab[a:b], np.diff(indptr[a:b + 1]))
        same = row_of == lab[A.indices[p0:p1]]
        np.add.at(internal, row_of[same].astype(np.intp), data[p0:p1][same])
    return internal


def quality_measures(A, labels, *, per_community: bool = True, directed: bool = False) -> dict[str, Any]:
    r"""Cut-based and modularity measures of a node partition.

    With weighted degree :math:`d_i = \sum_j A_{ij}`, volume
    :math:`\mathrm{vol}(S) = \sum_{i \in S} d_i`, total :math:`2m = \sum_i d_i`
    and boundary weight :math:`\mathrm{cut}(S) = \sum_{i \in S, j \notin S} A_{ij}`:

    - ``cut`` :math:`= \tfrac12 \sum_c \mathrm{cut}(C_c)` (each cut edge once);
    - ``ratio_cut`` :math:`= \sum_c \mathrm{cut}(C_c)/|C_c|` (Hagen & Kahng 1992);
    - ``normalized_cut`` :math:`= \sum_c \mathrm{cut}(C_c)/\mathrm{vol}(C_c)`
      (Shi & Malik 2000);
    - per-community conductance
      :math:`\phi(C) = \mathrm{cut}(C)/\min(\mathrm{vol}(C), 2m - \mathrm{vol}(C))`,
      defined as 0 when ``cut(C) = 0``; ``conductance`` overall is the
      **maximum** over communities (the worst community), and
      ``conductance_mean`` the unweighted mean;
    - ``modularity`` :math:`Q = \frac{1}{2m}\sum_{ij}\big(A_{ij} - \frac{d_i d_j}{2m}\big)\delta(c_i, c_j)`
      (Newman & Girvan 2004);
    - ``coverage`` = intra-community weight / total weight;
    - ``sizes``: community sizes indexed by label.

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)
        Symmetric adjacency, weights >= 0. A diagonal entry ``A_ii = w``
        is an undirected self-loop; it counts **twice**, in ``d_i`` and in
        the community's internal weight (:math:`A_{ii} = 2w` in the
        formulas above, as in ``networkx.community.modularity``), and is
        never cut.
    labels : array_like of int, shape (n,)
        Any integer labels (need not be canonical or contiguous).
    per_community : bool, default True
        Include the per-community table under ``"communities"``.
    directed : bool, default False
        ``A`` is an arc matrix (``A_ij`` = weight of i -> j). The cut
        measures, volumes and coverage are those of the symmetrised graph
        :math:`A + A^T` (a loop arc counts once as out- and once as
        in-end, i.e. twice): :math:`d_i` = out-degree + in-degree and
        :math:`\mathrm{cut}(C)` = weight of the arcs leaving plus entering
        :math:`C` (``networkx.cut_size`` on a DiGraph counts both
        directions too). ``modularity`` is the directed one (Leicht &
        Newman 2008), as ``networkx.community.modularity`` computes it on a
        DiGraph: :math:`Q = \frac1m \sum_{ij}\big(A_{ij} - \frac{d^{out}_i d^{in}_j}{m}\big)\delta(c_i, c_j)`,
        :math:`m = \sum_{ij} A_{ij}`.

    Returns
    -------
    dict
        ``k`` (int), ``cut``, ``ratio_cut``, ``normalized_cut``,
        ``conductance``, ``conductance_mean``, ``modularity``, ``coverage``
        (float), ``sizes`` (list of int, by sorted label value),
        ``min_size``, ``max_size`` and, when asked, ``communities``: a list of
        ``{community, size, volume, cut, conductance}`` rows where
        ``community`` is the label value.

    Raises
    ------
    workspace.errors.ComputeError
        Non-square matrix, label vector of the wrong length or negative
        labels.

    Notes
    -----
    O(n + m), float64 sums and int64 counts (no overflow for any graph that
    fits in memory). A graph without edges has ``2m = 0``; then modularity,
    coverage and all cut measures are reported as 0.

    References
    ----------
    Shi & Malik (2000), Normalized cuts and image segmentation, IEEE TPAMI.
    Newman & Girvan (2004), Finding and evaluating community structure in
    networks, Phys. Rev. E 69, 026113.
    Leicht & Newman (2008), Community structure in directed networks, Phys.
    Rev. Lett. 100, 118703.
    Kannan, Vempala & Vetta (2004), On clusterings: good, bad and spectral, JACM.
    """
    A = _as_csr(A)
    n = A.shape[0]
    labels = np.asarray(labels)
    if labels.shape != (n,):
        raise ComputeError(f"labels have shape {labels.shape}, expected ({n},)")
    if labels.dtype.kind not in "iu":
        if labels.dtype.kind == "f" and np.all(np.isfinite(labels)) and np.all(labels == np.round(labels)):
            labels = labels.astype(np.int64)
        else:
            raise ComputeError("labels must be integers")
    if n and labels.min() < 0:
        raise ComputeError("labels must be non-negative")
    values, lab = _dense_labels(labels)
    k = int(values.shape[0])
    sizes = np.bincount(lab, minlength=k).astype(np.int64)
    arcs = A
    A = sp.csr_array(A + A.T) if directed else with_loops_doubled(A)   # loops: A_ii = 2w
    data = A.data.astype(np.float64, copy=False)
    degree = degrees(A)
    volume = np.bincount(lab, weights=degree, minlength=k)
    two_m = float(degree.sum())
    internal = _internal_weights(A, data, lab, k)                         # sum_{i,j in c} A_ij
    cut_c = volume - internal
    cut_c[cut_c < 0] = 0.0                                  # rounding guard
    cut_total = float(cut_c.sum()) / 2.0
    denom = np.minimum(volume, two_m - volume)
    conductance = np.zeros(k)
    pos = (cut_c > 0) & (denom > 0)
    conductance[pos] = cut_c[pos] / denom[pos]
    ratio_cut = float(np.sum(cut_c / sizes)) if k else 0.0
    ncut_terms = np.zeros(k)
    vpos = volume > 0
    ncut_terms[vpos] = cut_c[vpos] / volume[vpos]
    if two_m > 0 and directed:
        m_arcs = two_m / 2.0
        out_c = np.bincount(lab, weights=np.asarray(arcs.sum(axis=1)).ravel(), minlength=k)
        in_c = np.bincount(lab, weights=np.asarray(arcs.sum(axis=0)).ravel(), minlength=k)
        modularity = float(internal.sum() / two_m - np.sum(out_c * in_c) / m_arcs ** 2)
        coverage = float(internal.sum() / two_m)
    elif two_m > 0:
        modularity = float(internal.sum() / two_m - np.sum((volume / two_m) ** 2))
        coverage = float(internal.sum() / two_m)
    else:
        modularity = 0.0
        coverage = 0.0
    out: dict[str, Any] = {
        "k": k,
        "cut": cut_total,
        "ratio_cut": ratio_cut,
        "normalized_cut": float(ncut_terms.sum()),
        "conductance": float(conductance.max()) if k else 0.0,
        "conductance_mean": float(conductance.mean()) if k else 0.0,
        "modularity": modularity,
        "coverage": coverage,
        "sizes": [int(s) for s in sizes],
        "min_size": int(sizes.min()) if k else 0,
        "max_size": int(sizes.max()) if k else 0,
    }
    if per_community:
        out["communities"] = [
            {"community": int(values[c]), "size": int(sizes[c]), "volume": float(volume[c]),
             "cut": float(cut_c[c]), "conductance": float(conductance[c])}
            for c in range(k)
        ]
    return out
