"""The public entry point :func:`partition`."""

from __future__ import annotations

import time
from typing import Any, Callable

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import breadth_first_order, connected_components

from workspace.domain import available_cpus
from workspace.errors import ComputeError, ParameterError

from .baselines import run_baseline
from .bisection import fiedler_bisection, recursive_bisection
from .directed import directed_embedding, symmetrised
from .eigen import SolverContext, laplacian_eigenpairs
from .embedding import EMBEDDING_METHODS, Embedding, solve_embedding
from .kway import assign_rows, bethe_embedding, eigengap_k, laplacian_embedding
from .laplacians import degrees, with_loops_doubled
from .methods import METHODS, MethodInfo, validate_params
from .modularity import leading_eigenvector
from . import ordering
from .ordering import computation_order
from .quality import quality_measures
from .result import PartitionResult, canonical_labels

__all__ = ["partition"]

_MAX_RESIDUALS_LISTED = 64


def _components(A: sp.csr_array, search_out: list | None = None) -> tuple[int, np.ndarray]:
    """Connected components of a symmetric adjacency: (count, component index per node).

    ``search_out``: when given and the breadth-first search below reaches every node with an
    edge, its order is appended to it (the computation order of
    :mod:`workspace.spectral.ordering` is the same search from the same node, so the engine need
    not run it twice; with isolated nodes left out, it is that search renumbered to the component).

    Fast path: one breadth-first search from the first node with an edge; when it
    reaches every such node the graph is one component plus isolated nodes (the
    common case, three times cheaper than a full labelling). Otherwise
    ``scipy.sparse.csgraph.connected_components`` labels them all; for a symmetric A
    its strong components are the components, which needs no transposed copy.
    """
    n = A.shape[0]
    has_edges = np.diff(A.indptr) > 0
    if has_edges.any():
        start = int(np.argmax(has_edges))
        reached = breadth_first_order(A, start, directed=True, return_predecessors=False)
        if reached.shape[0] == int(has_edges.sum()):
            if search_out is not None:
                search_out.append(reached)
            comp = np.zeros(n, dtype=np.int32)
            lonely = np.flatnonzero(~has_edges)
            comp[lonely] = np.arange(1, lonely.shape[0] + 1, dtype=np.int32)
            return 1 + int(lonely.shape[0]), comp
    return connected_components(A, directed=True, connection="strong")


def _is_symmetric(A: sp.csr_array, rtol: float = 1e-10, threads: int = 0) -> bool:
    r"""Randomised symmetry test: :math:`A v = A^T v` for one random positive vector v.

    For any entry with :math:`A_{ij} \ne A_{ji}`, :math:`((A - A^T)v)_i` is a non-zero
    linear form in continuous random :math:`v`, so it vanishes with probability 0
    (Freivalds 1977, the same idea for products); a second column would only repeat
    that certainty at twice the cost (0.33 s CPU of a 1M-node run with two). Entries
    are compared with a tolerance of ``rtol`` times :math:`((A + A^T)v)_i` (weights are
    already checked to be >= 0). Two passes over A, no transposed copy (``A.T`` is a
    CSC view); from :data:`_SYMMETRY_THREADS_MIN_NNZ` entries both at once unless
    ``threads`` is 1 (the run's ``threads`` parameter; 0 = automatic).
    """
    V = np.random.default_rng(0x5EED).uniform(0.5, 1.5, size=A.shape[0])
    if A.nnz >= _SYMMETRY_THREADS_MIN_NNZ and threads != 1 and available_cpus() > 1:
        # the two products at once (scipy's kernels release the interpreter lock), each in one
        # thread as before, so the same bits: 10M nodes ~1.8 s -> ~1 s
        from concurrent.futures import ThreadPoolExecutor

        with ThreadPoolExecutor(max_workers=1) as pool:
            transposed = pool.submit(lambda: A.T @ V)
            AV = A @ V
            ATV = transposed.result()
    else:
        AV = A @ V
        ATV = A.T @ V
    return bool(np.all(np.abs(AV - ATV) <= rtol * (AV + ATV)))


#: Adjacencies with at least this many stored entries run the two products of the symmetry test at once.
_SYMMETRY_THREADS_MIN_NNZ = 2_000_000


def _prepare_adjacency(A, check_symmetry: bool = True, threads: int = 0) -> sp.csr_array:
    if not sp.issparse(A):
        raise ComputeError(f"adjacency must be a scipy.sparse matrix (got {type(A).__name__})")
    if A.ndim != 2 or A.shape[0] != A.shape[1]:
        raise ComputeError(f"adjacency must be square (got shape {A.shape})")
    A = A if isinstance(A, sp.csr_array) else sp.csr_array(A)
    if A.dtype != np.float64:
        if A.dtype.kind not in "biuf":
            raise ComputeError(f"adjacency must hold real weights (dtype {A.dtype})")
        A = A.astype(np.float64)
    if not A.has_canonical_format:
        A = A.copy()
        A.sum_duplicates()
    if A.nnz:
        data = A.data
        if not np.all(np.isfinite(data)):
            raise ComputeError("adjacency has NaN or infinite weights")
        if data.min() < 0:
            i = int(np.searchsorted(A.indptr, int(np.argmin(data)), side="right") - 1)
            raise ComputeError(f"adjacency has negative weights (min {data.min():g} in row {i}); "
                               "weights must be >= 0")
    if check_symmetry and not _is_symmetric(A, threads=threads):
        raise ComputeError("adjacency is not symmetric; symmetrise it (A + A.T)/2, import it "
                           "as undirected, or pass directed=True for a directed graph")
    return A


def _resolve_k(info: MethodInfo, k: Any, n: int) -> int | None:
    """Return the integer k, or None for "auto"."""
    name = info.name
    if k is None:
        k = info.default_k
    if isinstance(k, str):
        text = k.strip().lower()
        if text == "auto":
            if not info.supports_auto_k:
                raise ParameterError(f"{name} does not support k='auto'; give an integer k"
                                     + (f" (it always makes {info.fixed_k} parts)" if info.fixed_k else ""))
            return None
        try:
            k = int(text)
        except ValueError:
            raise ParameterError(f"k={k!r} is neither an integer nor 'auto'") from None
    if isinstance(k, (bool, np.bool_)) or not isinstance(k, (int, np.integer)):
        raise ParameterError(f"k={k!r} is neither an integer nor 'auto'")
    k = int(k)
    if not info.accepts_k:
        raise ParameterError(f"{name} chooses the number of communities itself; pass k=None or 'auto'")
    if info.fixed_k is not None and k != info.fixed_k:
        raise ParameterError(f"{name} always makes {info.fixed_k} parts (got k={k}); "
                             "use recursive, njw or shi-malik for more")
    if k < 2:
        raise ParameterError(f"k must be at least 2 (got k={k})")
    if k >= n:
        raise ComputeError(f"k={k} must be smaller than the number of nodes (n={n})")
    return k


def _union_eigenvalues(chunks: list[np.ndarray]) -> np.ndarray:
    if not chunks:
        return np.array([], dtype=np.float64)
    return np.sort(np.concatenate(chunks)).astype(np.float64)


def partition(A, method: str, *, k: int | str | None = None, seed: int = 0,
              progress: Callable[[str, int], None] | None = None,
              cancel: Callable[[], bool] | None = None, directed: bool = False,
              embedding: Embedding | None = None, warm_start: np.ndarray | None = None,
              **params) -> PartitionResult:
    r"""Partition the nodes of a weighted graph into communities.

    Parameters
    ----------
    A : scipy.sparse matrix or array, shape (n, n)
        Symmetric adjacency, weights >= 0, row ``i`` = node ``i``; a
        diagonal entry ``A_ii = w`` is an undirected self-loop of weight
        ``w`` (as ``networkx.to_scipy_sparse_array`` writes it). Every
        method and measure counts it twice, as two edge ends: in the degree
        :math:`d_i = \sum_j A_{ij} + A_{ii}` and as :math:`2w` on the
        diagonal of the matrices they build (the convention of Newman's
        modularity and of networkx's ``modularity`` and ``degree``).
    method : str
        A key of :data:`workspace.spectral.methods.METHODS`: ``fiedler``,
        ``recursive``, ``shi-malik``, ``njw``, ``regularized``, ``bethe``,
        ``leading-eigenvector``, ``directed-walk``, ``girvan-newman``,
        ``greedy-modularity``, ``louvain``, ``label-propagation``.
    k : int, "auto" or None, default None
        Number of communities; None means the method's ``default_k``;
        "auto" lets the method choose (eigengap for the k-way Laplacian
        methods, number of negative Bethe Hessian eigenvalues for
        ``bethe``, positive modularity gain for ``leading-eigenvector``,
        conductance threshold for ``recursive``).
    seed : int, default 0
        Seeds start vectors, k-means++ and randomised baselines.
    progress : callable(stage: str, matvecs: int), optional
    cancel : callable() -> bool, optional
        Polled inside every operator application; True stops the work.
    directed : bool, default False
        ``A`` is the arc matrix of a directed graph (``A_ij`` = weight of
        the arc i -> j; need not be symmetric). ``directed-walk`` uses the
        direction; every other method runs on the symmetrised graph
        :math:`A + A^T` (the two arcs of a pair summed; a loop arc becomes
        an undirected loop of its weight) and a warning says so. Components
        are the weakly connected ones; quality measures are the directed
        ones (see :func:`workspace.spectral.quality.quality_measures`).
    embedding : Embedding, optional
        Precomputed eigenpairs for the k-way methods (``njw``, ``shi-malik``,
        ``regularized``, ``bethe``) from
        :func:`workspace.spectral.sweep.compute_embedding` with the same method
        parameters; the eigensolve is skipped and the first k vectors are used,
        so only the assignment runs. Only for graphs partitioned as one
        component; ``diagnostics["embedding_reused"]`` is then True.
    warm_start : ndarray of float64, shape (n, b), optional
        Start block for the eigensolver of the k-way methods (``njw``,
        ``shi-malik``, ``regularized``, ``bethe``), rows in the node order of
        ``A`` (for example the previous version's eigenvectors mapped onto
        these nodes); the rows of the partitioned component are used. The
        chain starts ARPACK from one combination of its columns
        (:func:`workspace.spectral.eigen.warm_start_vector`) under the cold
        solve's convergence test and
        solves cold when that fails; ``diagnostics["warm_start"]`` is
        ``{"used": bool, "fallback": reason or None, "matvecs": int}``.
        Ignored (with the reason there) when several components are
        partitioned.
    **params
        Method parameters, validated by
        :func:`workspace.spectral.methods.validate_params` (strings such as
        ``"0.5"`` or ``"true"`` are converted).

    Returns
    -------
    PartitionResult
        ``labels`` int64 (n,), canonical numbering; see the class.

    Raises
    ------
    workspace.errors.ParameterError
        Unknown method or parameter, wrong type or range, unsupported k.
    workspace.errors.ComputeError
        Fewer than 3 nodes, no edges, ``k >= n``, non-symmetric or negative
        weights, a disconnected graph under ``components="error"``, more
        components than ``k``, solver failure or budget exhausted.
    workspace.errors.Cancelled
        ``cancel()`` returned True.

    Notes
    -----
    Components. The connected components are found first (a graph is
    never embedded as a whole while disconnected). Nodes without any edge
    to another node ("isolated") are never embedded; they are collected
    in **one extra community** (``diagnostics["unassigned_community"]``),
    and a warning says so. ``components="each"`` (default) partitions each
    component of two or more nodes in its own right: with an integer ``k``
    and ``c`` such components, ``k < c`` is an error, ``k = c`` gives the
    components, and for ``k > c`` component ``i`` gets ``k_i`` parts where
    the ``k_i`` count how many of the ``k`` smallest eigenvalues of the
    union spectrum of :math:`L_{sym}` belong to it (what an embedding of the
    whole graph would do, without its ambiguity). ``components="largest"``
    partitions only the largest component; all other nodes go to the
    extra community. ``components="error"`` refuses disconnected graphs.

    Determinism: start vectors and k-means++ use ``default_rng(seed)``,
    eigenvector signs are fixed (largest-magnitude entry positive), labels
    are renumbered by first appearance; the same input and seed give
    bit-identical labels on the same machine and library versions.

    References
    ----------
    von Luxburg (2007), A tutorial on spectral clustering, Statistics and
    Computing 17(4) — and the reference of each method in ``METHODS``.
    """
    t0 = time.perf_counter()
    if method not in METHODS:
        raise ParameterError(f"unknown method {method!r}; known: {', '.join(METHODS)}")
    info = METHODS[method]
    p = validate_params(method, params)
    if isinstance(seed, (bool, np.bool_)) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise ParameterError(f"seed must be a non-negative integer (got {seed!r})")
    seed = int(seed)
    A = _prepare_adjacency(A, check_symmetry=not directed, threads=p.get("threads", 0))
    n = A.shape[0]
    A_arcs = A if directed else None
    S = symmetrised(A) if directed else A          # the undirected graph behind the components
    uses_direction = directed and info.directed
    if directed and not info.directed:
        A = S
    if n < 3:
        raise ComputeError(f"the graph has {n} node(s); partitioning needs at least 3")
    k_req = _resolve_k(info, k, n)
    if embedding is not None and method not in EMBEDDING_METHODS:
        raise ParameterError(f"{method} cannot use a shared embedding (only {', '.join(EMBEDDING_METHODS)})")
    if warm_start is not None:
        if method not in EMBEDDING_METHODS:
            raise ParameterError(f"{method} takes no warm start (only {', '.join(EMBEDDING_METHODS)})")
        if embedding is not None:
            raise ParameterError("give either a shared embedding or a warm start, not both")
        warm_start = np.asarray(warm_start)
        if warm_start.ndim != 2 or warm_start.shape[0] != n or warm_start.shape[1] < 1:
            raise ParameterError(f"warm_start must have shape (n, b) with n={n} rows (got {warm_start.shape})")
        if warm_start.dtype.kind not in "biuf" or not np.all(np.isfinite(warm_start)):
            raise ParameterError("warm_start must hold finite real numbers")
    offdiag = S.nnz - int(np.count_nonzero(S.diagonal()))
    if offdiag == 0 or not np.any(S.data > 0):
        raise ComputeError("the graph has no edges between distinct nodes; nothing to partition")

    ctx = SolverContext(seed=seed, dense_threshold=p.get("dense_threshold", 1000),
                        eig_tol=p.get("eig_tol", 1e-6), max_matvecs=p.get("max_matvecs", 50000),
                        time_limit_s=p.get("time_limit_s", 0.0), progress=progress, cancel=cancel,
                        threads=p.get("threads", 0))
    ctx.check_cancel()
    ctx.report("components")
    searched: list = []            # the components' breadth-first search, reused as the computation order
    ncomp, comp = _components(S, searched)
    comp_sizes = np.bincount(comp, minlength=ncomp)
    isolated = comp_sizes[comp] == 1
    n_isolated = int(isolated.sum())
    nontrivial = np.flatnonzero(comp_sizes >= 2)
    # order components by size (desc), then by their first node
    first_node = np.full(ncomp, n, dtype=np.int64)
    np.minimum.at(first_node, comp, np.arange(n))
    nontrivial = nontrivial[np.lexsort((first_node[nontrivial], -comp_sizes[nontrivial]))]
    policy = p["components"]
    warnings: list[str] = []
    if directed and not info.directed:
        warnings.append(f"the graph is directed; {method} is a method for undirected graphs and ran on "
                         "the symmetrised graph A + A^T (the weights of the two arcs of a pair summed)")
    if policy == "error" and ncomp > 1:
        raise ComputeError(f"the graph is disconnected ({len(nontrivial)} components of 2+ nodes, "
                           f"{n_isolated} isolated nodes) and components='error'; use "
                           "components=each or components=largest")
    kept = nontrivial[:1] if policy == "largest" else nontrivial
    kept_mask = np.isin(comp, kept) if len(kept) != len(nontrivial) or n_isolated else None
    outside = n - (int(comp_sizes[kept].sum()))

    # the spectral methods' loop below makes it after its first solve: its n int64 would sit beside the
    # eigensolver's peak (80 MB at 10M nodes)
    labels = np.full(n, -1, dtype=np.int64) if info.family == "baseline" or method == "recursive" else None
    eig_chunks: list[np.ndarray] = []
    diag_extra: dict[str, Any] = {}
    eigengap: int | None = None
    k_for_ties: int | None = None

    if info.family == "baseline":
        nodes = np.arange(n) if kept_mask is None else np.flatnonzero(kept_mask)
        sub = A if kept_mask is None else _induced(A, nodes)
        ctx.report(method)
        if k_req is not None and k_req >= nodes.shape[0]:
            raise ComputeError(f"k={k_req} must be smaller than the {nodes.shape[0]} nodes partitioned")
        # the component rule of the spectral methods (components="each"): k below the number of
        # components is an error, k equal to it gives the components; a baseline never merges
        # communities of different components (networkx's greedy agglomeration would, to reach k)
        if k_req is not None and len(kept) > 1:
            _allocate(A, [np.empty(0)] * len(kept), k_req, method, ctx, p, warnings, counts_only=True)
        if k_req is not None and k_req == len(kept) and len(kept) > 1:
            labels[nodes] = comp[nodes]
        else:
            labels[nodes] = run_baseline(sub, method, k_req, seed, p)
        ctx.check_cancel()
        _check_within_components(labels, comp, method)
    else:
        # the loop convention: an undirected self-loop of weight w counts 2w in A_ii and the degree
        A_loops = A if uses_direction else with_loops_doubled(A)
        comp_nodes = _component_node_lists(comp, kept)
        if n < 2 ** 31:      # they live through the solves: int32 is 40 MB less at 10M nodes
            comp_nodes = [c.astype(np.int32) for c in comp_nodes]
        if method == "recursive":
            nodes = np.arange(n) if kept_mask is None else np.flatnonzero(kept_mask)
            sub = A_loops if kept_mask is None else _induced(A_loops, nodes)
            if k_req is not None and k_req > nodes.shape[0]:
                raise ComputeError(f"k={k_req} exceeds the {nodes.shape[0]} nodes partitioned")
            lab, vals, extra = recursive_bisection(
                sub, ctx, k=k_req, laplacian=p["laplacian"], split=p["split"],
                objective=p["objective"], max_conductance=p["max_conductance"],
                min_size=p["min_size"], max_parts=p["max_parts"], extra=p["extra_eigenvalues"])
            labels[nodes] = lab
            eig_chunks.append(vals)
            diag_extra.update(extra)
            k_for_ties = 2
        else:
            if embedding is not None:
                if len(comp_nodes) != 1:
                    raise ComputeError("a shared embedding applies to a graph partitioned as one component; "
                                       f"this one has {len(comp_nodes)}")
                embedding.check(method, p, int(comp_nodes[0].shape[0]))
                ctx.extra_accuracy = embedding.extra_accuracy
                diag_extra["embedding_reused"] = True
            alloc = _allocate(S, comp_nodes, k_req, method, ctx, p, warnings)
            if warm_start is not None and len(comp_nodes) != 1:
                diag_extra["warm_start"] = {"used": False, "matvecs": 0, "fallback":
                                            f"{len(comp_nodes)} components partitioned; warm start applies to one"}
            elif warm_start is not None and alloc[0] != 1:
                nodes = comp_nodes[0]
                sub = _induced(A_loops, nodes) if kept_mask is not None else A_loops
                m = min(sub.shape[0], alloc[0] if alloc[0] is not None else p["k_max"])
                solved, records = len(ctx.solvers), len(ctx.residual_norms)
                embedding = solve_embedding(sub, method, p, m, ctx, extra=p["extra_eigenvalues"],
                                            start=np.asarray(warm_start[nodes], dtype=np.float64))
                del ctx.solvers[solved:], ctx.residual_norms[records:]   # recorded again when reused below
                diag_extra["warm_start"] = dict(ctx.warm_start or {"used": False, "matvecs": 0,
                                                                   "fallback": "no iterative solve"})
            two_m = float(degrees(A_loops).sum())
            next_label = 0
            for nodes, k_i in zip(comp_nodes, alloc):
                ctx.check_cancel()
                if k_i == 1:
                    labels = np.full(n, -1, dtype=np.int64) if labels is None else labels
                    labels[nodes] = next_label
                    next_label += 1
                    continue
                sub = _induced(A_loops, nodes) if len(comp_nodes) > 1 or kept_mask is not None else A_loops
                lab, vals, extra = _run_spectral(sub, method, k_i, ctx, p, two_m,
                                                 None if embedding is None else embedding.solution(),
                                                 search=_search_of(searched, nodes, n, uses_direction))
                labels = np.full(n, -1, dtype=np.int64) if labels is None else labels
                labels[nodes] = lab + next_label
                next_label += int(lab.max()) + 1
                eig_chunks.append(vals)
                for key, val in extra.items():
                    if key in ("r",) and key in diag_extra:
                        diag_extra.setdefault("r_per_component", [diag_extra["r"]]).append(val)
                    elif isinstance(val, (int, float)) and key in diag_extra and key != "r":
                        diag_extra[key] += val
                    elif isinstance(val, list) and key in diag_extra:
                        diag_extra[key] = diag_extra[key] + val
                    else:
                        diag_extra.setdefault(key, val)
            labels = np.full(n, -1, dtype=np.int64) if labels is None else labels
            if method in ("fiedler",) and len(comp_nodes) == 1:
                k_for_ties = 2
            elif method in ("njw", "shi-malik", "regularized", "bethe", "directed-walk") \
                    and len(comp_nodes) == 1:
                k_for_ties = int(labels[comp_nodes[0]].max() - labels[comp_nodes[0]].min() + 1)
    eigenvalues = _union_eigenvalues(eig_chunks)
    if method == "leading-eigenvector":
        eigenvalues = (np.concatenate(eig_chunks) if eig_chunks else np.array([], dtype=np.float64))

    # eigengap suggestion (see _eigengap_suggestion) and the uniqueness warning
    eigengap = _eigengap_suggestion(method, eigenvalues, k_req, len(eig_chunks), p)
    if k_for_ties is not None and eigenvalues.size > k_for_ties and method != "leading-eigenvector":
        lo, hi = float(eigenvalues[k_for_ties - 1]), float(eigenvalues[k_for_ties])
        scale = max(abs(lo), abs(hi))
        slack = 10.0 * ctx.eig_tol * (2.0 if method != "bethe" else scale + 1.0) \
            if {"arpack-eigsh", "lobpcg", "arpack-eigsh-warm"} & set(ctx.solvers) else 1e-12 * max(scale, 1.0)
        if hi - lo <= p["tie_tol"] * scale + slack:
            warnings.append(f"eigenvalues {k_for_ties} and {k_for_ties + 1} are (nearly) equal "
                            f"({lo:.10g}, {hi:.10g}): the partition is not unique")

    # isolated / outside nodes: one extra community
    unassigned_label = None
    if outside:
        out_nodes = labels < 0
        labels[out_nodes] = labels.max() + 1 if (~out_nodes).any() else 0
        what = (f"{n_isolated} isolated node(s)" if policy != "largest"
                else f"{outside} node(s) outside the largest component")
        warnings.append(f"{what} placed in one extra community of their own")
    labels = canonical_labels(labels)
    if outside:
        unassigned_label = int(labels[np.flatnonzero(~_kept_nodes(comp, kept, n))[0]])
    ctx.report("quality")
    q = quality_measures(A_arcs if directed else A, labels, directed=directed)
    communities = q.pop("communities")
    q["conductance_per_community"] = [row["conductance"] for row in communities]
    warnings = warnings + ctx.warnings
    k_out = int(labels.max()) + 1
    solver_names = list(dict.fromkeys(ctx.solvers))
    res = ctx.residual_norms
    diagnostics: dict[str, Any] = {
        "solver": "+".join(solver_names) if solver_names else ("networkx" if info.family == "baseline" else "none"),
        "eigensolves": len(ctx.solvers),
        "matvecs": int(ctx.matvecs),
        "residual_norm_max": float(max(res)) if res else 0.0,
        "extra_eigenvalue_residual": ctx.extra_accuracy,
        "residual_norms": [float(r) for r in res[:_MAX_RESIDUALS_LISTED]],
        "wall_time_s": 0.0,
        "n_nodes": int(n),
        "n_edges": int((offdiag // 2) + int(np.count_nonzero(A.diagonal()))),
        "components": int(ncomp),
        "components_partitioned": int(len(kept)),
        "largest_component": int(comp_sizes.max()),
        "isolated_nodes": n_isolated,
        "unassigned_nodes": int(outside),
        "unassigned_community": unassigned_label,
        "eigengap_suggestion": eigengap,
        "directed": bool(directed),
        "k_requested": "auto" if k_req is None else int(k_req),
        # OpenBLAS threads the solves fixed (eigen.SOLVE_BLAS_THREADS; None below 100k rows, where the
        # process's setting is used): the last bits of the eigenpairs depend on it
        "blas_threads": ctx.blas_threads,
    }
    for key, val in diag_extra.items():
        diagnostics[key] = val
    params_out = dict(p)
    params_out["seed"] = seed
    params_out["k_requested"] = diagnostics["k_requested"]
    diagnostics["wall_time_s"] = float(time.perf_counter() - t0)
    ctx.report("done")
    return PartitionResult(labels=labels, k=k_out, method=method, params=params_out,
                           eigenvalues=eigenvalues, quality=q, communities=communities,
                           warnings=warnings, diagnostics=diagnostics)


def _eigengap_suggestion(method: str, eigenvalues: np.ndarray, k_req: int | None, problems: int,
                         p: dict) -> int | None:
    r"""The k the computed spectrum suggests, or None where it would mean nothing.

    - ``fiedler``, ``njw``, ``shi-malik``, ``regularized``: the eigengap
      :math:`\arg\max_{2 \le i < m}(\lambda_{i+1} - \lambda_i)` of
      :func:`eigengap_k` (never the trivial first gap, so never k = 1),
      among ``k_max`` candidates for ``k="auto"``;
    - ``bethe``: the number of negative eigenvalues of :math:`H(r)`
      (Saade et al. 2014), only when a non-negative one was computed too
      (then the count is exact whatever k was asked for).

    None when the eigenvalues come from several sub-problems (components
    partitioned each in its own right), for ``recursive`` (its spectrum is
    the first bisection's) and ``leading-eigenvector`` (modularity
    eigenvalues of nested groups), and when an integer k was asked for
    with fewer than k + 2 eigenvalues computed (with k + 1 values every gap
    beyond k is unseen, so the answer could only confirm k or be smaller;
    raise ``extra_eigenvalues`` to get one).
    """
    m = int(eigenvalues.size)
    if problems != 1 or method not in ("fiedler", "njw", "shi-malik", "regularized", "bethe",
                                       "directed-walk"):
        return None
    if method == "bethe":          # exact once a non-negative eigenvalue was computed
        negative = int(np.sum(eigenvalues < 0))
        return negative if 0 < negative < m else None
    if k_req is not None and m < k_req + 2:
        return None
    return eigengap_k(eigenvalues, p.get("k_max") if k_req is None else None)


def _search_of(searched: list, nodes: np.ndarray, n: int, uses_direction: bool) -> np.ndarray | None:
    """The components' breadth-first order renumbered to the component ``nodes`` (sorted), or None.

    It is the order :func:`workspace.spectral.ordering.computation_order` would find on the
    component's matrix: the same start (the first node with an edge, the component's first node),
    and the same neighbour order (the induced matrix keeps each row's stored order, renumbered
    monotonically; doubling the loops changes values, not the pattern). A method on the arcs of a
    directed graph (``uses_direction``) has another pattern: None.
    """
    if not searched or uses_direction or searched[0].shape[0] != nodes.shape[0]:
        return None
    reached = searched.pop()       # handed over once (one component has it): not kept through the solve
    if nodes.shape[0] == n:
        return reached
    position = np.full(n, -1, dtype=reached.dtype)
    position[nodes] = np.arange(nodes.shape[0], dtype=reached.dtype)
    return position[reached]


#: Up to this many dropped (isolated) nodes, :func:`_induced` renumbers columns by streaming passes.
_FEW_DROPPED = 4


def _induced(A: sp.csr_array, nodes: np.ndarray) -> sp.csr_array:
    """Induced subgraph ``A[nodes][:, nodes]`` (``nodes`` sorted).

    When every dropped node has an empty row (isolated nodes, the common
    case), the values and row structure are reused as they are and only
    the column indices are renumbered: O(nnz) with no copy of the values.
    """
    n = A.shape[0]
    if nodes.shape[0] == n:
        return A
    dropped = np.ones(n, dtype=bool)
    dropped[nodes] = False
    row_nnz = np.diff(A.indptr)
    if row_nnz[dropped].any():
        return sp.csr_array(A[nodes][:, nodes])
    gone = np.flatnonzero(dropped)
    if gone.shape[0] <= _FEW_DROPPED:
        # a handful of isolated nodes (a planted graph of mean degree 15 has about one in 1M): a
        # column index drops by the number of them before it, in streaming passes; the gather
        # through an n-long table below reads it at random (10M nodes: 3.0-3.5 s)
        columns = A.indices.copy()
        for node in gone:
            columns -= A.indices > node
    else:
        remap = np.full(n, -1, dtype=A.indices.dtype)
        remap[nodes] = np.arange(nodes.shape[0], dtype=A.indices.dtype)
        columns = remap[A.indices]
        del remap
    indptr = np.append(A.indptr[nodes], A.indptr[-1]).astype(A.indptr.dtype, copy=False)
    sub = sp.csr_array((A.data, columns, indptr), shape=(nodes.shape[0], nodes.shape[0]))
    sub.has_sorted_indices = A.has_sorted_indices   # renumbering keeps the order
    return sub


def _kept_nodes(comp: np.ndarray, kept: np.ndarray, n: int) -> np.ndarray:
    return np.isin(comp, kept)


def _component_node_lists(comp: np.ndarray, kept: np.ndarray) -> list[np.ndarray]:
    if kept.shape[0] == 1:
        return [np.flatnonzero(comp == kept[0])]
    order = np.argsort(comp, kind="stable")
    bounds = np.searchsorted(comp[order], kept)
    counts = np.bincount(comp)
    return [order[b:b + counts[c]] for b, c in zip(bounds, kept)]


def _check_within_components(labels: np.ndarray, comp: np.ndarray, method: str) -> None:
    """Raise if a community of a baseline spans two connected components (never expected)."""
    assigned = labels >= 0
    if not assigned.any():
        return
    lab, cmp = labels[assigned], comp[assigned]
    first = np.full(int(lab.max()) + 1, -1, dtype=np.int64)
    first[lab[::-1]] = cmp[::-1]
    if np.any(first[lab] != cmp):
        raise ComputeError(f"{method}: a community spans two connected components "
                           "(the component rule forbids it)")


def _allocate(A, comp_nodes: list[np.ndarray], k: int | None, method: str, ctx: SolverContext,
              p: dict, warnings: list[str], counts_only: bool = False) -> list[int | None]:
    """Parts per kept component (None = the method decides, for k='auto').

    ``counts_only``: apply the component rule (k < c refused, k = c warned)
    and stop there (the baselines place their k - c extra parts themselves).
    """
    c = len(comp_nodes)
    if k is None:
        return [None] * c
    if c == 1:
        return [k]
    if k < c:
        raise ComputeError(f"the graph has {c} connected components of 2+ nodes, more than k={k}; "
                           "ask for k >= the number of components, or use components=largest")
    if k == c:
        warnings.append(f"k={k} equals the number of components: the communities are the components")
        return [1] * c
    if counts_only:
        return [None] * c
    if method == "fiedler":  # pragma: no cover - fixed k=2 < 3 components handled above
        raise ComputeError("fiedler needs a connected graph")
    # distribute the k - c extra parts by the union spectrum of L_sym
    want = k - c + 1
    pieces = []
    for idx, nodes in enumerate(comp_nodes):
        m = min(want, nodes.shape[0])
        sub = _induced(A, nodes)
        sol = laplacian_eigenpairs(sub, m, laplacian="sym", seed=ctx.seed,
                                   dense_threshold=ctx.dense_threshold, eig_tol=ctx.eig_tol,
                                   max_matvecs=ctx.max_matvecs, time_limit_s=ctx.time_limit_s,
                                   progress=ctx.progress, cancel=ctx.cancel, threads=ctx.threads)
        ctx.solvers.append(sol.solver)
        ctx.matvecs += sol.matvecs
        for j, val in enumerate(sol.values):
            pieces.append((0.0 if j == 0 else float(val), j, idx))
    pieces.sort()
    alloc = [0] * c
    for _, _, idx in pieces[:k]:
        alloc[idx] += 1
    for idx, nodes in enumerate(comp_nodes):
        if alloc[idx] >= nodes.shape[0]:
            alloc[idx] = nodes.shape[0]
    return alloc


def _order_for(sub, solution, ctx: SolverContext, search=None):
    """Computation order of one component's products (None: small graph or no solve to run).

    A pure function of the component's pattern (see :mod:`workspace.spectral.ordering`); it
    changes the speed of the products, not the labels (the start vector is drawn in the
    original order and permuted, the eigenvectors are permuted back).
    """
    if solution is not None or sub.shape[0] < ordering.ORDER_MIN_NODES:
        return None
    ctx.report("order")
    return computation_order(sub, search=search)


def _run_spectral(sub, method: str, k: int | None, ctx: SolverContext, p: dict,
                  two_m: float, solution=None, search=None) -> tuple[np.ndarray, np.ndarray, dict]:
    """One connected component; returns (labels 0.., eigenvalues, extra diagnostics)."""
    n = sub.shape[0]
    if k is not None and k >= n:
        return np.arange(n, dtype=np.int64), np.array([], dtype=np.float64), {}
    if method == "fiedler":
        lab, vals, extra = fiedler_bisection(sub, ctx, laplacian=p["laplacian"], split=p["split"],
                                             objective=p["objective"], extra=p["extra_eigenvalues"])
        return lab, vals, {"split_" + key: val for key, val in extra.items()}
    if method in ("njw", "shi-malik", "regularized"):
        tau = 0.0
        extra: dict[str, Any] = {}
        if method == "regularized":
            tau = p["tau"] if p["tau"] >= 0 else float(degrees(sub).mean())
            extra["tau"] = tau
        order, search = _order_for(sub, solution, ctx, search), None
        U, vals, k_used = laplacian_embedding(sub, k, method, ctx, extra=p["extra_eigenvalues"],
                                              k_max=p["k_max"], tau=tau, solution=solution, order=order)
        lab, info = assign_rows(U, k_used, ctx, assign=p["assign"], n_init=p["n_init"],
                                max_iter=p["kmeans_max_iter"])
        extra.update(info)
        return lab, vals, extra
    if method == "bethe":
        if p["weights"] == "ignore":
            # Saade, Krzakala & Zdeborova (2014) analyse unweighted sparse graphs: with weights in A and
            # D the number of negative eigenvalues no longer estimates the number of groups
            sub = with_loops_doubled(sp.csr_array((np.ones_like(sub.data), sub.indices, sub.indptr),
                                                  shape=sub.shape))
        order, search = _order_for(sub, solution, ctx, search), None
        U, vals, k_used, extra = bethe_embedding(sub, k, ctx, r=p["r"], extra=p["extra_eigenvalues"],
                                                 k_max=p["k_max"], solution=solution, order=order)
        extra["weights"] = p["weights"]
        lab, info = assign_rows(U, k_used, ctx, assign=p["assign"], n_init=p["n_init"],
                                max_iter=p["kmeans_max_iter"])
        extra.update(info)
        return lab, vals, extra
    if method == "directed-walk":
        U, vals, k_used, extra = directed_embedding(sub, k, ctx, walk=p["walk"], alpha=p["alpha"],
                                                    extra=p["extra_eigenvalues"], k_max=p["k_max"])
        lab, info = assign_rows(U, k_used, ctx, assign=p["assign"], n_init=p["n_init"],
                                max_iter=p["kmeans_max_iter"])
        extra.update(info)
        return lab, vals, extra
    if method == "leading-eigenvector":
        lab, vals, extra = leading_eigenvector(sub, ctx, two_m=two_m, min_gain=p["min_gain"],
                                              refine=p["refine"], refine_max_size=p["refine_max_size"])
        return lab, vals, extra
    raise ParameterError(f"unknown method {method!r}")  # pragma: no cover
