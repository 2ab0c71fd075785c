"""The computation order (workspace.spectral.ordering) changes the speed of the products, never
the result: the permuted operator is the permutation of the one networkx builds, and memberships
are the same with and without it (on networkx's datasets, planted partitions and the demo store)."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components
from sklearn.metrics import adjusted_rand_score

import workspace.spectral.ordering as ordering
from workspace.spectral import partition, planted_partition
from workspace.spectral.eigen import SolverContext, largest_eigenpairs, shifted_laplacian_operator
from workspace.spectral.ordering import computation_order, inverse_order, permuted_scaled


def _graph(name):
    if name == "karate":
        return nx.to_scipy_sparse_array(nx.karate_club_graph(), format="csr")      # networkx dataset
    if name == "les-miserables":
        return nx.to_scipy_sparse_array(nx.les_miserables_graph(), format="csr")    # weighted
    A, _ = planted_partition(6000, 4, 24.0, 2.0, seed=5)
    return A


@pytest.fixture
def always_ordered(monkeypatch):
    monkeypatch.setattr(ordering, "ORDER_MIN_NODES", 0)
    monkeypatch.setattr(ordering, "ORDER_MIN_GAIN", 0.0)


@pytest.fixture
def never_ordered(monkeypatch):
    monkeypatch.setattr(ordering, "ORDER_MIN_NODES", 10 ** 12)


def test_breadth_first_order_is_a_permutation_with_locality():
    A = _graph("planted")
    order = computation_order(A, min_nodes=0, min_gain=0)
    n = A.shape[0]
    assert np.array_equal(np.sort(order), np.arange(n))
    # the first node is the search's root and every later node has a neighbour placed before it
    # (the defining property of a breadth-first order of a connected graph; common practice)
    inv = inverse_order(order)
    rows = np.repeat(np.arange(n), np.diff(A.indptr))
    earliest = np.full(n, n)
    np.minimum.at(earliest, inv[rows], inv[A.indices])
    placed = np.arange(n)
    linked = earliest < n                  # nodes without an edge (a few at this degree) come last
    assert np.all(earliest[1:][linked[1:]] < placed[1:][linked[1:]])
    assert not linked[int(linked.sum()):].any()
    # locality: on a grid in shuffled order the bandwidth max |i - j| over the edges drops to the
    # order of the grid's side (Cuthill & McKee 1969: level structures of a 60 x 60 grid have at
    # most 60 nodes, so an edge spans at most two levels)
    G = nx.convert_node_labels_to_integers(nx.grid_2d_graph(60, 60))
    shuffle = np.random.default_rng(1).permutation(3600)
    grid = nx.to_scipy_sparse_array(G, nodelist=shuffle.tolist(), format="csr")
    g_rows = np.repeat(np.arange(3600), np.diff(grid.indptr))
    g_order = computation_order(grid, min_nodes=0)          # default gain rule: the grid gains
    g_inv = inverse_order(g_order)
    assert np.max(np.abs(g_inv[g_rows] - g_inv[grid.indices])) <= 2 * 60
    assert np.max(np.abs(g_rows - grid.indices)) > 3000
    # a random graph (an expander) has no short-span order: the gain rule declines it
    assert ordering.span_reduction(A, order) < ordering.ORDER_MIN_GAIN
    assert computation_order(A, min_nodes=0) is None
    # reverse Cuthill-McKee is scipy's own (scipy.sparse.csgraph.reverse_cuthill_mckee)
    rcm = computation_order(A, kind="rcm", min_nodes=0, min_gain=0)
    assert np.array_equal(np.sort(rcm), np.arange(n))
    assert computation_order(A) is None  # small graph: no reordering by default


def test_disconnected_pattern_keeps_every_node():
    # two triangles and an isolated node: the nodes the search does not reach are appended
    G = nx.Graph([(0, 1), (1, 2), (2, 0), (4, 5), (5, 6), (6, 4)])
    G.add_node(3)
    A = nx.to_scipy_sparse_array(G, nodelist=range(7), format="csr")
    order = computation_order(A, min_nodes=0, min_gain=0)
    assert sorted(order.tolist()) == list(range(7))
    assert set(order[:3].tolist()) == {0, 1, 2}


@pytest.mark.parametrize("name", ["karate", "les-miserables"])
def test_permuted_operator_is_the_permuted_normalised_adjacency(name):
    A = _graph(name)
    n = A.shape[0]
    # reference: networkx.normalized_laplacian_matrix gives I - D^-1/2 A D^-1/2
    L = nx.normalized_laplacian_matrix(nx.from_scipy_sparse_array(A), nodelist=range(n)).toarray()
    N_ref = np.eye(n) - L
    order = np.random.default_rng(0).permutation(n)
    d = np.asarray(A.sum(axis=1)).ravel()
    Np = permuted_scaled(sp.csr_array(A, dtype=np.float64), order, 1.0 / np.sqrt(d)).toarray()
    np.testing.assert_allclose(Np, N_ref[np.ix_(order, order)], atol=1e-14)


@pytest.mark.parametrize("name", ["karate", "les-miserables", "planted"])
def test_eigenpairs_come_back_in_the_original_order(name):
    A = sp.csr_array(_graph(name), dtype=np.float64)
    _, comp = connected_components(A)
    keep = np.flatnonzero(comp == np.argmax(np.bincount(comp)))   # one component: distinct eigenvalues
    A = sp.csr_array(A[keep][:, keep])
    n = A.shape[0]
    order = computation_order(A, min_nodes=0, min_gain=0)
    plain, _, _ = shifted_laplacian_operator(A, "sym")
    permuted, _, _ = shifted_laplacian_operator(A, "sym", order=order)
    for dense_threshold in ((10 ** 9, 10) if n < 1000 else (10,)):   # the dense path and ARPACK
        ctx0 = SolverContext(seed=3, dense_threshold=dense_threshold, eig_tol=1e-10)
        ctx1 = SolverContext(seed=3, dense_threshold=dense_threshold, eig_tol=1e-10)
        a = largest_eigenpairs(plain, 4, ctx0)
        b = largest_eigenpairs(permuted, 4, ctx1)
        np.testing.assert_allclose(b.values, a.values, atol=1e-9)
        # eigenvectors (distinct eigenvalues here) agree in the original order, signs fixed alike
        np.testing.assert_allclose(b.vectors, a.vectors, atol=1e-6)
    if name != "planted":
        # eigenvalues of I + N against scipy.linalg.eigh of networkx's normalised Laplacian
        L = nx.normalized_laplacian_matrix(nx.from_scipy_sparse_array(A), nodelist=range(n)).toarray()
        ref = np.sort(2.0 - np.linalg.eigvalsh(L))[::-1][:4]
        np.testing.assert_allclose(b.values[:4], ref, atol=1e-8)


@pytest.mark.parametrize("method", ["njw", "shi-malik", "regularized", "bethe"])
def test_memberships_identical_with_and_without_the_order(method, monkeypatch):
    for name, k in (("karate", 2), ("les-miserables", 6), ("planted", 4)):
        A = _graph(name)
        monkeypatch.setattr(ordering, "ORDER_MIN_NODES", 10 ** 12)
        before = partition(A, method, k=k, seed=7, dense_threshold=10)
        monkeypatch.setattr(ordering, "ORDER_MIN_NODES", 0)
        monkeypatch.setattr(ordering, "ORDER_MIN_GAIN", 0.0)
        after = partition(A, method, k=k, seed=7, dense_threshold=10)
        assert np.array_equal(before.labels, after.labels), (name, method)
        assert adjusted_rand_score(before.labels, after.labels) == 1.0  # sklearn's ARI
        np.testing.assert_allclose(after.eigenvalues, before.eigenvalues, atol=1e-8)
        assert after.diagnostics["matvecs"] == before.diagnostics["matvecs"]


def test_planted_partition_recovered_in_computation_order(always_ordered):
    # far above the detectability threshold of Decelle et al. (2011) the planted groups are
    # recovered; ARI by sklearn.metrics.adjusted_rand_score
    A, truth = planted_partition(20000, 5, 30.0, 1.0, seed=11)
    res = partition(A, "njw", k=5, seed=0)
    linked = np.diff(A.indptr) > 0          # isolated nodes go to an extra community of their own
    assert adjusted_rand_score(truth[linked], res.labels[linked]) > 0.95   # 0.978 measured


@pytest.mark.slow
def test_demo_store_unchanged_by_the_order(tmp_path, monkeypatch):
    """Every stored membership hash of the demo workspace is the same with the order forced on."""
    from workspace.services import runs
    from workspace.services.demo import build_demo_store
    from workspace.services.store import open_workspace

    hashes = []
    for threshold, name in ((10 ** 12, "plain"), (0, "ordered")):
        monkeypatch.setattr(ordering, "ORDER_MIN_NODES", threshold)
        monkeypatch.setattr(ordering, "ORDER_MIN_GAIN", 0.0)
        path = tmp_path / f"{name}.sqlite"
        build_demo_store(str(path))
        store = open_workspace(path)
        try:
            hashes.append([(r["method"], r["membership_hash"]) for r in runs.list_runs(store)])
        finally:
            store.dispose()
    assert hashes[0] == hashes[1] and len(hashes[0]) > 3


def test_component_search_is_the_computation_order():
    """The engine reuses its component search as the order: it must be the breadth-first order of
    scipy.sparse.csgraph.breadth_first_order from the first node with an edge, the one
    computation_order computes itself."""
    from scipy.sparse.csgraph import breadth_first_order

    from workspace.spectral.engine import _components

    A = _graph("les-miserables")                 # connected, no isolated node
    A = sp.csr_array(A)
    found: list = []
    ncomp, _ = _components(A, found)
    assert ncomp == 1 and len(found) == 1
    ref = breadth_first_order(A, 0, directed=False, return_predecessors=False)   # scipy, undirected
    assert np.array_equal(found[0], ref)
    assert np.array_equal(computation_order(A, min_nodes=0, min_gain=0.0, search=found[0]),
                          computation_order(A, min_nodes=0, min_gain=0.0))



def test_component_search_renumbered_when_isolated_nodes_are_left_out(always_ordered, monkeypatch):
    """With isolated nodes (and self-loops) the component is an induced submatrix; the components'
    search renumbered to it is the order computation_order finds on that submatrix itself, and a
    run takes it instead of searching again, with the same labels, eigenvalues and products."""
    from workspace.spectral import engine
    from workspace.spectral.engine import _components, _induced, _search_of
    from workspace.spectral.laplacians import with_loops_doubled

    A = sp.csr_array(_graph("les-miserables"))
    A = A + sp.diags(np.r_[1.0, np.zeros(A.shape[0] - 1)])           # a self-loop on node 0
    # isolated nodes before and after the component (scipy.sparse.block_diag)
    full = sp.csr_array(sp.block_diag([sp.csr_array((2, 2)), A, sp.csr_array((1, 1))], format="csr"))
    found: list = []
    ncomp, comp = _components(full, found)
    assert ncomp == 4 and len(found) == 1                              # one component and 3 isolated
    nodes = np.flatnonzero(np.diff(full.indptr) > 0)
    sub = _induced(with_loops_doubled(full), nodes)
    assert np.array_equal(_search_of(found, nodes, full.shape[0], False), computation_order(sub))
    assert _search_of(found, nodes, full.shape[0], True) is None       # arcs of a directed graph
    searched = []
    real = ordering._search_order
    monkeypatch.setattr(ordering, "_search_order", lambda *a: (searched.append(1), real(*a))[1])
    reused = partition(full, "njw", k=6, seed=3, dense_threshold=10)
    assert searched == []                                              # no second search
    monkeypatch.setattr(engine, "_search_of", lambda *a: None)
    again = partition(full, "njw", k=6, seed=3, dense_threshold=10)
    assert searched == [1]
    assert np.array_equal(reused.labels, again.labels)
    assert np.array_equal(reused.eigenvalues, again.eigenvalues)
    assert reused.diagnostics["matvecs"] == again.diagnostics["matvecs"]
