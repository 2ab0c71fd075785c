"""Karate-club partitions (dataset shipped in networkx) checked against scikit-learn.

Partitions: the two clubs of Zachary (1977), networkx.karate_club_graph node
attribute "club"; networkx.community.greedy_modularity_communities (Clauset,
Newman & Moore 2004); networkx.community.louvain_communities with a fixed seed.
References: sklearn.metrics.adjusted_rand_score, normalized_mutual_info_score,
adjusted_mutual_info_score; scipy.stats.entropy + sklearn.metrics.mutual_info_score
for VI = H(U) + H(V) - 2 I(U;V) (Meilă 2007).
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from scipy.stats import entropy
from sklearn.metrics import (
    adjusted_mutual_info_score, adjusted_rand_score, mutual_info_score,
    normalized_mutual_info_score,
)

from workspace.compare import NORMALIZATIONS, compare_memberships


def _labels_from_sets(n, sets):
    lab = np.full(n, -9, dtype=np.int64)
    for k, s in enumerate(sorted(sets, key=min)):
        lab[list(s)] = k
    assert (lab >= 0).all()
    return lab


@pytest.fixture(scope="module")
def karate():
    G = nx.karate_club_graph()
    n = G.number_of_nodes()
    club = np.array([0 if G.nodes[i]["club"] == "Mr. Hi" else 1 for i in range(n)])
    greedy = _labels_from_sets(n, nx.community.greedy_modularity_communities(G))
    louvain = _labels_from_sets(n, nx.community.louvain_communities(G, seed=42))
    # Canonical node order of a version: ids as str, sorted by code point
    # ("0", "1", "10", "11", ...), labels permuted alongside.
    ids = np.array([str(i) for i in range(n)])
    order = np.argsort(ids)
    return ids[order], order, {"club": club, "greedy": greedy, "louvain": louvain}


@pytest.mark.parametrize("pair", [("club", "greedy"), ("club", "louvain"), ("greedy", "louvain")])
def test_karate_partitions_against_sklearn(karate, pair):
    ids, order, parts = karate
    u, v = parts[pair[0]], parts[pair[1]]
    h_u = entropy(np.unique(u, return_counts=True)[1])
    h_v = entropy(np.unique(v, return_counts=True)[1])
    for m in NORMALIZATIONS:
        d = compare_memberships(ids, u[order], ids, v[order], nmi_normalization=m)
        assert d.ari == pytest.approx(adjusted_rand_score(u, v), abs=1e-12)
        assert d.nmi == pytest.approx(normalized_mutual_info_score(u, v, average_method=m),
                                      abs=1e-12)
        assert d.ami == pytest.approx(adjusted_mutual_info_score(u, v, average_method=m),
                                      abs=1e-12)
        assert d.vi_nats == pytest.approx(h_u + h_v - 2 * mutual_info_score(u, v), abs=1e-12)
    assert d.n_common == 34 and d.coverage == 1.0
    # Moved nodes: recomputed from the matches by brute force over nodes.
    match = {m.a: m.b for m in d.matches}
    moved = sorted(str(i) for i in range(34) if match.get(int(u[i])) != int(v[i]))
    assert sorted(x["node"] for x in d.moved_nodes()) == moved


def test_karate_club_vs_itself_renamed(karate):
    ids, order, parts = karate
    club = parts["club"][order]
    d = compare_memberships(ids, club, ids, 1 - club)
    assert d.ari == 1.0 and d.moved == 0 and [e.kind for e in d.events] == ["kept", "kept"]
