"""Warm-started eigensolves: same answers as the cold solve, the same convergence test, fallback to cold.

Outside references: networkx (stochastic_block_model, double_edge_swap, normalized_laplacian_matrix),
scikit-learn (adjusted_rand_score), scipy.linalg.eigh for the eigenvalues of small graphs.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
import scipy.linalg as sla
from sklearn.metrics import adjusted_rand_score

from workspace.errors import ParameterError
from workspace.spectral import eigen, partition
from workspace.spectral.sweep import compute_embedding

SIZES = [400, 400, 400, 400]
P = [[0.05 if i == j else 0.004 for j in range(4)] for i in range(4)]


def _versions(seed: int = 3):
    """A planted partition (networkx SBM) and a next version with ~1% of its edges rewired
    (networkx double_edge_swap, degree preserving)."""
    G = nx.stochastic_block_model(SIZES, P, seed=seed)
    H = G.copy()
    nx.double_edge_swap(H, nswap=max(1, G.number_of_edges() // 200), max_tries=10**5, seed=seed)
    nodes = sorted(G)
    A1 = nx.to_scipy_sparse_array(G, nodelist=nodes, format="csr", dtype=float)
    A2 = nx.to_scipy_sparse_array(H, nodelist=nodes, format="csr", dtype=float)
    return G, H, A1, A2


@pytest.fixture(scope="module")
def versions():
    G, H, A1, A2 = _versions()
    assert nx.is_connected(G) and nx.is_connected(H)
    previous = compute_embedding(A1, "njw", 4, seed=0, dense_threshold=100)
    return G, H, A1, A2, previous


def _residuals(H, V, lam):
    """‖L x − λ x‖ with L the normalised Laplacian as networkx builds it."""
    L = nx.normalized_laplacian_matrix(H, nodelist=sorted(H))
    return np.linalg.norm(L @ V - V * lam, axis=0)


def test_warm_and_cold_runs_agree_on_a_planted_partition(versions):
    G, H, A1, A2, previous = versions
    cold = partition(A2, "njw", k=4, seed=0, dense_threshold=100)
    warm = partition(A2, "njw", k=4, seed=0, dense_threshold=100, warm_start=previous.vectors)
    assert warm.diagnostics["warm_start"]["used"] is True
    assert warm.diagnostics["warm_start"]["fallback"] is None
    assert warm.diagnostics["solver"] == "arpack-eigsh-warm"
    # the same communities: adjusted Rand index (scikit-learn adjusted_rand_score) >= 0.999
    assert adjusted_rand_score(cold.labels, warm.labels) >= 0.999
    truth = np.repeat(np.arange(4), 400)
    assert adjusted_rand_score(truth, warm.labels) >= 0.99   # the planted blocks (networkx SBM)
    # the wanted eigenvalues agree within the solvers' tolerance (eig_tol 1e-6 relative to mu <= 2)
    assert np.allclose(warm.eigenvalues[:4], cold.eigenvalues[:4], atol=4e-6)


def test_warm_eigenpairs_pass_the_cold_residual_test(versions):
    G, H, A1, A2, previous = versions
    tol = 1e-6
    cold = compute_embedding(A2, "njw", 4, seed=0, dense_threshold=100, eig_tol=tol)
    warm = compute_embedding(A2, "njw", 4, seed=0, dense_threshold=100, eig_tol=tol, warm_start=previous.vectors)
    assert warm.info["warm_start"]["used"] is True and warm.solver == "arpack-eigsh-warm"
    for emb in (cold, warm):
        mu = emb.values[:4]
        lam = emb.info["shift"] - mu          # eigenvalues of L_sym = 2I - M
        res = _residuals(H, emb.vectors, lam)
        # ARPACK's test, ‖M x − μ x‖ <= tol·|μ| (Lehoucq, Sorensen & Yang 1998), recomputed here on
        # networkx's normalised Laplacian (‖L x − λ x‖ = ‖M x − μ x‖); 1e-12 for rounding
        assert np.all(res <= tol * np.abs(mu) + 1e-12)
    # the warm solve counts its own products (what bench_warmstart.py compares with the cold solve's)
    assert warm.info["warm_start"]["matvecs"] > 0


def test_warm_eigenvalues_match_dense_eigh_on_a_small_graph():
    # a 300-node planted partition (networkx SBM); dense eigenvalues from scipy.linalg.eigh
    G = nx.stochastic_block_model([100, 100, 100], [[0.12, 0.01, 0.01], [0.01, 0.12, 0.01],
                                                     [0.01, 0.01, 0.12]], seed=7)
    H = G.copy()
    nx.double_edge_swap(H, nswap=20, max_tries=10**4, seed=7)
    A1 = nx.to_scipy_sparse_array(G, nodelist=range(300), format="csr", dtype=float)
    A2 = nx.to_scipy_sparse_array(H, nodelist=range(300), format="csr", dtype=float)
    start = compute_embedding(A1, "njw", 3, seed=1, dense_threshold=50).vectors
    warm = compute_embedding(A2, "njw", 3, seed=1, dense_threshold=50, eig_tol=1e-10, warm_start=start)
    assert warm.info["warm_start"]["used"] is True
    L = nx.normalized_laplacian_matrix(H, nodelist=range(300)).toarray()
    exact = sla.eigh(L, eigvals_only=True)
    lam = warm.info["shift"] - warm.values
    assert np.allclose(lam[:3], exact[:3], atol=1e-8)     # the wanted pairs, solved to eig_tol 1e-10
    assert lam[3] >= exact[3] - 1e-8     # the extra value is a Ritz estimate: never below the exact one


def test_new_nodes_and_a_partial_block_still_converge(versions):
    G, H, A1, A2, previous = versions
    block = previous.vectors[:, :2].copy()      # fewer columns than wanted: the rest is seeded noise
    block[:50] = 0.0                            # rows of "new" nodes without a start
    warm = partition(A2, "njw", k=4, seed=0, dense_threshold=100, warm_start=block)
    cold = partition(A2, "njw", k=4, seed=0, dense_threshold=100)
    assert warm.diagnostics["warm_start"]["used"] is True
    assert adjusted_rand_score(cold.labels, warm.labels) >= 0.999


def test_non_convergence_falls_back_to_the_cold_solve_and_says_so(versions, monkeypatch):
    G, H, A1, A2, previous = versions
    real = eigen.eigsh
    calls = []

    def failing_warm_start(*args, **kw):
        calls.append(kw.get("v0"))
        if len(calls) == 1:      # the warm attempt: ARPACK gives up (as when its iterations run out)
            raise eigen.ArpackNoConvergence("no convergence", np.empty(0), np.empty((0, 0)))
        return real(*args, **kw)

    cold = partition(A2, "njw", k=4, seed=0, dense_threshold=100)
    monkeypatch.setattr(eigen, "eigsh", failing_warm_start)
    warm = partition(A2, "njw", k=4, seed=0, dense_threshold=100, warm_start=previous.vectors)
    info = warm.diagnostics["warm_start"]
    assert info["used"] is False and "did not converge" in info["fallback"]
    assert any("warm start not used" in w for w in warm.warnings)
    assert warm.diagnostics["solver"] == "arpack-eigsh"
    # the fallback is the cold solve itself: the same labels and eigenvalues, bit for bit
    assert np.array_equal(warm.labels, cold.labels)
    assert np.array_equal(warm.eigenvalues, cold.eigenvalues)


def test_a_warm_solve_that_misses_the_top_eigenvalue_is_caught(versions, monkeypatch):
    # a Lanczos run blind to one wanted direction converges to true eigenpairs of the wrong invariant
    # subspace; here the warm attempt returns eigenpairs 2..5 of M = 2I - L (scipy.linalg.eigh of
    # networkx's normalised Laplacian): the residual test passes, the deflated check must not
    G, H, A1, A2, previous = versions
    L = nx.normalized_laplacian_matrix(H, nodelist=sorted(H)).toarray()
    lam, U = sla.eigh(L, subset_by_index=[0, 4])
    real = eigen.eigsh
    calls = []

    def wrong_subspace(*args, **kw):
        calls.append(1)
        if len(calls) == 1:
            return 2.0 - lam[1:5], U[:, 1:5]
        return real(*args, **kw)

    cold = partition(A2, "njw", k=4, seed=0, dense_threshold=100)
    monkeypatch.setattr(eigen, "eigsh", wrong_subspace)
    warm = partition(A2, "njw", k=4, seed=0, dense_threshold=100, warm_start=previous.vectors)
    info = warm.diagnostics["warm_start"]
    assert info["used"] is False and "missed an eigenvalue" in info["fallback"]
    assert np.array_equal(warm.labels, cold.labels)
    assert np.array_equal(warm.eigenvalues, cold.eigenvalues)


def test_warm_start_is_deterministic_and_checked(versions):
    G, H, A1, A2, previous = versions
    a = partition(A2, "njw", k=4, seed=0, dense_threshold=100, warm_start=previous.vectors)
    b = partition(A2, "njw", k=4, seed=0, dense_threshold=100, warm_start=previous.vectors.copy())
    assert np.array_equal(a.labels, b.labels) and np.array_equal(a.eigenvalues, b.eigenvalues)
    with pytest.raises(ParameterError, match="warm start"):
        partition(A2, "fiedler", warm_start=previous.vectors)
    with pytest.raises(ParameterError, match="rows"):
        partition(A2, "njw", k=4, warm_start=previous.vectors[:10])
    bad = previous.vectors.copy()
    bad[0, 0] = np.nan
    with pytest.raises(ParameterError, match="finite"):
        partition(A2, "njw", k=4, warm_start=bad)


def test_small_graphs_solve_densely_and_say_the_start_was_not_needed():
    # Zachary's karate club as shipped by networkx: dense path, the start block is not used
    G = nx.karate_club_graph()
    A = nx.to_scipy_sparse_array(G, nodelist=range(34), format="csr", dtype=float)
    start = np.random.default_rng(0).standard_normal((34, 2))
    warm = partition(A, "njw", k=2, seed=0, warm_start=start)
    cold = partition(A, "njw", k=2, seed=0)
    assert warm.diagnostics["warm_start"]["used"] is False
    assert "dense" in warm.diagnostics["warm_start"]["fallback"]
    assert np.array_equal(warm.labels, cold.labels)


@pytest.mark.parametrize("method,k", [("shi-malik", 4), ("regularized", 4), ("bethe", 4), ("njw", "auto")])
def test_every_k_way_method_takes_a_warm_start(versions, method, k):
    # warm and cold agree on the networkx SBM (scikit-learn adjusted_rand_score >= 0.999); the start is
    # the previous version's embedding of the method's own operator
    G, H, A1, A2, previous = versions
    start = compute_embedding(A1, method, 10 if k == "auto" else 4, seed=0, dense_threshold=100).vectors
    cold = partition(A2, method, k=k, seed=0, dense_threshold=100)
    warm = partition(A2, method, k=k, seed=0, dense_threshold=100, warm_start=start)
    assert warm.diagnostics["warm_start"]["used"] is True
    assert warm.k == cold.k
    assert adjusted_rand_score(cold.labels, warm.labels) >= 0.999



def test_warm_start_under_the_computation_order(versions, monkeypatch):
    # forcing the breadth-first computation order on (workspace/spectral/ordering.py) changes nothing
    # for a warm-started run: the same products as the unordered warm solve, the same labels, and
    # agreement with the cold solve (scikit-learn adjusted_rand_score). (A start block that reaches an
    # ordered operator is moved into its order with the random draws: eigen._iterative.)
    from workspace.spectral import ordering

    G, H, A1, A2, previous = versions
    plain = partition(A2, "njw", k=4, seed=0, dense_threshold=100, warm_start=previous.vectors)
    monkeypatch.setattr(ordering, "ORDER_MIN_NODES", 0)
    monkeypatch.setattr(ordering, "ORDER_MIN_GAIN", 0.0)
    cold = partition(A2, "njw", k=4, seed=0, dense_threshold=100)
    warm = partition(A2, "njw", k=4, seed=0, dense_threshold=100, warm_start=previous.vectors)
    assert warm.diagnostics["warm_start"]["used"] is True, warm.diagnostics["warm_start"]
    assert warm.diagnostics["warm_start"]["matvecs"] == plain.diagnostics["warm_start"]["matvecs"]
    assert adjusted_rand_score(cold.labels, warm.labels) >= 0.999
    assert adjusted_rand_score(plain.labels, warm.labels) == 1.0


def test_start_distance_is_the_sine_of_the_largest_principal_angle():
    # reference: scipy.linalg.subspace_angles (Björck & Golub 1973); delta = sin(theta_max)
    rng = np.random.default_rng(4)
    V, _ = np.linalg.qr(rng.standard_normal((600, 5)))
    for size in (1e-1, 1e-3, 1e-7):
        W = (V + size * rng.standard_normal((600, 5))) * rng.uniform(0.5, 3.0, 5)   # any column scaling
        expected = np.sin(np.max(sla.subspace_angles(W, V)))
        assert eigen.start_distance(W, V) == pytest.approx(expected, rel=1e-6)
    # a rotated basis of the same space is at distance 0, a block with an orthogonal column at 1
    # (definition of principal angles; common practice)
    rotation, _ = np.linalg.qr(rng.standard_normal((5, 5)))
    assert eigen.start_distance(V @ rotation, V) < 1e-12
    outside = rng.standard_normal(600)
    outside -= V @ (V.T @ outside)
    assert eigen.start_distance(np.column_stack([V[:, :4], outside]), V) == pytest.approx(1.0, abs=1e-12)


def test_start_distance_of_the_previous_eigenvectors_obeys_davis_kahan(versions):
    # the previous version's eigenvectors as a start for the next version: their distance to the new
    # invariant subspace is at most ||R||_2 / gap with R = L2 V1 - V1 diag(lambda1) (sin-theta theorem,
    # Davis & Kahan 1970); eigenpairs of networkx's normalised Laplacians from scipy.linalg.eigh
    G, H, A1, A2, previous = versions
    L1 = nx.normalized_laplacian_matrix(G, nodelist=sorted(G)).toarray()
    L2 = nx.normalized_laplacian_matrix(H, nodelist=sorted(H)).toarray()
    lam1, V1 = sla.eigh(L1, subset_by_index=[0, 3])
    lam2, V2 = sla.eigh(L2)
    R = L2 @ V1 - V1 * lam1
    gap = lam2[4] - lam1.max()
    assert gap > 0
    delta = eigen.start_distance(V1, V2[:, :4])
    assert 0.0 < delta <= np.linalg.norm(R, 2) / gap
    # the package's own previous embedding spans the same space to solver accuracy
    assert eigen.start_distance(previous.vectors, V2[:, :4]) == pytest.approx(delta, abs=1e-4)
