"""Directed graphs: Chung's random-walk Laplacian (Chung 2005) and the directed measures.

References: networkx.directed_laplacian_matrix (and networkx's own test graph for it),
networkx.pagerank (the teleporting walk's stationary distribution),
networkx.community.modularity on a DiGraph (Leicht & Newman 2008), networkx.cut_size,
networkx.stochastic_block_model, scikit-learn's adjusted_rand_score.
"""

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp
from sklearn.metrics import adjusted_rand_score

from workspace.errors import ComputeError
from workspace.spectral import METHODS, partition, quality_measures
from workspace.spectral.directed import (choose_walk, directed_laplacian, stationary_distribution,
                                         walk_parts)


def _arcs(G, nodes=None, weight="weight"):
    nodes = sorted(G) if nodes is None else nodes
    return nx.to_scipy_sparse_array(G, nodelist=nodes, weight=weight, format="csr", dtype=float)


def _nx_test_digraph():
    # the graph of networkx's test_directed_laplacian (networkx/linalg/tests/test_laplacian.py)
    G = nx.DiGraph()
    G.add_edges_from(((1, 2), (1, 3), (3, 1), (3, 2), (3, 5), (4, 5), (4, 6), (5, 4), (5, 6), (6, 4)))
    return G


def _communities(labels):
    return [set(np.flatnonzero(labels == c).tolist()) for c in np.unique(labels)]


@pytest.mark.parametrize("walk,alpha", [("pagerank", 0.9), ("pagerank", 0.95), ("auto", 0.95)])
def test_laplacian_matches_networkx_on_its_test_graph(walk, alpha):
    G = _nx_test_digraph()
    nodes = sorted(G)
    ref = nx.directed_laplacian_matrix(G, nodelist=nodes, walk_type=None if walk == "auto" else walk,
                                       alpha=alpha)
    assert np.allclose(directed_laplacian(_arcs(G), walk=walk, alpha=alpha), ref, atol=1e-12)


def test_laplacian_matches_networkx_random_lazy_and_auto():
    # a directed 6-cycle is strongly connected with period 6: networkx picks the lazy walk;
    # the MGG(2) digraph (networkx's test too) has loops, hence is aperiodic: the random walk
    C = nx.cycle_graph(6, create_using=nx.DiGraph)
    A = _arcs(C)
    assert choose_walk(A) == "lazy"
    for walk in ("lazy", "auto"):
        ref = nx.directed_laplacian_matrix(C, nodelist=sorted(C), walk_type=None if walk == "auto" else walk)
        assert np.allclose(directed_laplacian(A, walk=walk), ref, atol=1e-12)
    # the plain walk on the periodic cycle: phi is uniform, P a cyclic shift, so
    # L = I - (P + P^T)/2 with eigenvalues 1 - cos(2 pi j / 6) (closed form; networkx's eigs
    # may return another unit-modulus eigenvector here, so it is not the reference)
    L = directed_laplacian(A, walk="random")
    assert np.allclose(np.sort(np.linalg.eigvalsh(L)), np.sort(1 - np.cos(2 * np.pi * np.arange(6) / 6)))
    E = nx.DiGraph(nx.margulis_gabber_galil_graph(2))
    nodes = list(E)
    assert choose_walk(_arcs(E, nodes)) == "random"
    assert np.allclose(directed_laplacian(_arcs(E, nodes)),
                       nx.directed_laplacian_matrix(E, nodelist=nodes), atol=1e-12)


@pytest.mark.parametrize("dense_threshold", [10_000, 0])
def test_teleporting_walk_stationary_distribution_is_pagerank(dense_threshold):
    # networkx.pagerank: the same walk (dangling nodes jump uniformly, 1 - alpha teleports)
    G = nx.gnp_random_graph(300, 0.02, seed=2, directed=True)
    G.remove_edges_from(list(G.out_edges([0, 1, 2])))        # three dangling nodes
    nodes = sorted(G)
    A = _arcs(G, nodes)
    assert np.any(np.diff(A.indptr) == 0)                    # has dangling nodes
    P0, a, b, c = walk_parts(A, "pagerank", 0.85)
    phi = stationary_distribution(P0, a, b, c, dense_threshold=dense_threshold)
    pr = nx.pagerank(G, alpha=0.85, tol=1e-13, max_iter=1000)
    assert np.allclose(phi, [pr[v] for v in nodes], atol=1e-10)


def test_symmetric_input_reduces_to_the_normalized_laplacian():
    # for a symmetric A the random walk has phi = d / vol and Chung's Laplacian is
    # L_sym = I - D^-1/2 A D^-1/2 (Chung 2005, Sec. 2): spectrum equals networkx's
    # normalized_laplacian_matrix; the embedding is Shi & Malik's up to a constant factor
    G = nx.karate_club_graph()
    A = _arcs(G)
    ref = np.linalg.eigvalsh(nx.normalized_laplacian_matrix(G, nodelist=sorted(G)).toarray())
    r = partition(A, "directed-walk", k=2, directed=True, extra_eigenvalues=5)
    assert r.diagnostics["walk"] == "random"
    assert np.allclose(r.eigenvalues, ref[:7], atol=1e-10)
    sm = partition(A, "shi-malik", k=2)
    assert adjusted_rand_score(sm.labels, r.labels) == 1.0


def test_recovers_a_directed_planted_partition():
    # networkx.stochastic_block_model(directed=True): 3 blocks, arcs dense inside, sparse across
    sizes = [80, 100, 120]
    p = [[0.15, 0.01, 0.01], [0.01, 0.15, 0.01], [0.01, 0.01, 0.15]]
    G = nx.stochastic_block_model(sizes, p, directed=True, seed=7)
    truth = np.repeat(np.arange(3), sizes)
    A = _arcs(G, list(range(sum(sizes))))
    r = partition(A, "directed-walk", k="auto", directed=True)
    assert r.diagnostics["eigengap_suggestion"] == 3 and r.k == 3
    assert adjusted_rand_score(truth, r.labels) > 0.95
    assert r.quality["modularity"] == pytest.approx(nx.community.modularity(G, _communities(r.labels)))


def test_directed_modularity_and_cut_match_networkx():
    # networkx's test value (test_quality.py::test_modularity): arcs 2->1, 2->3, 3->4 with
    # communities {1,2}, {3,4} have directed modularity 2/9 (Leicht & Newman 2008)
    G = nx.DiGraph([(2, 1), (2, 3), (3, 4)])
    q = quality_measures(_arcs(G), np.array([0, 0, 1, 1]), directed=True)
    assert q["modularity"] == pytest.approx(2 / 9)
    H = nx.gnp_random_graph(50, 0.1, seed=4, directed=True)
    H.add_edge(3, 3, weight=2.0)
    labels = np.arange(50) % 4
    q = quality_measures(_arcs(H), labels, directed=True)
    comms = _communities(labels)
    assert q["modularity"] == pytest.approx(nx.community.modularity(H, comms))
    for row, c in zip(q["communities"], comms):
        assert row["cut"] == pytest.approx(nx.cut_size(H, c, set(H) - c))        # both directions
        assert row["volume"] == pytest.approx(sum(d for _, d in H.degree(c, weight="weight")))


def test_undirected_methods_run_on_the_symmetrised_graph_with_a_warning():
    G = _nx_test_digraph()
    A = _arcs(G)
    S = sp.csr_array(A + A.T)                     # scipy: the explicit symmetrisation
    for method in ("njw", "louvain", "leading-eigenvector"):
        k = 2 if METHODS[method].accepts_k and METHODS[method].default_k != "auto" else None
        r = partition(A, method, k=k, directed=True)
        ref = partition(S, method, k=k)
        assert adjusted_rand_score(ref.labels, r.labels) == 1.0
        assert any("directed" in w and "A + A^T" in w for w in r.warnings)
        # quality is the directed one, whatever the method (networkx on the DiGraph)
        nodes = sorted(G)
        comms = [{nodes[i] for i in c} for c in _communities(r.labels)]
        assert r.quality["modularity"] == pytest.approx(nx.community.modularity(G, comms))


def test_asymmetric_input_without_the_flag_is_refused():
    A = _arcs(_nx_test_digraph())
    with pytest.raises(ComputeError, match="not symmetric.*directed=True"):
        partition(A, "njw", k=2)
    with pytest.raises(ComputeError, match="not symmetric"):
        partition(A, "directed-walk", k=2)


def test_random_walk_needs_out_arcs_and_components_rule_holds():
    # node 6 has no out-arc: the plain random walk is undefined, the teleporting one is not
    G = nx.DiGraph([(0, 1), (1, 2), (2, 0), (2, 3), (3, 4), (4, 5), (5, 3), (5, 6)])
    A = _arcs(G)
    with pytest.raises(ComputeError, match="out-arc.*pagerank"):
        partition(A, "directed-walk", k=2, directed=True, walk="random")
    r = partition(A, "directed-walk", k=2, directed=True)
    assert r.diagnostics["walk"] == "pagerank"
    # weakly connected components (networkx.weakly_connected_components) are never merged
    triangle = nx.DiGraph([(0, 1), (1, 2), (2, 0)])
    two = nx.disjoint_union_all([G, triangle, triangle])
    with pytest.raises(ComputeError, match="3 connected components.*more than k=2"):
        partition(_arcs(two), "directed-walk", k=2, directed=True)
    r = partition(_arcs(two), "directed-walk", k=4, directed=True)
    assert r.k == 4
    comp_of = {v: i for i, c in enumerate(nx.weakly_connected_components(two)) for v in c}
    for community in _communities(r.labels):
        assert len({comp_of[v] for v in community}) == 1


def test_iterative_path_agrees_with_the_dense_one():
    # the same directed SBM (networkx.stochastic_block_model) solved densely (LAPACK eigh, LU for
    # phi) and matrix-free (power iteration for phi, ARPACK on I + Theta): same spectrum, same split
    sizes = [200, 200, 200]
    p = [[0.05, 0.004, 0.004], [0.004, 0.05, 0.004], [0.004, 0.004, 0.05]]
    G = nx.stochastic_block_model(sizes, p, directed=True, seed=11)
    A = _arcs(G, list(range(600)))
    dense = partition(A, "directed-walk", k=3, directed=True, extra_eigenvalues=3, components="largest")
    sparse = partition(A, "directed-walk", k=3, directed=True, extra_eigenvalues=3, dense_threshold=0,
                       eig_tol=1e-10, components="largest")
    assert dense.diagnostics["solver"] == "dense-eigh" and "arpack" in sparse.diagnostics["solver"]
    assert np.allclose(dense.eigenvalues[:3], sparse.eigenvalues[:3], atol=1e-7)
    assert adjusted_rand_score(dense.labels, sparse.labels) == 1.0
    truth = np.repeat(np.arange(3), sizes)
    assert adjusted_rand_score(truth, dense.labels) > 0.95


def test_plain_walk_on_a_graph_that_is_not_strongly_connected_is_refused():
    # 0->1->2->0 drains into the closed class {3, 4}: the plain walk's stationary distribution is
    # 0 on {0, 1, 2} (Chung 2005 assumes a strongly connected graph); auto picks pagerank
    G = nx.DiGraph([(0, 1), (1, 2), (2, 0), (2, 3), (3, 4), (4, 3)])
    A = _arcs(G)
    assert choose_walk(A) == "pagerank"
    with pytest.raises(ComputeError, match="not strongly connected.*pagerank"):
        partition(A, "directed-walk", k=2, directed=True, walk="random")
    r = partition(A, "directed-walk", k=2, directed=True)
    assert sorted(map(sorted, _communities(r.labels))) == [[0, 1, 2], [3, 4]]
