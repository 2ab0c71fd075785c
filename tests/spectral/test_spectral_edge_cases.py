"""Disconnected graphs, isolated nodes, repeated eigenvalues, impossible k,
bad input, cancellation, progress and determinism."""

import json

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp
from sklearn.metrics import adjusted_rand_score

from workspace.errors import Cancelled, ComputeError, ParameterError
from workspace.spectral import METHODS, partition, planted_partition, quality_measures


def _adj(G):
    return nx.to_scipy_sparse_array(G, nodelist=sorted(G), format="csr", dtype=float)


def _two_cliques_and_isolated():
    # K_5 on 0..4, K_4 on 5..8, nodes 9 and 10 isolated
    G = nx.disjoint_union(nx.complete_graph(5), nx.complete_graph(4))
    G.add_nodes_from([9, 10])
    return _adj(G)


SPECTRAL_KWAY = ["njw", "shi-malik", "regularized", "bethe"]


@pytest.mark.parametrize("method", ["fiedler"] + SPECTRAL_KWAY + ["recursive", "leading-eigenvector",
                                                                  "louvain", "greedy-modularity",
                                                                  "label-propagation", "girvan-newman"])
def test_disconnected_with_isolated_nodes_each(method):
    A = _two_cliques_and_isolated()
    k = None if not METHODS[method].accepts_k or METHODS[method].default_k == "auto" else 2
    r = partition(A, method, k=k)
    assert r.labels.dtype == np.int64 and np.all(r.labels >= 0)
    # components are never merged; isolated nodes share one extra community
    assert len(set(r.labels[:5]) & set(r.labels[5:9])) == 0
    assert r.labels[9] == r.labels[10] == r.diagnostics["unassigned_community"]
    assert r.diagnostics["isolated_nodes"] == 2 and r.diagnostics["components"] == 4
    assert any("isolated" in w for w in r.warnings)
    assert r.labels.max() + 1 == r.k
    assert np.all(np.isfinite(r.eigenvalues))


def test_each_policy_allocates_parts_by_the_union_spectrum():
    # two planted graphs side by side: 3 groups in the first, 1 in the second;
    # k = 4 must give 3 parts to the first component and 1 to the second
    A1, t1 = planted_partition(300, 3, 40, 1, seed=1)
    A2 = _adj(nx.complete_graph(60))
    A = sp.csr_array(sp.block_diag([A1, A2]))
    r = partition(A, "njw", k=4)
    assert len(np.unique(r.labels[300:])) == 1
    assert adjusted_rand_score(t1, r.labels[:300]) > 0.95
    assert r.k == 4


def test_components_largest_and_error():
    A = _two_cliques_and_isolated()
    r = partition(A, "njw", k=2, components="largest")
    assert len(np.unique(r.labels[:5])) == 2
    assert len(np.unique(r.labels[5:])) == 1          # everything else: one extra community
    assert r.diagnostics["unassigned_nodes"] == 6
    with pytest.raises(ComputeError, match="disconnected"):
        partition(A, "njw", k=2, components="error")


def test_more_components_than_k_is_a_clear_error():
    G = nx.disjoint_union_all([nx.complete_graph(4) for _ in range(3)])
    with pytest.raises(ComputeError, match="3 connected components"):
        partition(_adj(G), "njw", k=2)
    r = partition(_adj(G), "njw", k=3)
    assert r.k == 3 and any("components" in w for w in r.warnings)


def test_cycle_repeated_eigenvalues_warn_and_stay_defined():
    # C_n has lambda_2 = lambda_3 (Brouwer & Haemers 2012, Sec. 1.4.3): the
    # bisection is not unique, which must be reported
    A = _adj(nx.cycle_graph(20))
    for method in ("fiedler", "njw"):
        r = partition(A, method, k=2)
        assert r.eigenvalues[1] == pytest.approx(r.eigenvalues[2], abs=1e-12)
        assert any("not unique" in w for w in r.warnings)
        assert np.bincount(r.labels).min() >= 1
    # a path has simple eigenvalues: no warning
    assert not any("not unique" in w for w in partition(_adj(nx.path_graph(20)), "fiedler").warnings)


def test_cycle_iterative_path_is_defined():
    A = _adj(nx.cycle_graph(1500))
    r = partition(A, "njw", k=4, dense_threshold=0)
    assert r.k == 4 and np.all(np.isfinite(r.eigenvalues))


def test_impossible_requests():
    A = _adj(nx.path_graph(5))
    with pytest.raises(ComputeError, match="smaller than the number of nodes"):
        partition(A, "njw", k=5)
    with pytest.raises(ComputeError, match="smaller than the number of nodes"):
        partition(A, "njw", k=7)
    with pytest.raises(ComputeError, match="at least 3"):
        partition(_adj(nx.path_graph(2)), "njw")
    with pytest.raises(ComputeError, match="no edges"):
        partition(sp.csr_array((6, 6)), "njw")
    with pytest.raises(ComputeError, match="no edges"):
        partition(sp.csr_array(sp.eye(6)), "fiedler")
    with pytest.raises(ParameterError, match="at least 2"):
        partition(A, "njw", k=1)
    with pytest.raises(ParameterError, match="always makes 2"):
        partition(A, "fiedler", k=3)
    with pytest.raises(ParameterError, match="auto"):
        partition(A, "fiedler", k="auto")
    with pytest.raises(ParameterError, match="chooses the number"):
        partition(A, "louvain", k=3)


def test_bad_matrices():
    A = _adj(nx.path_graph(5)).toarray()
    with pytest.raises(ComputeError, match="sparse"):
        partition(A, "njw")
    B = A.copy()
    B[0, 1] = 3.0
    with pytest.raises(ComputeError, match="not symmetric"):
        partition(sp.csr_array(B), "njw")
    B = A.copy()
    B[0, 1] = B[1, 0] = -1.0
    with pytest.raises(ComputeError, match="negative"):
        partition(sp.csr_array(B), "njw")
    B = A.copy()
    B[0, 1] = B[1, 0] = np.nan
    with pytest.raises(ComputeError, match="NaN"):
        partition(sp.csr_array(B), "njw")
    with pytest.raises(ComputeError, match="square"):
        partition(sp.csr_array(np.ones((3, 4))), "njw")


def test_csr_matrix_input_and_self_loops_accepted():
    A = _adj(nx.karate_club_graph())
    r1 = partition(sp.csr_matrix(A), "njw", k=2)
    r2 = partition(A, "njw", k=2)
    assert np.array_equal(r1.labels, r2.labels)
    B = sp.csr_array(A + sp.eye(34))
    assert partition(B, "fiedler").k == 2


def test_unknown_parameters_and_conversions():
    A = _adj(nx.karate_club_graph())
    with pytest.raises(ParameterError, match="unknown parameter 'bogus'.*known"):
        partition(A, "njw", bogus=1)
    with pytest.raises(ParameterError, match="split.*allowed: one of sign, median, sweep"):
        partition(A, "fiedler", split="middle")
    with pytest.raises(ParameterError, match="n_init.*out of range"):
        partition(A, "njw", n_init=0)
    with pytest.raises(ParameterError, match="unknown method"):
        partition(A, "nope")
    r = partition(A, "fiedler", split="median", laplacian="rw", extra_eigenvalues="3")
    assert r.params["extra_eigenvalues"] == 3 and r.params["seed"] == 0
    assert len(r.eigenvalues) == 5


def test_deterministic_labels_for_same_seed():
    A, _ = planted_partition(3000, 4, 25, 2, seed=5)
    for method in ("njw", "bethe", "fiedler", "recursive"):
        kw = {"k": 4} if method in ("njw", "bethe", "recursive") else {}
        r1 = partition(A, method, seed=3, components="largest", **kw)
        r2 = partition(A, method, seed=3, components="largest", **kw)
        assert np.array_equal(r1.labels, r2.labels), method
        # canonical numbering: first appearance in node order
        first = [int(np.argmax(r1.labels == c)) for c in range(r1.k)]
        assert first == sorted(first)


def test_cancel_inside_the_eigensolver_and_progress_reports():
    A, _ = planted_partition(5000, 2, 20, 2, seed=1)
    calls = []

    def progress(stage, matvecs):
        calls.append((stage, matvecs))

    count = {"n": 0}

    def cancel():
        count["n"] += 1
        return count["n"] > 5

    with pytest.raises(Cancelled):
        partition(A, "njw", k=2, cancel=cancel, progress=progress, components="largest")
    assert count["n"] > 5
    calls.clear()
    partition(A, "njw", k=2, progress=progress, components="largest")
    stages = [s for s, _ in calls]
    assert "components" in stages and "njw" in stages and stages[-1] == "done"
    assert calls[-1][1] > 0                        # matvecs were counted


def test_budget_exhaustion_is_a_clear_error():
    A, _ = planted_partition(5000, 8, 10, 3, seed=1)
    with pytest.raises(ComputeError, match="max_matvecs"):
        partition(A, "njw", k=8, max_matvecs=10, components="largest")


def test_result_to_dict_is_json_and_quality_consistent():
    A = _adj(nx.karate_club_graph())
    r = partition(A, "njw", k=3)
    d = r.to_dict()
    json.dumps(d, allow_nan=False)
    assert "labels" not in d
    assert r.to_dict(include_labels=True)["labels"] == r.labels.tolist()
    q = quality_measures(A, r.labels)
    assert r.quality["modularity"] == q["modularity"]
    assert [row["size"] for row in r.communities] == np.bincount(r.labels).tolist()
    assert r.quality["conductance"] == max(r.quality["conductance_per_community"])
    with pytest.raises(Exception):
        r.k = 5                                    # frozen


def test_girvan_newman_refuses_large_graphs():
    A, _ = planted_partition(3000, 2, 10, 2, seed=1)
    with pytest.raises(ComputeError, match="refused above"):
        partition(A, "girvan-newman", components="largest")


def test_quality_of_any_label_vector():
    A = _adj(nx.karate_club_graph())
    labels = np.array([7] * 10 + [3] * 24)                # non-canonical values
    q = quality_measures(A, labels)
    assert q["k"] == 2 and q["sizes"] == [24, 10]
    single = quality_measures(A, np.zeros(34, dtype=int))
    # one community: modularity 0, coverage 1, no cut (Newman & Girvan 2004)
    assert single["modularity"] == pytest.approx(0.0, abs=1e-15)
    assert single["coverage"] == 1.0 and single["cut"] == 0.0
    with pytest.raises(ComputeError):
        quality_measures(A, np.zeros(5, dtype=int))


def test_threaded_products_give_bit_identical_results():
    # the row-block parallel product must not change a single bit (each output
    # row is computed by one thread); 230k stored entries > PARALLEL_MIN_NNZ
    from workspace.spectral.eigen import PARALLEL_MIN_NNZ
    A, _ = planted_partition(20000, 4, 34, 4, seed=2)
    assert A.nnz >= PARALLEL_MIN_NNZ
    r1 = partition(A, "njw", k=4, threads=1, components="largest")
    r2 = partition(A, "njw", k=4, threads=2, components="largest")
    r3 = partition(A, "njw", k=4, threads=3, components="largest")
    assert np.array_equal(r1.labels, r2.labels) and np.array_equal(r1.labels, r3.labels)
    assert r1.eigenvalues.tobytes() == r2.eigenvalues.tobytes() == r3.eigenvalues.tobytes()


def test_automatic_threads_use_every_cpu_only_for_large_operators(monkeypatch):
    """threads=0 (the default): one thread below PARALLEL_AUTO_MIN_ROWS, every available CPU from it,
    the same bits either way (each output row is computed by one thread)."""
    from workspace.spectral import eigen
    from workspace.spectral.methods import METHODS

    assert next(p.default for p in METHODS["njw"].params if p.name == "threads") == 0
    A, _ = planted_partition(20000, 4, 34, 4, seed=2)
    parts = []
    real = eigen.SymmetricOperator.parallel
    monkeypatch.setattr(eigen.SymmetricOperator, "parallel",
                        lambda self, executor, n: (parts.append(n), real(self, executor, n))[1])
    small = partition(A, "njw", k=4, components="largest")
    assert parts == []                                    # below the size: no thread pool
    monkeypatch.setattr(eigen, "PARALLEL_AUTO_MIN_ROWS", 0)
    monkeypatch.setattr(eigen, "available_cpus", lambda: 2)
    large = partition(A, "njw", k=4, components="largest")
    assert parts and set(parts) == {2}
    assert np.array_equal(small.labels, large.labels)
    assert small.eigenvalues.tobytes() == large.eigenvalues.tobytes()
