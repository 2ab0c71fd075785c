"""k-way spectral methods: Shi–Malik, Ng–Jordan–Weiss, regularised (Qin–Rohe), Bethe Hessian."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from workspace.errors import ComputeError

from .assign import discretize, kmeans
from .eigen import (EigenSolution, SolverContext, SymmetricOperator, _blas_threads, largest_eigenpairs,
                    shifted_laplacian_operator)
from .laplacians import degrees, inverse_sqrt_degrees
from .ordering import permuted_scaled

__all__ = ["laplacian_embedding", "bethe_embedding", "assign_rows", "eigengap_k",
           "bethe_default_r"]


def eigengap_k(values: np.ndarray, k_max: int | None = None) -> int | None:
    r"""Eigengap heuristic: :math:`\hat k = \arg\max_{2 \le i < m} (\lambda_{i+1} - \lambda_i)`.

    ``values`` ascending (1-based :math:`\lambda_1 \le \dots \le \lambda_m`)
    of one Laplacian-type operator of a connected graph. The trivial first
    gap :math:`\lambda_2 - \lambda_1` is never a candidate: on a connected
    graph :math:`\lambda_1 = 0` and that gap is often the largest one
    without saying anything about k (a "partition" into one part is no
    answer). Returns ``None`` for fewer than 3 values; the first maximiser
    on ties; ``k_max`` bounds the answer (only gaps with :math:`i \le k_{max}`
    are compared).

    References
    ----------
    von Luxburg (2007), A tutorial on spectral clustering, Statistics and
    Computing 17(4), Sec. 8.3.
    """
    values = np.asarray(values, dtype=np.float64)
    if values.shape[0] < 3:
        return None
    gaps = np.diff(values)[1:]                     # gaps after lambda_2, lambda_3, ...
    if k_max is not None:
        gaps = gaps[:max(k_max - 1, 1)]
    return int(np.argmax(gaps)) + 2


def laplacian_embedding(A, k: int | None, method: str, ctx: SolverContext, *, extra: int = 1,
                        k_max: int = 10, tau: float = 0.0, solution: EigenSolution | None = None,
                        order: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray, int]:
    r"""Spectral embedding of a connected graph for the k-way methods.

    Solve for the leading eigenvectors :math:`v_1..v_m` of
    :math:`N_\tau = D_\tau^{-1/2} A D_\tau^{-1/2}` (:math:`D_\tau = D + \tau I`,
    :math:`\tau = 0` except for ``"regularized"``), through the shifted
    operator :math:`I + N_\tau`, i.e. the smallest eigenpairs of
    :math:`L_\tau = I - N_\tau`. Rows of the returned embedding are

    - ``"njw"``: :math:`v_{i,1..k} / \|v_{i,1..k}\|` (Ng, Jordan & Weiss 2001);
    - ``"regularized"``: the same with :math:`\tau > 0` (Qin & Rohe 2013);
    - ``"shi-malik"``: :math:`u = D^{-1/2} v`, the generalised eigenvectors of
      :math:`L u = \lambda D u`, not normalised (Shi & Malik 2000; von
      Luxburg 2007, Sec. 4).

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)
    k : int or None
        None: choose by :func:`eigengap_k` among the first ``k_max + 1``.
    method : {"njw", "shi-malik", "regularized"}
    ctx : SolverContext
    extra : int, default 1
    k_max : int, default 10
    tau : float, default 0
    solution : EigenSolution, optional
        Precomputed eigenpairs of the same operator (at least ``k`` of them,
        from a shared :class:`workspace.spectral.embedding.Embedding`); the
        solve is skipped and its first ``k`` vectors are used.
    order : ndarray of int, shape (n,), optional
        Computation order for the eigensolver's products
        (:mod:`workspace.spectral.ordering`); the embedding is returned in
        the original node order either way.

    Returns
    -------
    embedding : ndarray, shape (n, k)
    eigenvalues : ndarray, ascending, of :math:`L_\tau`
    k : int

    Raises
    ------
    workspace.errors.ComputeError
        Solver failure (see :func:`workspace.spectral.eigen.largest_eigenpairs`).

    References
    ----------
    Ng, Jordan & Weiss (2001), On spectral clustering, NIPS 14; Shi & Malik
    (2000), IEEE TPAMI 22(8); Qin & Rohe (2013), NIPS 26; von Luxburg (2007),
    A tutorial on spectral clustering, Statistics and Computing 17(4).
    """
    A = sp.csr_array(A)
    n = A.shape[0]
    d = degrees(A)
    op, shift, _ = shifted_laplacian_operator(A, "sym", d, regularizer=tau,
                                              order=None if solution is not None else order)
    m = min(n, k if k is not None else k_max)
    sol = _reuse(solution, m, extra, ctx) if solution is not None else \
        largest_eigenpairs(op, m, ctx, stage=method, bound=shift, extra=extra)
    values = shift - sol.values
    if k is None:
        k = eigengap_k(values, k_max) or 1
    V = sol.vectors[:, :k]
    if method == "shi-malik":
        U = V * inverse_sqrt_degrees(d + tau)[:, None]
    else:
        # the solver's own vectors are normalised in place (no second n x k copy); a shared
        # embedding's are copied first
        own = solution is None and sol.vectors.shape[1] == k and sol.vectors.flags.c_contiguous
        U = sol.vectors if own else np.array(V)
        norms = np.sqrt(np.einsum("ij,ij->i", U, U))
        norms[norms == 0] = 1.0
        U /= norms[:, None]
    return U, values, k


def _reuse(solution: EigenSolution, m: int, extra: int, ctx: SolverContext) -> EigenSolution:
    """The first ``m`` pairs (and ``m + extra`` values) of precomputed eigenpairs, recorded in ``ctx``."""
    if solution.vectors.shape[1] < m:
        raise ComputeError(f"the shared embedding holds {solution.vectors.shape[1]} vectors; {m} are needed")
    sol = EigenSolution(values=np.asarray(solution.values[:m + extra], dtype=np.float64),
                        vectors=solution.vectors[:, :m], solver=solution.solver, matvecs=0,
                        residual_norms=list(solution.residual_norms[:m]))
    ctx.solvers.append(sol.solver)
    ctx.residual_norms.extend(sol.residual_norms)
    return sol


def bethe_default_r(d: np.ndarray) -> float:
    r"""Default Bethe Hessian parameter :math:`r = \sqrt{\sum_i d_i^2 / \sum_i d_i - 1}`.

    Parameters
    ----------
    d : ndarray of float64, shape (n,)

    Returns
    -------
    float
        0 when the expression under the root is not positive.

    References
    ----------
    Saade, Krzakala & Zdeborová (2014), Spectral clustering of graphs with
    the Bethe Hessian, NIPS 27.
    """
    s1 = float(d.sum())
    s2 = float(np.dot(d, d))
    val = s2 / s1 - 1.0 if s1 > 0 else 0.0
    return float(np.sqrt(val)) if val > 0 else 0.0


def bethe_embedding(A, k: int | None, ctx: SolverContext, *, r: float = 0.0, extra: int = 1,
                    k_max: int = 10, solution: EigenSolution | None = None,
                    order: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray, int, dict]:
    r"""Eigenvectors of the Bethe Hessian :math:`H(r) = (r^2-1)I - rA + D`.

    The smallest eigenpairs of :math:`H` are the largest of
    :math:`cI - H = (c - r^2 + 1)I - D + rA` with the Gershgorin bound
    :math:`c = r^2 - 1 + (1 + r) d_{max}`. With ``k=None`` ("auto"),
    :math:`k` is the number of negative eigenvalues of :math:`H(r)`
    (at most ``k_max``).

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)
    k : int or None
    ctx : SolverContext
    r : float, default 0
        0 means :func:`bethe_default_r`.
    extra : int, default 1
    k_max : int, default 10
    solution : EigenSolution, optional
        Precomputed eigenpairs of the same operator (see :func:`laplacian_embedding`).
    order : ndarray of int, shape (n,), optional
        Computation order for the products (see :func:`laplacian_embedding`).

    Returns
    -------
    embedding : ndarray, shape (n, k)
        Eigenvectors of the k smallest eigenvalues (not normalised).
    eigenvalues : ndarray, ascending
    k : int
    info : dict
        ``r``, ``negative_eigenvalues``.

    References
    ----------
    Saade, Krzakala & Zdeborová (2014), Spectral clustering of graphs with
    the Bethe Hessian, NIPS 27.
    """
    A = sp.csr_array(A)
    n = A.shape[0]
    d = degrees(A)
    if r <= 0:
        r = bethe_default_r(d)
    c = r * r - 1.0 + (1.0 + r) * float(d.max())
    diag = (c - r * r + 1.0) - d
    if order is None or solution is not None:
        op = SymmetricOperator(A, diagonal=diag, scale=r)
    else:
        op = SymmetricOperator(permuted_scaled(A, order), diagonal=diag[order], scale=r, order=order)
    m = min(n, k if k is not None else k_max)
    sol = _reuse(solution, m, extra, ctx) if solution is not None else \
        largest_eigenpairs(op, m, ctx, stage="bethe", bound=abs(c) + 1.0, extra=extra)
    values = c - sol.values
    negative = int(np.sum(values < 0))
    if k is None:
        if negative > k_max:
            ctx.warnings.append(f"bethe: {negative} or more negative eigenvalues; k capped at k_max={k_max}")
        k = max(1, min(negative, k_max))
    return sol.vectors[:, :k].copy(), values, k, {"r": float(r), "negative_eigenvalues": negative}


def assign_rows(U: np.ndarray, k: int, ctx: SolverContext, *, assign: str = "kmeans",
                n_init: int = 10, max_iter: int = 300) -> tuple[np.ndarray, dict]:
    """k-way assignment of embedding rows: k-means++ or Yu–Shi discretisation.

    Parameters
    ----------
    U : ndarray, shape (n, k)
    k : int
    ctx : SolverContext
        Seed, cancel, progress, warnings.
    assign : {"kmeans", "discretize"}, default "kmeans"
    n_init : int, default 10
    max_iter : int, default 300

    Returns
    -------
    labels : ndarray of int64, shape (n,)
        Exactly ``k`` non-empty groups.
    info : dict

    Raises
    ------
    workspace.errors.ComputeError
        Fewer than ``k`` distinct embedding rows.

    Notes
    -----
    If discretisation leaves a group empty, k-means is used instead and a
    warning is recorded.

    References
    ----------
    Arthur & Vassilvitskii (2007), k-means++, SODA; Yu & Shi (2003),
    Multiclass spectral clustering, ICCV.
    """
    ctx.check_cancel()
    ctx.report("assign")
    if k == 1:
        return np.zeros(U.shape[0], dtype=np.int64), {}
    # One BLAS thread from BLAS_FIXED_THREADS_MIN_NODES rows (unless a solve running at the same time holds
    # its own count): the products here are (k x dim) @ (dim x n) with dim <= a few dozen, each output
    # entry summed by one thread whatever the thread count (the same bits), and a second OpenBLAS thread
    # only waits. Measured on 2 cores (load 2.5): k-means at 1M rows, k = 8, 0.95-1.23 s CPU with two
    # BLAS threads, 0.55-0.69 s with one (same inertia to the last bit); a sweep's 15 k-means at 300k rows
    # on two worker threads 8.4-9.5 s wall against 2.1-3.2 s, when each worker's BLAS threads competed
    # for the same two cores. With OpenBLAS's short idle wait (workspace.OPENBLAS_IDLE_WAIT) one k-means
    # at 1M rows takes the same 0.41 s either way, but six on two worker threads 2.65-3.41 s with two
    # BLAS threads against 1.62-1.66 s with one.
    with _blas_threads(U.shape[0], solve=False):
        if assign == "discretize":
            labels, info = discretize(U, k, seed=ctx.seed, max_iter=max_iter)
            if np.unique(labels).shape[0] == k:
                return labels, {"discretize_iterations": info["iterations"]}
            ctx.warnings.append("discretisation left a community empty; used k-means instead")
        labels, _, inertia, info = kmeans(U, k, seed=ctx.seed, n_init=n_init, max_iter=max_iter)
    if np.unique(labels).shape[0] != k:  # pragma: no cover - kmeans guarantees non-empty
        raise ComputeError(f"k-means produced fewer than {k} communities")
    return labels, {"kmeans_iterations": info["iterations"], "kmeans_inertia": inertia}
