"""Spectral bisection: Fiedler vector splits, the O(m) sweep, recursive bisection."""

from __future__ import annotations

import heapq
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from workspace.errors import ComputeError

from .eigen import SolverContext, largest_eigenpairs, shifted_laplacian_operator
from .laplacians import degrees

__all__ = ["sweep_cut", "fiedler_vector", "split_vector", "fiedler_bisection",
           "recursive_bisection"]


def sweep_cut(A, f: np.ndarray, objective: str = "ncut", d: np.ndarray | None = None
              ) -> tuple[np.ndarray, float, int]:
    r"""Best prefix cut of the nodes sorted by a vector.

    Sort nodes by :math:`f` (ascending, ties by index) and consider the
    ``n - 1`` prefixes :math:`S_t = \{v_1, \dots, v_t\}`. With
    :math:`\mathrm{cut}(S_t) = \mathrm{cut}(S_{t-1}) + d'_{v_t} - 2 w(v_t, S_{t-1})`
    (:math:`d'` the degree without self-loops) every prefix is scored in
    O(m) total after the O(n log n) sort:

    - ``"ncut"``: :math:`\mathrm{cut}/\mathrm{vol}(S) + \mathrm{cut}/\mathrm{vol}(\bar S)`
      (Shi & Malik 2000);
    - ``"conductance"``: :math:`\mathrm{cut}/\min(\mathrm{vol}(S), \mathrm{vol}(\bar S))`
      (Chung 1997).

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)
        Symmetric adjacency, ``n >= 2``.
    f : ndarray, shape (n,)
        Ordering vector (e.g. the Fiedler vector of ``L_rw``).
    objective : {"ncut", "conductance"}, default "ncut"
    d : ndarray, shape (n,), optional
        Degrees (computed if omitted).

    Returns
    -------
    side : ndarray of bool, shape (n,)
        True for the nodes of the best prefix.
    value : float
        Objective of the best prefix (lowest; first one on ties).
    t : int
        Its size.

    Notes
    -----
    A prefix with an empty-volume side scores +inf and is never chosen
    unless all do. Cheeger's inequality guarantees, for the conductance
    sweep over :math:`D^{-1/2}v_2`, :math:`\phi \le \sqrt{2\lambda_2(L_{sym})}`.

    References
    ----------
    Chung (1997), Spectral Graph Theory, Ch. 2; Spielman & Teng (1996),
    Spectral partitioning works, FOCS.
    """
    A = sp.csr_array(A)
    n = A.shape[0]
    if n < 2:
        raise ComputeError("a sweep needs at least 2 nodes")
    if d is None:
        d = degrees(A)
    order = np.argsort(f, kind="stable")
    pos = np.empty(n, dtype=np.int64)
    pos[order] = np.arange(n)
    rows = np.repeat(np.arange(n), np.diff(A.indptr))
    cols = A.indices
    earlier = pos[cols] < pos[rows]            # neighbour already in the prefix
    inner = np.bincount(pos[rows[earlier]], weights=A.data[earlier], minlength=n)
    diag = A.diagonal()
    d_off = d - diag
    cut = np.cumsum(d_off[order] - 2.0 * inner)[:-1]
    vol = np.cumsum(d[order])[:-1]
    total = float(d.sum())
    rest = total - vol
    np.maximum(cut, 0.0, out=cut)
    with np.errstate(divide="ignore", invalid="ignore"):
        if objective == "ncut":
            score = cut / vol + cut / rest
        elif objective == "conductance":
            score = cut / np.minimum(vol, rest)
        else:
            raise ValueError(f"unknown sweep objective {objective!r}")
    score[~np.isfinite(score)] = np.inf
    zero_cut = cut <= 0
    score[zero_cut & (vol > 0) & (rest > 0)] = 0.0
    t = int(np.argmin(score)) + 1
    side = np.zeros(n, dtype=bool)
    side[order[:t]] = True
    return side, float(score[t - 1]), t


def fiedler_vector(A, laplacian: str, ctx: SolverContext, *, extra: int = 1,
                   d: np.ndarray | None = None, stage: str = "fiedler"
                   ) -> tuple[np.ndarray, np.ndarray]:
    r"""Second-smallest eigenpair of a Laplacian of a connected graph.

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)
    laplacian : {"unnormalized", "sym", "rw"}
    ctx : SolverContext
    extra : int, default 1
    d : ndarray, optional
    stage : str, default "fiedler"

    Returns
    -------
    eigenvalues : ndarray, ascending, shape (2 + extra,) or fewer
    f : ndarray, shape (n,)
        Eigenvector of :math:`\lambda_2` of ``L`` (``"unnormalized"``), of
        :math:`L_{sym}` (``"sym"``), or :math:`D^{-1/2}v_2` for
        :math:`L_{rw}` (``"rw"``), sign fixed (largest-magnitude entry positive).

    References
    ----------
    Fiedler (1973), Algebraic connectivity of graphs, Czech. Math. J. 23.
    """
    A = sp.csr_array(A)
    d = degrees(A) if d is None else d
    op, shift, post = shifted_laplacian_operator(A, laplacian, d)
    sol = largest_eigenpairs(op, 2, ctx, stage=stage, bound=shift, extra=extra)
    values = shift - sol.values
    V = sol.vectors if post is None else post(sol.vectors)
    return values, V[:, 1].copy()


def split_vector(A, f: np.ndarray, split: str, objective: str, d: np.ndarray) -> tuple[np.ndarray, float]:
    """Bipartition from an ordering vector.

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)
    f : ndarray, shape (n,)
    split : {"sign", "median", "sweep"}
        ``sign``: ``f > 0`` (falls back to median if one side is empty);
        ``median``: the ``floor(n/2)`` smallest entries (ties by index);
        ``sweep``: :func:`sweep_cut`.
    objective : {"ncut", "conductance"}
    d : ndarray, shape (n,)

    Returns
    -------
    side : ndarray of bool, shape (n,)
    value : float
        Objective of the cut.

    References
    ----------
    Fiedler (1975), A property of eigenvectors of nonnegative symmetric
    matrices, Czech. Math. J. 25 (sign cut); Shi & Malik (2000) (sweep).
    """
    n = f.shape[0]
    if split == "sweep":
        side, value, _ = sweep_cut(A, f, objective, d)
        return side, value
    if split == "sign":
        side = f > 0
        if side.all() or not side.any():
            # a Fiedler vector is orthogonal to a positive vector, so this only
            # happens through rounding; fall back to the median split
            return split_vector(A, f, "median", objective, d)
    elif split == "median":
        side = np.zeros(n, dtype=bool)
        side[np.argsort(f, kind="stable")[: n // 2]] = True
    else:
        raise ValueError(f"unknown split {split!r}")
    return side, _cut_objective(A, side, objective, d)


def _cut_objective(A, side: np.ndarray, objective: str, d: np.ndarray) -> float:
    """ncut or conductance of the bipartition ``side`` (inside ``A``)."""
    A = sp.csr_array(A)
    x = side.astype(np.float64)
    cut = float(x @ (A @ (1.0 - x)))
    vol = float(d[side].sum())
    rest = float(d.sum()) - vol
    if cut <= 0:
        return 0.0
    if objective == "ncut":
        return cut / vol + cut / rest if vol > 0 and rest > 0 else np.inf
    return cut / min(vol, rest) if min(vol, rest) > 0 else np.inf


def _conductance(A, side: np.ndarray, d: np.ndarray) -> float:
    return _cut_objective(A, side, "conductance", d)


def fiedler_bisection(A, ctx: SolverContext, *, laplacian: str = "sym", split: str = "sweep",
                      objective: str = "ncut", extra: int = 1
                      ) -> tuple[np.ndarray, np.ndarray, dict]:
    r"""Bisect a connected graph by its Fiedler vector.

    Compute the eigenvector :math:`f` of the second-smallest eigenvalue
    :math:`\lambda_2` of the chosen Laplacian and cut it by sign, at the
    median, or at the best sweep prefix (:func:`sweep_cut`).

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)
        Connected symmetric adjacency, ``n >= 2``.
    ctx : SolverContext
    laplacian : {"unnormalized", "sym", "rw"}, default "sym"
    split : {"sign", "median", "sweep"}, default "sweep"
    objective : {"ncut", "conductance"}, default "ncut"
    extra : int, default 1
        Eigenvalues computed beyond the second.

    Returns
    -------
    labels : ndarray of int64, shape (n,)
        0/1.
    eigenvalues : ndarray of float64, ascending
    info : dict
        ``cut_objective``, ``conductance`` of the split.

    References
    ----------
    Fiedler (1973), Algebraic connectivity of graphs, Czech. Math. J. 23;
    Shi & Malik (2000); Chung (1997), Spectral Graph Theory.
    """
    A = sp.csr_array(A)
    n = A.shape[0]
    d = degrees(A)
    if n == 2:
        return np.array([0, 1], dtype=np.int64), np.array([], dtype=np.float64), {}
    values, f = fiedler_vector(A, laplacian, ctx, extra=extra, d=d)
    side, value = split_vector(A, f, split, objective, d)
    labels = side.astype(np.int64)
    return labels, values, {"cut_objective": float(value),
                            "conductance": float(_conductance(A, side, d))}


@dataclass(order=True)
class _Candidate:
    score: float
    first: int
    nodes: np.ndarray = None  # type: ignore[assignment]
    side: np.ndarray = None   # type: ignore[assignment]
    conductance: float = 0.0


def recursive_bisection(A, ctx: SolverContext, *, k: int | None, laplacian: str = "sym",
                        split: str = "sweep", objective: str = "ncut",
                        max_conductance: float = 0.2, min_size: int = 2, max_parts: int = 64,
                        extra: int = 1) -> tuple[np.ndarray, np.ndarray, dict]:
    r"""Recursive spectral bisection.

    Keep a pool of parts (initially the whole graph). For each part, its
    best split is: along connected components (cost 0) if the induced
    subgraph is disconnected, otherwise the Fiedler split of the induced
    subgraph (:func:`fiedler_bisection`, degrees taken inside the part).
    Repeatedly split the part whose best split has the lowest objective
    value, until

    - ``k`` parts exist (integer ``k``; ``max_conductance`` is then not
      applied), or
    - (``k=None``, "auto") no remaining split has conductance (inside its
      part) below ``max_conductance``, or ``max_parts`` is reached;

    and in both cases every side keeps at least ``min_size`` nodes.

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)
    ctx : SolverContext
    k : int or None
    laplacian, split, objective : as in :func:`fiedler_bisection`
    max_conductance : float, default 0.2
    min_size : int, default 2
    max_parts : int, default 64
    extra : int, default 1

    Returns
    -------
    labels : ndarray of int64, shape (n,)
    eigenvalues : ndarray, the spectrum computed for the first split
    info : dict
        ``splits`` (list of {size, conductance, objective} per accepted split).

    Raises
    ------
    workspace.errors.ComputeError
        An integer ``k`` that cannot be reached under ``min_size``.

    References
    ----------
    Spielman & Teng (1996), Spectral partitioning works, FOCS;
    Kannan, Vempala & Vetta (2004), On clusterings: good, bad and spectral, JACM 51(3).
    """
    A = sp.csr_array(A)
    n = A.shape[0]
    first_values: list[np.ndarray] = []

    def best_split(nodes: np.ndarray) -> _Candidate | None:
        if nodes.shape[0] < 2 * min_size:
            return None
        sub = A[nodes][:, nodes]
        dsub = degrees(sub)
        ncomp, comp = connected_components(sub, directed=False)
        if ncomp > 1:
            sizes = np.bincount(comp)
            big = int(np.argmax(sizes))
            side = comp == big
            if min_size <= side.sum() <= nodes.shape[0] - min_size:
                return _Candidate(0.0, int(nodes[0]), nodes, side, 0.0)
            # tiny components: bisect the largest component, tiny ones join the smaller side
            inner = np.flatnonzero(side)
            cand = best_split_connected(sub[inner][:, inner], inner.shape[0])
            if cand is None:
                return None
            s_in, score, cond = cand
            full = np.zeros(nodes.shape[0], dtype=bool)
            full[inner[s_in]] = True
            if 2 * int(s_in.sum()) <= inner.shape[0]:
                full[~side] = True    # tiny components join the smaller side
            if not min_size <= full.sum() <= nodes.shape[0] - min_size:
                return None
            return _Candidate(score, int(nodes[0]), nodes, full,
                              _conductance(sub, full, dsub))
        cand = best_split_connected(sub, nodes.shape[0], dsub)
        if cand is None:
            return None
        side, score, cond = cand
        return _Candidate(score, int(nodes[0]), nodes, side, cond)

    def best_split_connected(sub, size, dsub=None):
        if size < 2 * min_size or size < 2:
            return None
        dsub = degrees(sub) if dsub is None else dsub
        if size == 2:
            side = np.array([True, False])
        else:
            values, f = fiedler_vector(sub, laplacian, ctx, extra=extra, d=dsub,
                                       stage="recursive")
            if not first_values:
                first_values.append(values)
            side, _ = split_vector(sub, f, split, objective, dsub)
            if not min_size <= side.sum() <= size - min_size:
                # enforce the size floor by the best balanced-enough sweep prefix
                order = np.argsort(f, kind="stable")
                side = np.zeros(size, dtype=bool)
                t = min(max(int(side.sum()), min_size), size - min_size)
                side[order[:t]] = True
        score = _cut_objective(sub, side, objective, dsub)
        return side, score, _conductance(sub, side, dsub)

    labels = np.zeros(n, dtype=np.int64)
    pool: list[_Candidate] = []
    finished = 0
    root = best_split(np.arange(n))
    parts = 1
    if root is not None:
        heapq.heappush(pool, root)
    splits = []
    target = k if k is not None else max_parts
    while parts < target and pool:
        ctx.check_cancel()
        cand = heapq.heappop(pool)
        if k is None and cand.conductance >= max_conductance:
            break
        left = cand.nodes[cand.side]
        right = cand.nodes[~cand.side]
        labels[right] = parts                  # new label; left keeps the old one
        parts += 1
        splits.append({"size": int(cand.nodes.shape[0]), "conductance": float(cand.conductance),
                       "objective": float(cand.score)})
        for half in (left, right):
            c = best_split(half)
            if c is not None:
                heapq.heappush(pool, c)
        finished += 1
    if k is not None and parts < k:
        raise ComputeError(f"recursive: only {parts} parts can be formed with min_size={min_size} "
                           f"(asked for k={k})")
    values = first_values[0] if first_values else np.array([], dtype=np.float64)
    return labels, values, {"splits": splits}
