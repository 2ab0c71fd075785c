"""The memory-lean paths for large graphs give the same matrices and partitions as the plain ones.

* ``GraphData.adjacency`` builds the symmetric CSR matrix in place from the canonical pair list;
  it must equal, bit for bit, the matrix networkx builds (``networkx.to_scipy_sparse_array``);
* ``quality_measures`` sums internal weights in row chunks; the sums must be bit-identical to one
  ``numpy.bincount`` over the whole matrix, and the measures equal networkx's;
* from ``SCALED_PRODUCT_MIN_NODES`` nodes on, the normalised adjacency is applied as
  ``s * (A @ (s * x))`` instead of stored; forced on small graphs it must give the same
  memberships (ARI = 1) and eigenvalues to rounding, while the default rule leaves every graph
  below the threshold (the test graphs, the demo) on the stored path.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp
from sklearn.metrics import adjusted_rand_score

import workspace.domain as domain
import workspace.spectral.eigen as eigen
import workspace.spectral.quality as quality
from workspace.domain import GraphData
from workspace.spectral import partition, planted_partition
from workspace.spectral.eigen import shifted_laplacian_operator
from workspace.spectral.laplacians import normalized_adjacency


def _random_pairs(rng, n, m, loops=0.1):
    u = rng.integers(0, n, m)
    v = rng.integers(0, n, m)
    v = np.where(rng.random(m) < loops, u, v)
    pairs = np.unique(np.stack([np.minimum(u, v), np.maximum(u, v)], axis=1), axis=0)
    return pairs[:, 0].astype(np.int64), pairs[:, 1].astype(np.int64)


@pytest.mark.parametrize("weights", ["varied", "uniform"])
@pytest.mark.parametrize("chunk", [1, 7, 1 << 20])
def test_adjacency_is_networkx_matrix_bit_for_bit(chunk, weights, monkeypatch):
    # (uniform: every pair of one weight, as an unweighted file stores them, takes the path that
    # fills the values without moving them; 0.3 is no power of two)
    monkeypatch.setattr(domain, "_EDGE_CHUNK", chunk)
    rng = np.random.default_rng(18)
    for n, m in ((1, 0), (5, 3), (60, 200), (400, 3000)):
        u, v = _random_pairs(rng, n, m)
        w = rng.uniform(0.1, 10.0, u.shape[0]) if weights == "varied" else np.full(u.shape[0], 0.3)
        G = nx.Graph()
        G.add_nodes_from(range(n))
        G.add_weighted_edges_from(zip(u.tolist(), v.tolist(), w.tolist()))
        # networkx writes an undirected self-loop of weight w as A_ii = w (networkx.to_scipy_sparse_array)
        ref = nx.to_scipy_sparse_array(G, nodelist=range(n), weight="weight", format="csr")
        ref.sort_indices()
        A = GraphData(np.array([f"v{i}" for i in range(n)]), u, v, w).adjacency()
        assert A.shape == ref.shape and A.has_sorted_indices
        assert A.indices.dtype == np.int32                    # int32 where it fits, as scipy chooses
        assert np.array_equal(A.indptr, ref.indptr) and np.array_equal(A.indices, ref.indices)
        assert np.array_equal(A.data, ref.data)


def test_adjacency_of_pairs_out_of_order_takes_the_general_path():
    # not canonical (unsorted, u > v): built through scipy's COO conversion, still the same matrix
    g = GraphData(np.array(["a", "b", "c"]), np.array([2, 0]), np.array([1, 1]), np.array([2.0, 3.0]))
    assert not domain._canonical_pairs(g.edge_u, g.edge_v, 3)
    ref = np.array([[0, 3, 0], [3, 0, 2], [0, 2, 0]], dtype=float)       # by hand
    assert np.array_equal(g.adjacency().toarray(), ref)


def test_chunked_internal_weights_equal_one_bincount(monkeypatch):
    rng = np.random.default_rng(7)
    A, _ = planted_partition(3000, 5, 20.0, 3.0, seed=3)
    A = sp.csr_array(A, dtype=np.float64)
    A.data = rng.uniform(0.001, 1000.0, A.nnz)
    A = sp.csr_array((A + A.T) / 2)
    labels = rng.integers(0, 9, A.shape[0])
    row_of = np.repeat(labels, np.diff(A.indptr))
    same = row_of == labels[A.indices]
    ref = np.bincount(row_of[same], weights=A.data[same], minlength=9)   # numpy.bincount over all entries
    for rows in (1, 13, 1000, 1 << 18):
        monkeypatch.setattr(quality, "_QUALITY_CHUNK_ROWS", rows)
        got = quality._internal_weights(A, A.data, labels, 9)
        assert np.array_equal(got, ref)
    # and the measure itself against networkx.community.modularity (Newman & Girvan 2004)
    G = nx.from_scipy_sparse_array(A)
    comms = [set(np.flatnonzero(labels == c).tolist()) for c in range(9)]
    q = quality.quality_measures(A, labels)
    assert q["modularity"] == pytest.approx(nx.community.modularity(G, comms, weight="weight"), abs=1e-12)


def test_scaled_products_apply_the_normalised_adjacency(monkeypatch):
    A, _ = planted_partition(4000, 4, 20.0, 2.0, seed=2)
    A = sp.csr_array(A, dtype=np.float64)
    x = np.random.default_rng(1).standard_normal((A.shape[0], 3))
    stored, _, _ = shifted_laplacian_operator(A, "sym")
    monkeypatch.setattr(eigen, "SCALED_PRODUCT_MIN_NODES", 0)
    scaled, shift, _ = shifted_laplacian_operator(A, "sym")
    assert scaled.S is A and scaled.row_scale is not None          # no copy of the values
    # M = I' + D^-1/2 A D^-1/2 with I' = I + 1 on isolated nodes (the shift 2 - L_sym, Chung 1997);
    # the explicit product as the reference
    N = normalized_adjacency(A)
    isolated = np.diff(A.indptr) == 0
    assert isolated.any()                      # the convention for degree-0 nodes is exercised
    ref = (1.0 + isolated)[:, None] * x + N @ x
    assert np.allclose(scaled.apply(x), ref, rtol=1e-12, atol=1e-13)
    assert np.allclose(scaled.apply(x[:, 0]), ref[:, 0], rtol=1e-12, atol=1e-13)
    assert np.allclose(stored.apply(x), ref, rtol=1e-12, atol=1e-13)
    small = sp.csr_array(nx.to_scipy_sparse_array(nx.karate_club_graph(), format="csr"), dtype=np.float64)
    op, _, _ = shifted_laplacian_operator(small, "sym")
    dense = np.eye(34) + normalized_adjacency(small).toarray()
    assert np.allclose(op.to_dense(), dense, rtol=1e-12, atol=1e-13)


@pytest.mark.parametrize("method", ["njw", "shi-malik", "regularized"])
def test_scaled_products_give_the_same_memberships(method, monkeypatch):
    graphs = [planted_partition(6000, 4, 24.0, 2.0, seed=5)[0],
              nx.to_scipy_sparse_array(nx.les_miserables_graph(), format="csr")]   # networkx dataset, weighted
    for A in graphs:
        params = {"dense_threshold": 10} if A.shape[0] < 1000 else {}
        before = partition(A, method, k=4, seed=3, **params)
        monkeypatch.setattr(eigen, "SCALED_PRODUCT_MIN_NODES", 0)
        after = partition(A, method, k=4, seed=3, **params)
        monkeypatch.setattr(eigen, "SCALED_PRODUCT_MIN_NODES", 500_000)
        assert adjusted_rand_score(before.labels, after.labels) == 1.0
        assert np.allclose(before.eigenvalues, after.eigenvalues, rtol=0, atol=1e-9)


def test_default_rule_keeps_test_sized_graphs_on_the_stored_operator():
    A, _ = planted_partition(6000, 4, 24.0, 2.0, seed=5)
    op, _, _ = shifted_laplacian_operator(sp.csr_array(A, dtype=np.float64), "sym")
    assert op.row_scale is None and eigen.SCALED_PRODUCT_MIN_NODES >= 500_000


def _blas_view():
    """``(path, threads)`` of every loaded BLAS library, as threadpoolctl reads them from outside."""
    import os

    from threadpoolctl import threadpool_info

    return [(os.path.realpath(i["filepath"]), i["num_threads"]) for i in threadpool_info()
            if i["user_api"] == "blas"]


def _solve_count(path: str, outside: int) -> int:
    """The count the rule of ``eigen.SOLVE_BLAS_THREADS`` gives a library (its docstring)."""
    import workspace

    two = eigen.SOLVE_BLAS_THREADS
    return two if (outside >= two and domain.available_cpus() >= two
                   and workspace.openblas_waits_briefly(path)) else 1


def _fresh_blas_environment() -> dict:
    """This process's environment without the variables OpenBLAS reads for its thread count or idle
    wait (earlier tests of a session may leave some set, e.g. a Dask nanny's OMP_NUM_THREADS=1)."""
    import os

    return {k: v for k, v in os.environ.items()
            if not k.startswith("OPENBLAS_") and k not in ("OMP_NUM_THREADS", "GOTO_NUM_THREADS")}


def _needs_openblas():
    from threadpoolctl import threadpool_info

    if not any("openblas" in i["internal_api"] for i in threadpool_info()):
        pytest.skip("the setting applies to OpenBLAS only")


def test_blas_rule_is_shared_by_solves_and_assignments_in_several_threads():
    """A solve and an assignment overlapping in threads (a sweep's pool): the solve's count holds
    while any solve is inside, one thread while only assignments are, and the counts from before
    the first once the last has left; threadpoolctl reads them from outside."""
    import threading

    _needs_openblas()
    outside = _blas_view()
    solving = [_solve_count(path, count) for path, count in outside]
    n = eigen.BLAS_FIXED_THREADS_MIN_NODES
    solve_in, assign_in, solve_out = threading.Event(), threading.Event(), threading.Event()
    seen = {}

    def solve():
        with eigen._blas_threads(n):
            solve_in.set()
            assign_in.wait(10)
            seen["solve and assignment"] = [c for _, c in _blas_view()]
        solve_out.set()

    def assign():
        solve_in.wait(10)
        with eigen._blas_threads(n, solve=False):
            assign_in.set()
            solve_out.wait(10)
            seen["assignment alone"] = [c for _, c in _blas_view()]
        seen["both left"] = _blas_view()

    threads = [threading.Thread(target=solve), threading.Thread(target=assign)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(20)
    assert seen["solve and assignment"] == solving
    assert set(seen["assignment alone"]) == {1}
    assert seen["both left"] == outside
    assert _blas_view() == outside


def test_blas_rule_leaves_small_solves_alone(monkeypatch):
    outside = _blas_view()
    with eigen._blas_threads(eigen.BLAS_FIXED_THREADS_MIN_NODES - 1):
        assert _blas_view() == outside                            # small solve: left alone
    with eigen._blas_threads(eigen.BLAS_FIXED_THREADS_MIN_NODES):
        if any("openblas" in path for path, _ in outside):
            assert [c for _, c in _blas_view()] == [_solve_count(p, c) for p, c in outside]
    assert _blas_view() == outside                                # restored
    assert eigen.BLAS_FIXED_THREADS_MIN_NODES >= 100_000          # above every test graph and the demo
    A, truth = planted_partition(6000, 4, 24.0, 2.0, seed=5)
    before = partition(A, "njw", k=4, seed=2)
    assert before.diagnostics["blas_threads"] is None                # the process's setting was used
    monkeypatch.setattr(eigen, "BLAS_FIXED_THREADS_MIN_NODES", 0)  # the fixed count forced
    after = partition(A, "njw", k=4, seed=2)
    if any("openblas" in path for path, _ in outside):            # the run records the count it fixed
        assert after.diagnostics["blas_threads"] == max(_solve_count(p, c) for p, c in outside)
    assert adjusted_rand_score(before.labels, after.labels) == 1.0
    assert np.allclose(before.eigenvalues, after.eigenvalues, rtol=0, atol=1e-9)
    # with the count fixed, a solve is reproducible to the bit (OpenBLAS splits a call the same way
    # for the same thread count)
    again = partition(A, "njw", k=4, seed=2)
    assert np.array_equal(after.eigenvalues, again.eigenvalues) and np.array_equal(after.labels, again.labels)
    assert after.diagnostics["residual_norms"] == again.diagnostics["residual_norms"]
    # the planted groups themselves (Decelle et al. 2011: c_in - c_out well above k sqrt(c))
    assert adjusted_rand_score(truth, after.labels) > 0.9


# A fresh interpreter: which OpenBLAS libraries a large solve gives two threads (threadpoolctl's view
# from inside the solve), for the two import orders a script can have
_SOLVE_VIEW = """
import os, sys
if sys.argv[1] == "numpy first":
    import numpy
import workspace.spectral.eigen as eigen
import numpy as np, scipy.sparse as sp
from threadpoolctl import threadpool_info
seen = []
n = eigen.BLAS_FIXED_THREADS_MIN_NODES
rng = np.random.default_rng(0)
A = sp.random_array((n, n), density=3 / n, rng=rng, format="csr")
A = sp.csr_array(A + A.T)
solve = eigen._iterative
def spy(*args, **kwargs):      # inside the solve's BLAS setting
    seen.extend(sorted((os.path.basename(os.path.dirname(i["filepath"])), i["num_threads"])
                       for i in threadpool_info() if i["user_api"] == "blas"))
    return solve(*args, **kwargs)
eigen._iterative = spy
eigen.largest_eigenpairs(eigen.SymmetricOperator(A), 3, eigen.SolverContext(seed=0, eig_tol=1e-2))
print(os.environ.get("OPENBLAS_THREAD_TIMEOUT"), *(f"{name}:{count}" for name, count in seen))
"""


@pytest.mark.skipif(domain.available_cpus() < 2, reason="the second BLAS thread needs two CPUs")
def test_large_solves_give_blas_two_threads_only_where_its_idle_threads_sleep_at_once():
    import subprocess
    import sys
    from pathlib import Path

    _needs_openblas()
    root = Path(__file__).resolve().parents[2]
    env = _fresh_blas_environment()

    def view(order: str, **extra) -> list[str]:
        return subprocess.run([sys.executable, "-c", _SOLVE_VIEW, order], capture_output=True, text=True,
                              check=True, env={**env, "PYTHONPATH": str(root), **extra}).stdout.split()

    # (the wheels' libraries, named by the folder each wheel keeps its own in)
    first = view("workspace first")
    if len(first) != 3 or not first[1].startswith("numpy.libs:"):
        pytest.skip("numpy and scipy do not use their wheels' own OpenBLAS here")
    # workspace first: both wheels' libraries load with the short wait, both get two threads
    assert first == ["16", "numpy.libs:2", "scipy.libs:2"]
    # numpy loaded before the package: its library keeps OpenBLAS's long wait and gets one thread;
    # scipy's loads later, under the short wait
    assert view("numpy first") == ["16", "numpy.libs:1", "scipy.libs:2"]
    # a long wait the user chose, or one BLAS thread, is respected
    assert view("workspace first", OPENBLAS_THREAD_TIMEOUT="28")[1:] == ["numpy.libs:1", "scipy.libs:1"]
    assert view("workspace first", OPENBLAS_NUM_THREADS="1")[1:] == ["numpy.libs:1", "scipy.libs:1"]


# OpenBLAS's idle wait seen from outside: process CPU time while the main thread sleeps 50 ms just
# after a threaded BLAS call (OpenBLAS README: OPENBLAS_THREAD_TIMEOUT, 2**n cycles of busy-waiting)
_IDLE_CPU = """
import sys, time
if sys.argv[1] == "package":
    import workspace
import numpy as np
a = np.random.default_rng(0).standard_normal((1500, 1500))
idle = []
for _ in range(3):
    a @ a
    c = time.process_time()
    time.sleep(0.05)
    idle.append(time.process_time() - c)
print(min(idle), max(idle))
"""


@pytest.mark.skipif(domain.available_cpus() < 2, reason="OpenBLAS starts one thread on one CPU")
def test_package_sets_a_short_idle_wait_before_openblas_loads():
    import subprocess
    import sys
    from pathlib import Path

    _needs_openblas()
    root = Path(__file__).resolve().parents[2]
    env = _fresh_blas_environment()

    def idle_cpu(how: str) -> list[float]:
        return [float(x) for x in subprocess.run([sys.executable, "-c", _IDLE_CPU, how], capture_output=True,
                                                 text=True, check=True,
                                                 env={**env, "PYTHONPATH": str(root)}).stdout.split()]

    # with the package's setting the second thread sleeps at once: (almost) no CPU while idle
    assert min(idle_cpu("package")) < 0.01
    # OpenBLAS's default (about 0.1 s of spinning) burns CPU through most of the 50 ms
    assert max(idle_cpu("plain")) > 0.02


@pytest.mark.parametrize("together", [False, True])
def test_symmetry_test_with_one_vector_finds_every_asymmetry(together, monkeypatch):
    """The Freivalds-style check (one random vector) against scipy's explicit (A != A.T).nnz,
    with its two products one after the other and at once in two threads."""
    from workspace.spectral import engine
    from workspace.spectral.engine import _is_symmetric

    monkeypatch.setattr(engine, "_SYMMETRY_THREADS_MIN_NNZ", 0 if together else 10 ** 12)
    monkeypatch.setattr(engine, "available_cpus", lambda: 2)
    rng = np.random.default_rng(11)
    for trial in range(40):
        n = int(rng.integers(3, 300))
        A = sp.random_array((n, n), density=0.05, rng=rng, format="csr")
        A = sp.csr_array(A + A.T)
        if trial % 2 and A.nnz:
            k = int(rng.integers(A.nnz))
            A.data[k] *= 1.0 + 10 ** rng.uniform(-8, 0)        # one entry off, by as little as 1e-8
        assert _is_symmetric(A) == ((A != A.T).nnz == 0)


def test_block_products_one_column_at_a_time_are_the_same_bits(monkeypatch):
    """A block ``M @ X`` computed column by column (the large-operator path) equals scipy's own
    block product (``csr_array @ ndarray``) bit for bit: stored, scaled and row-block parallel
    operators, with and without the path switched on."""
    from concurrent.futures import ThreadPoolExecutor

    A, _ = planted_partition(5000, 4, 20.0, 2.0, seed=3)
    A = sp.csr_array(A, dtype=np.float64)
    X = np.random.default_rng(4).standard_normal((A.shape[0], 5))
    monkeypatch.setattr(eigen, "SCALED_PRODUCT_MIN_NODES", 0)
    scaled, _, _ = shifted_laplacian_operator(A, "sym")
    s = scaled.row_scale
    reference = s[:, None] * (A @ (X * s[:, None]))   # scipy's block kernel
    reference *= scaled.scale
    reference += scaled.diagonal[:, None] * X if np.ndim(scaled.diagonal) else scaled.diagonal * X
    before = scaled.apply(X)
    monkeypatch.setattr(eigen, "COLUMNWISE_MIN_ROWS", 0)
    after = scaled.apply(X)
    assert np.array_equal(before, reference) and np.array_equal(after, reference)
    with ThreadPoolExecutor(1) as pool:
        monkeypatch.setattr(eigen, "PARALLEL_MIN_NNZ", 0)
        parallel = scaled.parallel(pool, 2)
        assert np.array_equal(parallel.apply(X), reference)
        assert np.array_equal(parallel.S @ X[:, 0], A @ X[:, 0])          # scipy's product, 1-D
        assert np.array_equal(parallel.S @ X, A @ X)                      # and a block
        # the row blocks are views of the matrix: no second copy of its values or indices
        assert len(parallel.S.blocks) == 2 and all(
            np.shares_memory(b.data, A.data) and np.shares_memory(b.indices, A.indices) for b in parallel.S.blocks)
    plain = eigen.SymmetricOperator(A)
    assert np.array_equal(plain.apply(X), A @ X)
    assert np.array_equal(plain.apply(X[:, :1]), A @ X[:, :1])


def test_assignment_of_a_large_embedding_runs_blas_in_one_thread(monkeypatch):
    """k-means from BLAS_FIXED_THREADS_MIN_NODES rows runs with one OpenBLAS thread (threadpoolctl's
    view from inside the call), the counts are restored after, and the labels are the same bits as with
    the process setting (each output entry of its products is summed by one thread)."""
    from threadpoolctl import threadpool_info

    from workspace.spectral import kway

    def blas_threads():
        return [i["num_threads"] for i in threadpool_info() if i["user_api"] == "blas"]

    if not any("openblas" in i["internal_api"] for i in threadpool_info()):
        pytest.skip("the setting applies to OpenBLAS only")
    U = np.random.default_rng(5).standard_normal((3000, 4))
    seen = []
    real = kway.kmeans
    monkeypatch.setattr(kway, "kmeans", lambda *a, **kw: (seen.append(blas_threads()), real(*a, **kw))[1])
    outside = blas_threads()
    plain, _ = kway.assign_rows(U, 4, eigen.SolverContext(seed=3))
    monkeypatch.setattr(eigen, "BLAS_FIXED_THREADS_MIN_NODES", 1000)
    single, _ = kway.assign_rows(U, 4, eigen.SolverContext(seed=3))
    assert seen[0] == outside and set(seen[1]) == {1}
    assert blas_threads() == outside
    assert np.array_equal(plain, single)


@pytest.mark.parametrize("isolated", [1, 3, 40])
def test_induced_subgraph_without_isolated_nodes_is_scipys(isolated, monkeypatch):
    # reference: scipy's own fancy indexing A[nodes][:, nodes]; both renumbering paths of _induced
    from workspace.spectral import engine

    rng = np.random.default_rng(isolated)
    n = 500
    u, v = _random_pairs(rng, n, 3000, loops=0.05)
    keep = np.ones(n, dtype=bool)
    keep[rng.choice(n, isolated, replace=False)] = False
    pairs = keep[u] & keep[v]
    u, v = u[pairs], v[pairs]
    A = GraphData(np.array([f"v{i}" for i in range(n)]), u, v, rng.uniform(0.5, 2.0, u.shape[0])).adjacency()
    nodes = np.flatnonzero(np.diff(A.indptr) > 0)
    assert n - nodes.shape[0] >= isolated
    ref = sp.csr_array(A[nodes][:, nodes])
    ref.sort_indices()
    for few in (0, 10 ** 6):
        monkeypatch.setattr(engine, "_FEW_DROPPED", few)
        sub = engine._induced(A, nodes)
        assert np.array_equal(sub.indptr, ref.indptr) and np.array_equal(sub.indices, ref.indices)
        assert np.array_equal(sub.data, ref.data)
