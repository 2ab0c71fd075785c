"""One spectral embedding for a whole range of k.

The k-way methods (``njw``, ``shi-malik``, ``regularized``, ``bethe``) embed
the nodes with the leading eigenvectors of one operator and then assign rows
to k groups. The operator does not depend on k, so the eigenvectors for the
largest k of a range serve every smaller k: the run for k uses the first k
columns, and only the assignment step repeats (the k-path idea of spectral
clustering; von Luxburg 2007, Sec. 8.3, discusses choosing k on one
spectrum).

An :class:`Embedding` holds the raw eigenpairs of the shifted operator
exactly as :func:`workspace.spectral.eigen.largest_eigenpairs` returned them,
so a run that takes its first k columns embeds exactly as
:func:`workspace.spectral.kway.laplacian_embedding` would with those
eigenpairs. Which operator a method uses:

- ``njw`` and ``shi-malik``: :math:`M = I + D^{-1/2} A D^{-1/2}` (``"normalized"``,
  :math:`\\tau = 0`; both methods share one embedding);
- ``regularized``: :math:`M = I + D_\\tau^{-1/2} A D_\\tau^{-1/2}` (``"regularized"``);
- ``bethe``: :math:`M = cI - H(r)` (``"bethe"``, with ``r`` and ``weights``).

References
----------
von Luxburg (2007), A tutorial on spectral clustering, Statistics and
Computing 17(4); Ng, Jordan & Weiss (2001), NIPS 14; Shi & Malik (2000),
IEEE TPAMI 22(8); Qin & Rohe (2013), NIPS 26; Saade, Krzakala & Zdeborová
(2014), NIPS 27.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import scipy.sparse as sp

from workspace.errors import ComputeError

from .eigen import EigenSolution, SolverContext, SymmetricOperator, largest_eigenpairs, shifted_laplacian_operator
from .laplacians import degrees, with_loops_doubled

__all__ = ["EMBEDDING_METHODS", "Embedding", "operator_for", "solve_embedding", "embedding_fields"]

#: Methods whose runs can take their eigenvectors from a shared embedding.
EMBEDDING_METHODS = ("njw", "shi-malik", "regularized", "bethe")

#: Method parameters that change the embedding (beyond the solver settings below).
_OPERATOR_PARAMS = {"njw": (), "shi-malik": (), "regularized": ("tau",), "bethe": ("r", "weights")}
#: Solver settings that change the computed eigenvectors (threads and time limits do not).
_SOLVER_PARAMS = ("eig_tol", "dense_threshold", "max_matvecs", "extra_eigenvalues", "components")


def operator_for(method: str, params: dict[str, Any]) -> tuple[str, dict[str, Any]]:
    """Operator name and its defining parameters (as requested) for a k-way method.

    Parameters
    ----------
    method : {"njw", "shi-malik", "regularized", "bethe"}
    params : dict
        Validated method parameters (:func:`workspace.spectral.methods.validate_params`).

    Returns
    -------
    (str, dict)
        ``("normalized", {})``, ``("regularized", {"tau": t})`` or
        ``("bethe", {"r": r, "weights": w})``. ``tau = -1`` and ``r = 0`` stand
        for their graph-derived defaults, which the graph determines.

    Raises
    ------
    workspace.errors.ComputeError
        For a method without a shared embedding.
    """
    if method not in EMBEDDING_METHODS:
        raise ComputeError(f"{method} does not embed with one operator for all k; no shared embedding")
    name = {"njw": "normalized", "shi-malik": "normalized"}.get(method, method)
    return name, {key: params[key] for key in _OPERATOR_PARAMS[method]}


def embedding_fields(method: str, params: dict[str, Any], n_vectors: int, seed: int) -> dict[str, Any]:
    """Everything besides the graph that determines an embedding's bits (JSON types).

    The operator and its parameters, the number of vectors, the start-vector
    seed and the solver settings (tolerance, dense threshold, matvec budget,
    extra eigenvalues, component policy); threads and time limits do not
    change the result. A store keys its cached embeddings by these fields
    plus the graph's content hash.
    """
    operator, op_params = operator_for(method, params)
    return {"operator": operator, "operator_params": op_params, "n_vectors": int(n_vectors), "seed": int(seed),
            "solver": {key: params[key] for key in _SOLVER_PARAMS if key in params}}


@dataclass(frozen=True, eq=False)
class Embedding:
    """Eigenpairs of one operator, shared by the runs of several k.

    Attributes
    ----------
    operator : str
        ``"normalized"``, ``"regularized"`` or ``"bethe"``.
    operator_params : dict
        As requested (``tau=-1`` / ``r=0`` mean the graph-derived defaults).
    values : ndarray of float64, shape (m + extra,)
        Eigenvalues of the shifted operator ``M``, descending, as returned by
        :func:`workspace.spectral.eigen.largest_eigenpairs`.
    vectors : ndarray of float64, shape (n_sub, m)
        Matching eigenvectors (signs fixed) of the partitioned subgraph (the
        one kept component, see :func:`workspace.spectral.sweep.compute_embedding`).
    solver : str
    residual_norms : list of float
    seed : int
        Seed of the start vector.
    extra_accuracy : float or None
        Residual bound of the eigenvalues beyond ``m`` when estimated quickly.
    info : dict
        Resolved ``tau`` / ``r`` and other solver facts (JSON types).
    """

    operator: str
    operator_params: dict
    values: np.ndarray
    vectors: np.ndarray
    solver: str
    residual_norms: list
    seed: int
    extra_accuracy: float | None = None
    info: dict = field(default_factory=dict)

    @property
    def n_vectors(self) -> int:
        return int(self.vectors.shape[1])

    def solution(self) -> EigenSolution:
        """All pairs as an :class:`EigenSolution` (the k-way methods take their first k)."""
        return EigenSolution(values=self.values, vectors=self.vectors, solver=self.solver, matvecs=0,
                             residual_norms=list(self.residual_norms))

    def check(self, method: str, params: dict[str, Any], n: int) -> None:
        """Refuse an embedding that does not belong to this method, parameters and graph size."""
        operator, op_params = operator_for(method, params)
        if operator != self.operator or op_params != self.operator_params:
            raise ComputeError(f"the embedding is of operator {self.operator} {self.operator_params}, "
                               f"not {operator} {op_params} as {method} needs")
        if self.vectors.shape[0] != n:
            raise ComputeError(f"the embedding has {self.vectors.shape[0]} rows; the graph partitioned "
                               f"has {n} nodes")


def solve_embedding(sub, method: str, params: dict[str, Any], m: int, ctx: SolverContext, *,
                    extra: int = 1, start: np.ndarray | None = None) -> Embedding:
    r"""Leading ``m`` eigenpairs of the operator of ``method`` on a connected graph.

    Builds exactly the operator :func:`workspace.spectral.kway.laplacian_embedding`
    or :func:`workspace.spectral.kway.bethe_embedding` builds (see the module
    docstring for the formulas) and solves it once with
    :func:`workspace.spectral.eigen.largest_eigenpairs`.

    Parameters
    ----------
    sub : scipy sparse matrix, shape (n, n)
        Symmetric adjacency of one connected component (the engine's subgraph).
    method : {"njw", "shi-malik", "regularized", "bethe"}
    params : dict
        Validated parameters.
    m : int
        Number of vectors (the largest k of the range).
    ctx : SolverContext
    extra : int, default 1
        Eigenvalues beyond ``m`` (the eigengap at the largest k needs one).
    start : ndarray, shape (n, b), optional
        Warm-start block in ``sub``'s node order (see
        :func:`workspace.spectral.eigen.warm_start_vector`); its outcome is in
        ``info["warm_start"]``.

    Returns
    -------
    Embedding

    Raises
    ------
    workspace.errors.ComputeError
        Solver failure.

    References
    ----------
    Ng, Jordan & Weiss (2001); Shi & Malik (2000); Qin & Rohe (2013);
    Saade, Krzakala & Zdeborová (2014).
    """
    from .kway import bethe_default_r

    operator, op_params = operator_for(method, params)
    A = sub if isinstance(sub, sp.csr_array) else sp.csr_array(sub)
    n = A.shape[0]
    m = min(int(m), n)
    info: dict[str, Any] = {}
    if operator == "bethe":
        if params["weights"] == "ignore":
            # as partition does: unit weights, then the loop convention (a loop counts 2)
            A = with_loops_doubled(sp.csr_array((np.ones_like(A.data), A.indices, A.indptr), shape=A.shape))
        d = degrees(A)
        r = params["r"] if params["r"] > 0 else bethe_default_r(d)
        c = r * r - 1.0 + (1.0 + r) * float(d.max())
        op = SymmetricOperator(A, diagonal=(c - r * r + 1.0) - d, scale=r)
        sol = largest_eigenpairs(op, m, ctx, stage="bethe", bound=abs(c) + 1.0, extra=extra, start=start)
        info["r"] = float(r)
        info["shift"] = float(c)
    else:
        d = degrees(A)
        tau = 0.0
        if operator == "regularized":
            tau = params["tau"] if params["tau"] >= 0 else float(d.mean())
            info["tau"] = float(tau)
        op, shift, _ = shifted_laplacian_operator(A, "sym", d, regularizer=tau)
        sol = largest_eigenpairs(op, m, ctx, stage=method, bound=shift, extra=extra, start=start)
        info["shift"] = float(shift)
    if start is not None and ctx.warm_start is not None:
        info["warm_start"] = dict(ctx.warm_start)
    return Embedding(operator=operator, operator_params=op_params, values=np.asarray(sol.values, np.float64),
                     vectors=sol.vectors, solver=sol.solver, residual_norms=list(sol.residual_norms),
                     seed=int(ctx.seed), extra_accuracy=ctx.extra_accuracy, info=info)
