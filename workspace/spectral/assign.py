"""k-way assignment of spectral embeddings: seeded k-means++ and Yu–Shi discretisation."""

from __future__ import annotations

import numpy as np

from workspace.errors import ComputeError

__all__ = ["kmeans", "discretize", "KMEANS_SAMPLE_SIZE"]

#: Above this many rows, the restarts run on a seeded uniform subsample and
#: only the best one is refined by Lloyd iterations on all rows.
KMEANS_SAMPLE_SIZE = 20_000


def _sq_dist_to(XT: np.ndarray, x2: np.ndarray, C: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
    """Squared Euclidean distances, shape (c, n), of the columns of ``XT`` (dim × n) to the rows of C
    (into ``out`` when given: C-contiguous float64 of that shape)."""
    D = C @ XT if out is None else np.matmul(C, XT, out=out)
    D *= -2.0
    D += x2[None, :]
    D += np.einsum("ij,ij->i", C, C)[:, None]
    np.maximum(D, 0.0, out=D)
    return D


def _argmin_rows(D: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(argmin over axis 0, the minima) of a (c, n) array of finite values; ties go to the lowest
    row, as ``numpy.argmin``. Row by row in place: ``argmin(D, axis=0)`` on a C-ordered block
    copies it transposed first (10M rows, k = 8: a 640 MB copy per Lloyd iteration, most of
    k-means' 3.9 s of system time)."""
    arg = np.zeros(D.shape[1], dtype=np.intp)
    best = D[0].copy()
    better = np.empty(D.shape[1], dtype=bool)
    for c in range(1, D.shape[0]):
        np.less(D[c], best, out=better)
        np.copyto(best, D[c], where=better)
        np.copyto(arg, c, where=better)
    return arg, best


def _kmeans_pp(XT: np.ndarray, x2: np.ndarray, k: int, rng: np.random.Generator) -> np.ndarray:
    """Greedy k-means++ seeding (Arthur & Vassilvitskii 2007), 2 + ⌊ln k⌋ trials per centre."""
    n = XT.shape[1]
    trials = 2 + int(np.log(k))
    centers = np.empty((k, XT.shape[0]), dtype=np.float64)
    first = int(rng.integers(n))
    centers[0] = XT[:, first]
    closest = _sq_dist_to(XT, x2, centers[:1])[0]
    for c in range(1, k):
        cum = np.cumsum(closest)
        if cum[-1] <= 0:
            cand = rng.integers(n, size=trials)          # all points already covered
        else:
            cand = np.searchsorted(cum, rng.random(trials) * cum[-1], side="right")
            np.minimum(cand, n - 1, out=cand)
        dist = _sq_dist_to(XT, x2, np.ascontiguousarray(XT[:, cand].T))   # (trials, n)
        np.minimum(dist, closest[None, :], out=dist)
        best = int(np.argmin(dist.sum(axis=1)))
        centers[c] = XT[:, cand[best]]
        closest = dist[best].copy()
    return centers


def _lloyd(XT: np.ndarray, x2: np.ndarray, centers: np.ndarray, max_iter: int,
           tol_abs: float) -> tuple[np.ndarray, np.ndarray, float, int]:
    """Lloyd iterations on ``XT`` (dim × n); an empty cluster takes the worst-served point."""
    dim, n = XT.shape
    k = centers.shape[0]
    centers = centers.copy()
    labels = np.full(n, -1, dtype=np.int64)
    it = 0
    cols = np.arange(n)
    # one distance block for every iteration: a fresh (k x n) block each time was mapped, zeroed
    # and unmapped by the kernel (10M rows: 640 MB an iteration, 4.5 s of system time)
    D = np.empty((k, n), dtype=np.float64)
    for it in range(1, max_iter + 1):
        # argmin_c ||x - c||^2 = argmin_c (||c||^2 - 2 x.c): ||x||^2 is not needed here
        np.matmul(centers, XT, out=D)
        D *= -2.0
        D += np.einsum("ij,ij->i", centers, centers)[:, None]
        new_labels = _argmin_rows(D)[0]
        counts = np.bincount(new_labels, minlength=k)
        if np.any(counts == 0):
            dmin = D[new_labels, cols] + x2
            for c in np.flatnonzero(counts == 0):
                order = np.argsort(-dmin, kind="stable")
                for idx in order:
                    if counts[new_labels[idx]] > 1:
                        break
                counts[new_labels[idx]] -= 1
                new_labels[idx] = c
                counts[c] = 1
                dmin[idx] = 0.0
        sums = np.empty((k, dim), dtype=np.float64)
        for j in range(dim):
            sums[:, j] = np.bincount(new_labels, weights=XT[j], minlength=k)
        new_centers = sums / np.maximum(counts, 1)[:, None]
        shift = float(np.sum((new_centers - centers) ** 2))
        changed = not np.array_equal(new_labels, labels)
        centers = new_centers
        labels = new_labels
        if not changed or shift <= tol_abs:
            break
    D = _sq_dist_to(XT, x2, centers, out=D)
    final, dbest = _argmin_rows(D)
    inertia = float(dbest.sum())
    if np.bincount(final, minlength=k).min() == 0:
        final = labels  # keep the non-empty assignment of the last step
        inertia = float(D[labels, cols].sum())
    return final, centers, inertia, it


def kmeans(X: np.ndarray, k: int, *, seed: int = 0, n_init: int = 10, max_iter: int = 300,
           tol: float = 1e-4, sample_size: int = KMEANS_SAMPLE_SIZE
           ) -> tuple[np.ndarray, np.ndarray, float, dict]:
    r"""k-means (Lloyd) with greedy k-means++ seeding and seeded restarts.

    Minimises the inertia :math:`\sum_i \min_c \|x_i - \mu_c\|^2`. Each of
    ``n_init`` restarts seeds centres by k-means++ (Arthur & Vassilvitskii
    2007, with 2 + ⌊ln k⌋ greedy trials per centre) and runs Lloyd
    iterations (Lloyd 1982); the restart with the lowest inertia is kept.

    Parameters
    ----------
    X : ndarray of float64, shape (n, dim)
        Rows to cluster.
    k : int
        Number of clusters, ``1 <= k <= n``.
    seed : int, default 0
        Seed of ``numpy.random.default_rng``.
    n_init : int, default 10
    max_iter : int, default 300
        Lloyd iterations per restart.
    tol : float, default 1e-4
        Stop when the summed squared centre shift falls below ``tol`` times
        the mean per-dimension variance of ``X`` (the criterion of
        ``sklearn.cluster.KMeans``; common practice), or no label changes.
    sample_size : int, default 20000
        For ``n > sample_size`` the restarts run on a seeded uniform
        subsample of that many rows; the best centres are then refined by
        Lloyd on all rows (restarts cost O(sample) instead of O(n)).

    Returns
    -------
    labels : ndarray of int64, shape (n,)
        Cluster of each row; every cluster is non-empty.
    centers : ndarray of float64, shape (k, dim)
    inertia : float
    info : dict
        ``iterations`` (Lloyd iterations in total), ``sampled`` (bool).

    Raises
    ------
    workspace.errors.ComputeError
        If ``X`` has fewer than ``k`` distinct rows (k non-empty clusters
        are then impossible) or contains NaN/inf.

    Notes
    -----
    Vectorised numpy: distances by :math:`\|x\|^2 - 2 x\cdot c + \|c\|^2`,
    centre sums by ``bincount``. Deterministic for a given seed.

    References
    ----------
    Lloyd (1982), Least squares quantization in PCM, IEEE Trans. Inf. Theory.
    Arthur & Vassilvitskii (2007), k-means++: the advantages of careful
    seeding, SODA.
    """
    X = np.ascontiguousarray(X, dtype=np.float64)
    n = X.shape[0]
    if not np.all(np.isfinite(X)):
        raise ComputeError("k-means: embedding contains NaN or infinite values")
    if not 1 <= k <= n:
        raise ComputeError(f"k-means: cannot form {k} clusters from {n} points")
    distinct = _count_distinct_rows(X, k)
    if distinct < k:
        raise ComputeError(f"k-means: the embedding has only {distinct} distinct points, "
                           f"so {k} non-empty communities are impossible")
    rng = np.random.default_rng(seed)
    tol_abs = tol * float(np.mean(np.var(X, axis=0)))
    sampled = n > sample_size
    XT = np.ascontiguousarray(X.T)
    x2 = np.einsum("ij,ij->j", XT, XT)
    if sampled:
        idx = np.sort(rng.choice(n, size=sample_size, replace=False))
        XsT = np.ascontiguousarray(XT[:, idx])
        xs2 = x2[idx]
        if _count_distinct_rows(X[idx], k) < k:
            XsT, xs2, sampled = XT, x2, False
    else:
        XsT, xs2 = XT, x2
    best = None
    total_it = 0
    for _ in range(n_init):
        C0 = _kmeans_pp(XsT, xs2, k, rng)
        labels, C, inertia, it = _lloyd(XsT, xs2, C0, max_iter, tol_abs)
        total_it += it
        if best is None or inertia < best[2]:
            best = (labels, C, inertia)
    labels, C, inertia = best
    if sampled:
        labels, C, inertia, it = _lloyd(XT, x2, C, max_iter, tol_abs)
        total_it += it
    return labels.astype(np.int64, copy=False), C, inertia, {"iterations": total_it,
                                                              "sampled": bool(sampled)}


def _count_distinct_rows(X: np.ndarray, cap: int) -> int:
    """Number of distinct rows of X, stopping early once ``cap`` are seen."""
    first = X[0]
    if X.shape[0] == 0:
        return 0
    diff = np.any(X != first, axis=1)
    if cap <= 1 or not diff.any():
        return 1
    # cheap test on a prefix first; exact unique only if needed
    head = X[: min(X.shape[0], 1000 * cap)]
    cnt = np.unique(head, axis=0).shape[0]
    if cnt >= cap:
        return cnt
    return np.unique(X, axis=0).shape[0]


def discretize(V: np.ndarray, k: int, *, seed: int = 0, max_iter: int = 300,
               tol: float = 1e-12) -> tuple[np.ndarray, dict]:
    r"""Multiclass discretisation of spectral eigenvectors (Yu & Shi 2003).

    Find the indicator matrix :math:`X \in \{0,1\}^{n\times k}` (one 1 per
    row) and rotation :math:`R` (:math:`R^T R = I`) closest to the row-
    normalised eigenvectors :math:`\tilde V`: alternate
    :math:`X = \mathrm{onehot}(\arg\max_c (\tilde V R)_{ic})` and
    :math:`R = \hat U \tilde U^T` from the SVD
    :math:`X^T \tilde V = \tilde U \Omega \hat U^T`, until
    :math:`n - \mathrm{tr}\,\Omega` stops decreasing.

    Parameters
    ----------
    V : ndarray, shape (n, k)
        Eigenvectors (rows are normalised here).
    k : int
    seed : int, default 0
        Chooses the first row of the initial rotation (the others are the
        rows most orthogonal to those already chosen).
    max_iter : int, default 300
    tol : float, default 1e-12

    Returns
    -------
    labels : ndarray of int64, shape (n,)
        May have empty clusters; the caller checks.
    info : dict
        ``iterations``, ``objective`` (final :math:`2(n - \mathrm{tr}\,\Omega)`).

    References
    ----------
    Yu & Shi (2003), Multiclass spectral clustering, ICCV.
    """
    V = np.asarray(V, dtype=np.float64)
    n = V.shape[0]
    norms = np.linalg.norm(V, axis=1)
    norms[norms == 0] = 1.0
    Vn = V / norms[:, None]
    rng = np.random.default_rng(seed)
    R = np.zeros((k, k))
    R[:, 0] = Vn[int(rng.integers(n))]
    c = np.zeros(n)
    for j in range(1, k):
        c += np.abs(Vn @ R[:, j - 1])
        R[:, j] = Vn[int(np.argmin(c))]
    last = np.inf
    labels = np.zeros(n, dtype=np.int64)
    it = 0
    obj = np.inf
    for it in range(1, max_iter + 1):
        labels = np.argmax(Vn @ R, axis=1)
        M = np.zeros((k, k))
        for j in range(k):
            M[j] = np.bincount(labels, weights=Vn[:, j], minlength=k)
        # M = X^T Vn transposed: M[j, c] = sum_{i in c} Vn[i, j]  -> (Vn^T X)
        U, S, Wt = np.linalg.svd(M)
        obj = 2.0 * (n - S.sum())
        if abs(obj - last) < tol * max(1.0, n) or obj > last:
            break
        last = obj
        R = U @ Wt
    return labels.astype(np.int64), {"iterations": it, "objective": float(obj)}
