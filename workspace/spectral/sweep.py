"""Partitions over a range of k from one eigensolve (the k-path), and seeded weight perturbation.

:func:`compute_embedding` solves the operator of a k-way method once for the
largest k of a range; :func:`partition` with ``embedding=`` then gives each k
its leading columns, so only the assignment repeats. :func:`k_path` does both
for a list of k. :func:`ascending_spectrum` and :func:`eigengaps` read the
eigengap at every k off the same solve. :func:`perturbed_adjacency` draws the
seeded multiplicative edge-weight noise used for stability repeats.
"""

from __future__ import annotations

from typing import Any, Callable, Iterable

import numpy as np
import scipy.sparse as sp

from workspace.errors import ComputeError, ParameterError

from .directed import symmetrised
from .eigen import SolverContext
from .embedding import EMBEDDING_METHODS, Embedding, solve_embedding
from .engine import _component_node_lists, _components, _induced, _prepare_adjacency, partition
from .laplacians import with_loops_doubled
from .methods import validate_params
from .result import PartitionResult

__all__ = ["compute_embedding", "embedded_nodes", "k_path", "ascending_spectrum", "eigengaps", "perturbed_adjacency",
           "parse_k_range"]


def compute_embedding(A, method: str, n_vectors: int, *, seed: int = 0,
                      progress: Callable[[str, int], None] | None = None,
                      cancel: Callable[[], bool] | None = None, directed: bool = False,
                      warm_start: np.ndarray | None = None, **params) -> Embedding | None:
    r"""The eigenpairs that every k up to ``n_vectors`` of a k-way method needs, solved once.

    The graph is prepared exactly as :func:`workspace.spectral.partition` does
    (symmetry and weight checks, components and the ``components`` policy);
    when one component is partitioned (isolated nodes aside), the operator of
    ``method`` on that component is solved for ``n_vectors`` eigenpairs plus
    ``extra_eigenvalues`` further eigenvalues (see
    :mod:`workspace.spectral.embedding` for the operators).

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)
        Symmetric adjacency, weights >= 0.
    method : {"njw", "shi-malik", "regularized", "bethe"}
    n_vectors : int
        The largest k of the range (``2 <= n_vectors``; capped at the
        component size).
    seed : int, default 0
        Seed of the eigensolver's start vector.
    progress, cancel : callables, optional
        As in :func:`workspace.spectral.partition`.
    directed : bool, default False
        ``A`` holds arcs; the k-way methods run on the symmetrised graph
        :math:`A + A^T` exactly as :func:`workspace.spectral.partition` does.
    warm_start : ndarray, shape (n, b), optional
        Start block in the node order of ``A`` (all ``n`` rows; the
        component's rows are used), as in :func:`workspace.spectral.partition`;
        the outcome is in ``info["warm_start"]`` of the embedding.
    **params
        Method parameters (validated here).

    Returns
    -------
    Embedding or None
        None when several components would be partitioned (each k then
        spreads its parts over components differently; run each k on its own).

    Raises
    ------
    workspace.errors.ParameterError
        A method without a shared operator, or bad parameters.
    workspace.errors.ComputeError
        Bad graph or solver failure.

    References
    ----------
    von Luxburg (2007), A tutorial on spectral clustering, Sec. 8.3.
    """
    if method not in EMBEDDING_METHODS:
        raise ParameterError(f"{method} has no shared embedding (only {', '.join(EMBEDDING_METHODS)})")
    p = validate_params(method, params)
    if isinstance(n_vectors, bool) or not isinstance(n_vectors, (int, np.integer)) or n_vectors < 1:
        raise ParameterError(f"n_vectors must be a positive integer (got {n_vectors!r})")
    A = _prepare_adjacency(A, check_symmetry=not directed)
    if directed:
        A = symmetrised(A)
    ncomp, comp = _components(A)
    sizes = np.bincount(comp, minlength=ncomp)
    nontrivial = np.flatnonzero(sizes >= 2)
    if nontrivial.shape[0] == 0:
        raise ComputeError("the graph has no edges between distinct nodes; nothing to partition")
    if p["components"] == "error" and ncomp > 1:
        raise ComputeError("the graph is disconnected and components='error'")
    if p["components"] == "largest":
        first = np.full(ncomp, A.shape[0], dtype=np.int64)
        np.minimum.at(first, comp, np.arange(A.shape[0]))
        nontrivial = nontrivial[np.lexsort((first[nontrivial], -sizes[nontrivial]))][:1]
    if nontrivial.shape[0] != 1:
        return None
    nodes = _component_node_lists(comp, nontrivial)[0]
    # the loop convention of partition: an undirected self-loop of weight w counts 2w
    sub = _induced(with_loops_doubled(A), nodes)
    ctx = SolverContext(seed=int(seed), dense_threshold=p["dense_threshold"], eig_tol=p["eig_tol"],
                        max_matvecs=p["max_matvecs"], time_limit_s=p["time_limit_s"], progress=progress,
                        cancel=cancel, threads=p["threads"])
    m = min(int(n_vectors), sub.shape[0])
    start = None
    if warm_start is not None:
        warm_start = np.asarray(warm_start)
        if warm_start.ndim != 2 or warm_start.shape[0] != A.shape[0]:
            raise ParameterError(f"warm_start must have shape (n, b) with n={A.shape[0]} rows "
                                 f"(got {warm_start.shape})")
        start = np.asarray(warm_start[nodes], dtype=np.float64)
    return solve_embedding(sub, method, p, m, ctx, extra=p["extra_eigenvalues"], start=start)


def embedded_nodes(A, components: str = "each", directed: bool = False) -> np.ndarray | None:
    """Indices of the nodes an embedding of ``A`` has rows for (ascending), or None.

    The nodes of the one component :func:`compute_embedding` and
    :func:`workspace.spectral.partition` embed under the ``components``
    policy (isolated nodes are never embedded); None when several components
    would be partitioned. Row ``i`` of such an embedding is node
    ``embedded_nodes(A)[i]``.
    """
    A = _prepare_adjacency(A, check_symmetry=False)
    if directed:
        A = symmetrised(A)
    ncomp, comp = _components(A)
    sizes = np.bincount(comp, minlength=ncomp)
    nontrivial = np.flatnonzero(sizes >= 2)
    if components == "largest" and nontrivial.shape[0] > 1:
        first = np.full(ncomp, A.shape[0], dtype=np.int64)
        np.minimum.at(first, comp, np.arange(A.shape[0]))
        nontrivial = nontrivial[np.lexsort((first[nontrivial], -sizes[nontrivial]))][:1]
    if nontrivial.shape[0] != 1:
        return None
    return _component_node_lists(comp, nontrivial)[0]


def ascending_spectrum(embedding: Embedding) -> np.ndarray:
    r"""Eigenvalues of the method's own operator, ascending, from the embedding's solve.

    ``normalized``/``regularized``: :math:`\lambda = 2 - \mu` (the spectrum of
    :math:`L_\tau = I - D_\tau^{-1/2} A D_\tau^{-1/2}`); ``bethe``:
    :math:`\lambda = c - \mu` (the spectrum of :math:`H(r)`), with :math:`\mu`
    the eigenvalues of the shifted operator; ascending because :math:`\mu`
    is descending.
    """
    return embedding.info["shift"] - np.asarray(embedding.values, dtype=np.float64)


def eigengaps(spectrum: np.ndarray, ks: Iterable[int]) -> dict[int, float | None]:
    r"""Eigengap at each k: :math:`g_k = \lambda_{k+1} - \lambda_k` (ascending, 1-based).

    A large :math:`g_k` says the first k eigenvectors span a well-separated
    invariant subspace, the sign of k clear groups (von Luxburg 2007,
    Sec. 8.3). ``None`` where :math:`\lambda_{k+1}` was not computed.
    """
    spectrum = np.asarray(spectrum, dtype=np.float64)
    return {int(k): (float(spectrum[k] - spectrum[k - 1]) if 1 <= k < spectrum.shape[0] else None)
            for k in ks}


def k_path(A, method: str, ks: Iterable[int], *, seed: int = 0, embedding: Embedding | None = None,
           embedding_seed: int | None = None, progress: Callable[[str, int], None] | None = None,
           cancel: Callable[[], bool] | None = None, **params) -> tuple[dict[int, PartitionResult],
                                                                          Embedding | None]:
    """Partitions for every k in ``ks`` from one embedding.

    Parameters
    ----------
    A : scipy sparse matrix
    method : {"njw", "shi-malik", "regularized", "bethe"}
    ks : iterable of int
        Each ``>= 2``.
    seed : int, default 0
        Seed of the assignment (k-means++) of every k.
    embedding : Embedding, optional
        Computed here for ``max(ks)`` vectors when not given.
    embedding_seed : int, optional
        Start-vector seed of that solve (default ``seed``).
    **params
        Method parameters.

    Returns
    -------
    (dict k -> PartitionResult, Embedding or None)
        Without a shared embedding (several components) each k is solved on
        its own.
    """
    ks = sorted({int(k) for k in ks})
    if not ks or ks[0] < 2:
        raise ParameterError("every k of a range must be at least 2")
    if embedding is None:
        embedding = compute_embedding(A, method, ks[-1], seed=seed if embedding_seed is None else embedding_seed,
                                      progress=progress, cancel=cancel, **params)
    out = {k: partition(A, method, k=k, seed=seed, progress=progress, cancel=cancel, embedding=embedding,
                        **params) for k in ks}
    return out, embedding


def perturbed_adjacency(A, spread: float, seed: int) -> sp.csr_array:
    r"""Multiply each undirected edge's weight by independent Gamma noise of mean 1 and sd ``spread``.

    :math:`w'_{ij} = w_{ij}\,\xi_{ij}`, :math:`\xi_{ij} \sim \Gamma(1/s^2, s^2)`
    (mean 1, standard deviation :math:`s`), one draw per undirected edge so
    :math:`A'` stays symmetric. Every edge keeps a positive weight, so
    components never change. With :math:`s = 1` the factors are Exp(1): the
    Bayesian bootstrap of edge weights (Rubin 1981). Seeded by
    ``default_rng([seed, 0x5EED])``; the same seed gives the same graph.

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n), symmetric
    spread : float
        Standard deviation :math:`s > 0`.
    seed : int

    Returns
    -------
    scipy.sparse.csr_array

    References
    ----------
    Rubin (1981), The Bayesian bootstrap, Annals of Statistics 9(1).
    """
    if not spread > 0:
        raise ParameterError(f"perturbation spread must be positive (got {spread!r})")
    upper = sp.triu(A, k=0, format="coo")
    shape = 1.0 / spread**2
    factor = np.random.default_rng([seed, 0x5EED]).gamma(shape, 1.0 / shape, size=upper.nnz)
    r, c, w = upper.row, upper.col, upper.data * factor
    off = r != c
    B = sp.csr_array((np.concatenate([w, w[off]]), (np.concatenate([r, c[off]]), np.concatenate([c, r[off]]))),
                     shape=A.shape)
    B.sum_duplicates()
    return B


def parse_k_range(text: Any) -> list[int]:
    """``"2..16"`` (inclusive), ``"2,3,5,8"`` or a mix (``"2..4,8"``) to a sorted list of distinct k >= 2.

    Raises
    ------
    workspace.errors.ParameterError
        Unparseable text, k < 2, a reversed range or more than 200 values.
    """
    if isinstance(text, (list, tuple)):
        items = [str(x) for x in text]
    else:
        items = [part.strip() for part in str(text).split(",")]
    out: set[int] = set()
    for item in items:
        if not item:
            raise ParameterError(f"k range {text!r} has an empty item")
        try:
            if ".." in item:
                lo_s, hi_s = item.split("..", 1)
                lo, hi = int(lo_s), int(hi_s)
                if hi < lo:
                    raise ParameterError(f"k range {item!r} runs backwards")
                out.update(range(lo, hi + 1))
            else:
                out.add(int(item))
        except ValueError:
            raise ParameterError(f"k range {text!r}: {item!r} is neither an integer nor a range like 2..16") from None
        if len(out) > 200:
            raise ParameterError(f"k range {text!r} has more than 200 values")
    ks = sorted(out)
    if ks[0] < 2:
        raise ParameterError(f"every k must be at least 2 (got {ks[0]})")
    return ks
