"""Non-spectral baselines through networkx, for comparison runs."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from workspace.errors import ComputeError

from .methods import GIRVAN_NEWMAN_MAX_EDGES, GIRVAN_NEWMAN_MAX_NODES

__all__ = ["run_baseline"]


def _labels_from_sets(n: int, communities) -> np.ndarray:
    labels = np.full(n, -1, dtype=np.int64)
    for c, members in enumerate(sorted((sorted(s) for s in communities), key=lambda s: s[0])):
        labels[np.asarray(members, dtype=np.int64)] = c
    if (labels < 0).any():  # pragma: no cover - networkx covers every node
        raise ComputeError("baseline left nodes without a community")
    return labels


def run_baseline(A, method: str, k: int | None, seed: int, params: dict) -> np.ndarray:
    r"""Run a networkx community method on ``A``; return labels (int64, (n,)).

    - ``girvan-newman``: remove the edge of highest (unweighted) betweenness
      until ``k`` components exist (Girvan & Newman 2002); refused above
      ``GIRVAN_NEWMAN_MAX_NODES`` nodes or ``GIRVAN_NEWMAN_MAX_EDGES`` edges
      because every removal recomputes all betweenness, O(m² n) overall.
    - ``greedy-modularity``: Clauset–Newman–Moore (2004) agglomeration;
      with an integer ``k`` merging is forced to exactly ``k`` groups
      (``cutoff = best_n = k``).
    - ``louvain``: Blondel et al. (2008), seeded.
    - ``label-propagation``: asynchronous label propagation (Raghavan et al.
      2007), seeded.

    Components: the caller (:func:`workspace.spectral.partition`) applies
    the same rule as for the spectral methods under ``components="each"``:
    an integer ``k`` below the number ``c`` of components of two or more
    nodes raises ``ComputeError``, ``k = c`` returns the components without
    calling networkx, and for ``k > c`` the method places the ``k - c``
    extra parts itself (Girvan–Newman by edge removal, greedy modularity by
    its merge order, which stops before any merge across components). No
    community ever spans two components; the caller checks it.

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)
    method : str
    k : int or None
    seed : int
    params : dict
        Validated parameters (``resolution``, ``threshold``).

    Raises
    ------
    workspace.errors.ComputeError
        Girvan–Newman on a graph that is too large; a ``k`` the method
        cannot reach.

    References
    ----------
    Hagberg, Schult & Swart (2008), Exploring network structure, dynamics,
    and function using NetworkX, SciPy conference.
    """
    import networkx as nx

    A = sp.csr_array(A)
    n = A.shape[0]
    m_edges = int((sp.triu(A, k=1) != 0).sum())
    if method == "girvan-newman" and (n > GIRVAN_NEWMAN_MAX_NODES or m_edges > GIRVAN_NEWMAN_MAX_EDGES):
        raise ComputeError(f"girvan-newman is refused above {GIRVAN_NEWMAN_MAX_NODES} nodes or "
                           f"{GIRVAN_NEWMAN_MAX_EDGES} edges (this graph: {n} nodes, {m_edges} "
                           "edges): it recomputes all edge betweenness after every removal, "
                           "O(m^2 n); use louvain or a spectral method")
    G = nx.from_scipy_sparse_array(A, edge_attribute="weight")
    if method == "girvan-newman":
        target = 2 if k is None else k
        comps = list(nx.connected_components(G))
        if len(comps) > target:
            raise ComputeError(f"girvan-newman: the graph already has {len(comps)} components, "
                               f"more than k={target}")
        if len(comps) < target:
            for comps in nx.community.girvan_newman(G):
                if len(comps) >= target:
                    break
        if len(comps) != target:
            raise ComputeError(f"girvan-newman could not reach k={target} communities")
        return _labels_from_sets(n, comps)
    if method == "greedy-modularity":
        if k is None:
            comms = nx.community.greedy_modularity_communities(
                G, weight="weight", resolution=params["resolution"])
        else:
            comms = nx.community.greedy_modularity_communities(
                G, weight="weight", resolution=params["resolution"], cutoff=k, best_n=k)
            if len(comms) != k:
                raise ComputeError(f"greedy-modularity reached {len(comms)} communities, not k={k} "
                                   "(communities in different components are never merged)")
        return _labels_from_sets(n, comms)
    if method == "louvain":
        comms = nx.community.louvain_communities(G, weight="weight", resolution=params["resolution"],
                                                 threshold=params["threshold"], seed=seed)
        return _labels_from_sets(n, comms)
    if method == "label-propagation":
        comms = nx.community.asyn_lpa_communities(G, weight="weight", seed=seed)
        return _labels_from_sets(n, comms)
    raise ComputeError(f"unknown baseline {method!r}")  # pragma: no cover
