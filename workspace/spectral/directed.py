r"""Spectral partitioning of directed graphs through the random walk (Chung 2005).

For a directed weighted graph with arc matrix :math:`A` (:math:`A_{ij}` = weight of
the arc :math:`i \to j`, row = tail) the random walk has the row-stochastic transition
matrix :math:`P` and stationary distribution :math:`\phi^T P = \phi^T`,
:math:`\sum_i \phi_i = 1`. With :math:`\Phi = \mathrm{diag}(\phi)` Chung's directed
Laplacian is

.. math:: \mathcal{L} = I - \tfrac12\big(\Phi^{1/2} P \Phi^{-1/2} + \Phi^{-1/2} P^T \Phi^{1/2}\big),

symmetric with spectrum in [0, 2]; it is the normalised Laplacian of the undirected
"circulation" :math:`W = (\Phi P + P^T \Phi)/2`, whose degrees are :math:`\phi`.
Walks (as ``networkx.directed_laplacian_matrix`` names them):

- ``random``: :math:`P = D_{out}^{-1} A` (needs every node to have an out-arc; the
  stationary distribution is unique when the graph is strongly connected);
- ``lazy``: :math:`P = \tfrac12 (I + D_{out}^{-1} A)` (aperiodic);
- ``pagerank``: :math:`P = \alpha P_0 + (1 - \alpha) \mathbf{1}\mathbf{1}^T / n`, where
  :math:`P_0` is :math:`D_{out}^{-1} A` with the rows of nodes without out-arcs
  replaced by :math:`\mathbf{1}^T / n` (teleportation; any graph).
- ``auto``: ``random`` if the graph is strongly connected and aperiodic, ``lazy`` if
  strongly connected but periodic, else ``pagerank`` (networkx's rule).

Everything is matrix-free: :math:`P` is a sparse part plus a rank-one term, so the
dense teleportation matrix is never formed above the dense threshold.

References
----------
Chung (2005), Laplacians and the Cheeger inequality for directed graphs, Annals of
Combinatorics 9(1), 1–19.
Zhou, Huang & Schölkopf (2005), Learning from labeled and unlabeled data on a directed
graph, ICML (the directed normalized cut and its spectral relaxation).
Page, Brin, Motwani & Winograd (1999), The PageRank citation ranking (teleportation).
"""

from __future__ import annotations

from math import gcd

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components, shortest_path

from workspace.errors import ComputeError

from .eigen import SolverContext, SymmetricOperator, largest_eigenpairs
from .kway import eigengap_k

__all__ = ["walk_parts", "choose_walk", "stationary_distribution", "directed_laplacian",
           "directed_embedding", "symmetrised"]


def symmetrised(A) -> sp.csr_array:
    r"""Undirected graph of a directed one: :math:`S = A + A^T - \mathrm{diag}(A)`.

    The weights of the two arcs of a pair are summed; a loop arc stays an
    undirected loop of the same weight (which the loop convention then counts
    twice, as its out- and in-end). Degrees of :math:`S` (loops counted twice)
    are out-degree + in-degree.
    """
    A = sp.csr_array(A)
    S = sp.csr_array(A + A.T)
    diag = A.diagonal()
    if np.any(diag):
        S = sp.csr_array(S - sp.diags_array(diag))
        S.eliminate_zeros()
    S.sort_indices()
    return S


def _period(A: sp.csr_array) -> int:
    """Period of a strongly connected digraph: gcd of ``level(u) + 1 - level(v)`` over arcs.

    ``level`` is the breadth-first distance from node 0 (Jarvis & Shier 1996,
    as networkx.is_aperiodic computes it).
    """
    level = shortest_path(A, method="D", unweighted=True, directed=True, indices=0)
    level = level.astype(np.int64)
    coo = A.tocoo()
    diffs = np.abs(level[coo.row] + 1 - level[coo.col])
    g = 0
    for value in np.unique(diffs):
        g = gcd(g, int(value))
        if g == 1:
            break
    return g


def choose_walk(A: sp.csr_array) -> str:
    """networkx's rule: random (strongly connected, aperiodic), lazy (periodic), else pagerank."""
    n = A.shape[0]
    out = np.diff(A.indptr)
    if np.any(out == 0):
        return "pagerank"
    n_strong, _ = connected_components(A, directed=True, connection="strong")
    if n_strong != 1 or n < 2:
        return "pagerank"
    return "random" if _period(A) == 1 else "lazy"


def walk_parts(A, walk: str, alpha: float) -> tuple[sp.csr_array, float, float, np.ndarray | None]:
    r"""The transition matrix as :math:`P = a P_0 + b I + c \mathbf{1}^T / n`.

    Returns ``(P0, a, b, c)``: ``P0`` sparse :math:`D_{out}^{+} A` (rows of nodes
    without out-arcs are zero), scalars ``a``, ``b`` and the vector ``c``
    (None when 0): random ``(1, 0, -)``, lazy ``(1/2, 1/2, -)``, pagerank
    ``(alpha, 0, alpha * dangling + 1 - alpha)``.

    Raises
    ------
    workspace.errors.ComputeError
        ``random``/``lazy`` on a graph with a node without out-arcs.
    """
    A = sp.csr_array(A, dtype=np.float64)
    n = A.shape[0]
    out = np.asarray(A.sum(axis=1)).ravel()
    dangling = out <= 0
    if walk in ("random", "lazy") and dangling.any():
        raise ComputeError(f"the {walk} walk needs an out-arc at every node ({int(dangling.sum())} "
                           "node(s) have none); use walk=pagerank (teleportation)")
    inv = np.zeros(n)
    inv[~dangling] = 1.0 / out[~dangling]
    data = A.data * np.repeat(inv, np.diff(A.indptr))
    P0 = sp.csr_array((data, A.indices, A.indptr), shape=A.shape)
    if walk == "random":
        return P0, 1.0, 0.0, None
    if walk == "lazy":
        return P0, 0.5, 0.5, None
    if walk == "pagerank":
        if not 0.0 < alpha < 1.0:
            raise ComputeError(f"alpha must lie strictly between 0 and 1 (got {alpha})")
        return P0, float(alpha), 0.0, alpha * dangling.astype(np.float64) + (1.0 - alpha)
    raise ComputeError(f"unknown walk {walk!r}")  # pragma: no cover - validated by the schema


def _dense_P(P0, a, b, c) -> np.ndarray:
    n = P0.shape[0]
    P = a * P0.toarray()
    P[np.diag_indices(n)] += b
    if c is not None:
        P += np.outer(c, np.ones(n)) / n
    return P


def stationary_distribution(P0, a: float, b: float, c, *, dense_threshold: int = 1000,
                            tol: float = 1e-13, max_iter: int = 100000,
                            check=None) -> np.ndarray:
    r""":math:`\phi` with :math:`\phi^T P = \phi^T`, :math:`\phi \ge 0`, :math:`\sum \phi = 1`.

    Dense (``n <= min(dense_threshold, 2000)``): the linear system
    :math:`(I - P)^T \phi = 0` with its last equation replaced by
    :math:`\sum_i \phi_i = 1` (LU; non-singular exactly when the chain
    has one closed class). Otherwise power iteration
    :math:`\phi \leftarrow P^T \phi` (products with the CSC view of ``P0``,
    no transposed copy) until the 1-norm change is below ``tol``; lazy and
    teleporting walks converge geometrically. ``check`` (optional callable)
    is called every 64 iterations (cancellation).

    Raises
    ------
    workspace.errors.ComputeError
        No convergence within ``max_iter`` products, or a node with
        :math:`\phi_i = 0` (the walk never visits it: not strongly
        connected; use the pagerank walk).
    """
    n = P0.shape[0]
    if n <= min(dense_threshold, 2000):
        M = (np.eye(n) - _dense_P(P0, a, b, c)).T
        M[-1, :] = 1.0
        rhs = np.zeros(n)
        rhs[-1] = 1.0
        try:
            phi = np.linalg.solve(M, rhs)
        except np.linalg.LinAlgError:
            phi = np.zeros(n)                    # singular: more than one closed class
    else:
        phi = np.full(n, 1.0 / n)
        PT = P0.T
        for step in range(max_iter):
            if check is not None and step % 64 == 0:
                check()
            new = a * (PT @ phi) + b * phi
            if c is not None:
                new += float(c @ phi) / n
            new /= new.sum()
            if np.abs(new - phi).sum() < tol:
                phi = new
                break
            phi = new
        else:
            raise ComputeError(f"the stationary distribution did not converge in {max_iter} steps; "
                               "use walk=lazy or walk=pagerank")
    phi = np.where(np.abs(phi) < 1e-300, 0.0, phi)
    if not np.all(np.isfinite(phi)) or np.any(phi <= 1e-15 * np.abs(phi).max(initial=0.0)):
        raise ComputeError("the random walk never reaches some nodes (the graph is not strongly "
                           "connected); use walk=pagerank")
    return phi / phi.sum()


class _DirectedOperator(SymmetricOperator):
    r""":math:`I + \Theta`, :math:`\Theta = (\Phi^{1/2} P \Phi^{-1/2} + \Phi^{-1/2} P^T \Phi^{1/2})/2`."""

    def __init__(self, P0, a: float, b: float, c, phi: np.ndarray) -> None:
        s = np.sqrt(phi)
        # S0 = Phi^1/2 P0 Phi^-1/2 (same pattern as A)
        data = P0.data * np.repeat(s, np.diff(P0.indptr)) / s[P0.indices]
        S0 = sp.csr_array((data, P0.indices, P0.indptr), shape=P0.shape)
        super().__init__(S0, diagonal=1.0 + b)
        self.a = a
        self.u = None if c is None else s * c / P0.shape[0]
        self.w = 1.0 / s

    def apply(self, X: np.ndarray) -> np.ndarray:
        Y = (self.S @ X + self.S.T @ X) * (0.5 * self.a)
        Y += self.diagonal * X
        if self.u is not None:
            u, w = self.u, self.w
            Y += 0.5 * (np.multiply.outer(u, w @ X) + np.multiply.outer(w, u @ X))
        return Y

    def parallel(self, executor, parts):  # the transposed product has no row-block form
        return self

    def to_dense(self) -> np.ndarray:
        S = self.S.toarray()
        M = 0.5 * self.a * (S + S.T)
        M[np.diag_indices(self.n)] += self.diagonal
        if self.u is not None:
            M += 0.5 * (np.outer(self.u, self.w) + np.outer(self.w, self.u))
        return M


def directed_laplacian(A, *, walk: str = "auto", alpha: float = 0.95) -> np.ndarray:
    r"""Chung's directed Laplacian :math:`\mathcal{L}` as a dense array (small graphs; for checks).

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)
        Arc matrix, row = tail.
    walk : {"auto", "random", "lazy", "pagerank"}, default "auto"
    alpha : float, default 0.95
        Probability of following an arc in the pagerank walk.

    Returns
    -------
    ndarray, shape (n, n)

    References
    ----------
    Chung (2005), Annals of Combinatorics 9(1).
    """
    A = sp.csr_array(A, dtype=np.float64)
    walk = choose_walk(A) if walk == "auto" else walk
    P0, a, b, c = walk_parts(A, walk, alpha)
    phi = stationary_distribution(P0, a, b, c, dense_threshold=2000)
    op = _DirectedOperator(P0, a, b, c, phi)
    return 2.0 * np.eye(A.shape[0]) - op.to_dense()


def directed_embedding(A, k: int | None, ctx: SolverContext, *, walk: str = "auto",
                       alpha: float = 0.95, extra: int = 1, k_max: int = 10
                       ) -> tuple[np.ndarray, np.ndarray, int, dict]:
    r"""Embedding of a weakly connected digraph by the eigenvectors of :math:`\mathcal{L}`.

    The ``k`` smallest eigenpairs :math:`(\lambda_i, v_i)` of Chung's
    :math:`\mathcal{L}` are the largest of :math:`I + \Theta = 2I - \mathcal{L}`
    (spectrum in [0, 2]); the rows of :math:`U = \Phi^{-1/2} [v_1 \dots v_k]`
    are the embedding (the relaxation of the directed normalized cut of Zhou,
    Huang & Schölkopf 2005; for a symmetric A with the random walk,
    :math:`\phi = d / \mathrm{vol}` and this is Shi & Malik's embedding).

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)
        Arc matrix of one weakly connected component.
    k : int or None
        None: the eigengap of :math:`\mathcal{L}` among ``k_max`` candidates.
    ctx : SolverContext
    walk : {"auto", "random", "lazy", "pagerank"}, default "auto"
    alpha : float, default 0.95
    extra : int, default 1
    k_max : int, default 10

    Returns
    -------
    embedding : ndarray, shape (n, k)
    eigenvalues : ndarray, ascending, of :math:`\mathcal{L}`
    k : int
    info : dict
        ``walk`` used and ``alpha`` (pagerank only).
    """
    A = sp.csr_array(A, dtype=np.float64)
    n = A.shape[0]
    used = choose_walk(A) if walk == "auto" else walk
    P0, a, b, c = walk_parts(A, used, alpha)
    ctx.report("stationary distribution")
    phi = stationary_distribution(P0, a, b, c, dense_threshold=ctx.dense_threshold,
                                  check=ctx.check_cancel)
    op = _DirectedOperator(P0, a, b, c, phi)
    m = min(n, k if k is not None else k_max)
    sol = largest_eigenpairs(op, m, ctx, stage="directed", bound=2.0, extra=extra)
    values = 2.0 - sol.values
    if k is None:
        k = eigengap_k(values, k_max) or 1
    U = sol.vectors[:, :k] / np.sqrt(phi)[:, None]
    info = {"walk": used}
    if used == "pagerank":
        info["alpha"] = float(alpha)
    return U, values, k, info
