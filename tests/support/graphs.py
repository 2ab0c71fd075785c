"""Writing test graphs to files and importing them through the service layer."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import scipy.sparse as sp

from workspace.domain import ImportPolicy


def adjacency_to_csv(A, path: Path, names=None) -> Path:
    """Write the upper triangle of a symmetric adjacency as ``source,target,weight`` lines."""
    U = sp.triu(sp.csr_array(A), k=1).tocoo()
    names = names if names is not None else [f"v{i:06d}" for i in range(A.shape[0])]
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("source,target,weight\n")
        fh.writelines(f"{names[i]},{names[j]},{w:g}\n" for i, j, w in zip(U.row.tolist(), U.col.tolist(),
                                                                             U.data.tolist()))
    return path


def import_adjacency(store, A, tmp_path: Path, project="lab", network="g", names=None):
    from workspace.services.networks import import_network

    f = adjacency_to_csv(A, tmp_path / f"{network}.csv", names)
    return import_network(store, f, project=project, network=network, policy=ImportPolicy(weight="weight"))


def node_names(n: int) -> list[str]:
    return [f"v{i:06d}" for i in range(n)]


def truth_by_node_ids(truth: np.ndarray, names: list[str], node_ids: np.ndarray) -> np.ndarray:
    """Planted labels re-ordered into the store's canonical node order."""
    pos = {name: i for i, name in enumerate(names)}
    return truth[[pos[x] for x in node_ids.tolist()]]


def import_karate(store, tmp_path: Path):
    """Zachary (1977) karate club as shipped by networkx (``karate_club_graph``, with its 'weight'
    edge attribute) imported as ``club/karate``, nodes named ``m00`` .. ``m33``: ``(G, names)``."""
    import networkx as nx

    G = nx.karate_club_graph()
    A = nx.to_scipy_sparse_array(G, nodelist=range(34), weight="weight")
    names = [f"m{i:02d}" for i in range(34)]
    import_adjacency(store, A, tmp_path, project="club", network="karate", names=names)
    return G, names
