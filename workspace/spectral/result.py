"""The frozen result of :func:`workspace.spectral.partition`."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from workspace.domain import canonical_labels  # one definition for the whole package

__all__ = ["PartitionResult", "canonical_labels"]


@dataclass(frozen=True, eq=False)
class PartitionResult:
    """A partition of the nodes of a graph and how it was found.

    Attributes
    ----------
    labels : ndarray of int64, shape (n,)
        Community of node ``i`` (row ``i`` of the adjacency), numbered
        ``0..k-1`` by first appearance in node order.
    k : int
        Number of communities in ``labels`` (this includes the extra
        community that collects isolated nodes, or the nodes outside the
        largest component under ``components="largest"``; see
        ``diagnostics["unassigned_community"]``).
    method : str
        Method id.
    params : dict
        Validated parameters with defaults filled in, plus ``seed`` and the
        ``k`` that was asked for (``k_requested``).
    eigenvalues : ndarray of float64, shape (m,)
        The eigenvalues computed, ascending, of the operator the method
        embeds with (union over components when several are partitioned):

        - ``fiedler``, ``recursive``: the chosen Laplacian (``L``, ``L_sym``
          or ``L_rw``; for ``recursive`` those of the first bisection);
        - ``shi-malik``: the generalised problem ``L u = λ D u``
          (equal to the spectrum of ``L_sym``);
        - ``njw``: ``L_sym = I - D^-1/2 A D^-1/2`` (so ``1 - μ`` for the
          leading eigenvalues ``μ`` of the normalised adjacency);
        - ``regularized``: ``I - D_τ^-1/2 A D_τ^-1/2``;
        - ``bethe``: the Bethe Hessian ``H(r)`` (negative ones first);
        - ``directed-walk``: Chung's directed Laplacian
          ``I - (Φ^1/2 P Φ^-1/2 + Φ^-1/2 P^T Φ^1/2)/2``;
        - ``leading-eigenvector``: the leading eigenvalue of the
          (generalised) modularity matrix of every split tried, in
          descending order of discovery as computed (not sorted);
        - baselines: empty.
    quality : dict
        :func:`workspace.spectral.quality.quality_measures` of ``labels``
        (without the per-community table, which is ``communities``).
    communities : list of dict
        One row per community: ``community, size, volume, cut, conductance``.
    warnings : list of str
    diagnostics : dict
        Plain JSON types: ``solver`` (list), ``matvecs``, ``iterations``,
        ``residual_norms``, ``wall_time_s``, ``components``,
        ``isolated_nodes``, ``eigengap_suggestion``, ``unassigned_community``
        and method-specific entries.
    """

    labels: np.ndarray
    k: int
    method: str
    params: dict[str, Any]
    eigenvalues: np.ndarray
    quality: dict[str, Any]
    communities: list[dict[str, Any]]
    warnings: list[str] = field(default_factory=list)
    diagnostics: dict[str, Any] = field(default_factory=dict)

    def to_dict(self, *, include_labels: bool = False) -> dict[str, Any]:
        """JSON-serialisable plain-type view.

        Parameters
        ----------
        include_labels : bool, default False
            Add ``labels`` as a list of int.

        Returns
        -------
        dict
            Keys ``method, k, params, eigenvalues, quality, communities,
            warnings, diagnostics`` (+ ``labels``).
        """
        out: dict[str, Any] = {
            "method": self.method,
            "k": int(self.k),
            "params": _plain(self.params),
            "eigenvalues": [float(x) for x in np.asarray(self.eigenvalues, dtype=np.float64)],
            "quality": _plain(self.quality),
            "communities": _plain(self.communities),
            "warnings": [str(w) for w in self.warnings],
            "diagnostics": _plain(self.diagnostics),
        }
        if include_labels:
            out["labels"] = [int(x) for x in self.labels]
        return out


def _plain(value: Any) -> Any:
    """Recursively convert numpy scalars/arrays into plain Python types."""
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return [_plain(v) for v in value.tolist()]
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.floating):
        return float(value)
    return value
