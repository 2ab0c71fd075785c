"""The eigenvalues beyond the wanted ones (the eigengap's λ_{k+1}) come from ARPACK's last Lanczos
step when they are decisive: the wanted pairs are scipy ``eigsh``'s bit for bit, every estimate lies
within its error bound of a true eigenvalue (checked against ``numpy.linalg.eigvalsh`` and
networkx's normalised Laplacian), and an estimate that is not decisive falls back to the
deflated solve."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp
from scipy.sparse.linalg import LinearOperator, eigsh

import workspace.spectral.eigen as eigen
from workspace.spectral import partition, planted_partition
from workspace.spectral.eigen import SolverContext


def _operator(n=1500, k=4, seed=2):
    """``I + D^-1/2 A D^-1/2`` of a planted partition: its spectrum lies in [0, 2] (common practice)."""
    A, _ = planted_partition(n, k, 30.0, 3.0, seed=seed)
    d = np.asarray(A.sum(axis=1)).ravel()
    s = 1.0 / np.sqrt(d)
    M = sp.identity(n, format="csr") + sp.diags_array(s) @ A @ sp.diags_array(s)
    return sp.csr_array(M)


def test_wanted_pairs_are_eigsh_bit_for_bit():
    M = _operator()
    n, m = M.shape[0], 4
    lin = LinearOperator(M.shape, matvec=lambda x: M @ x, dtype=np.float64)
    v0 = np.random.default_rng(3).uniform(-1.0, 1.0, n)
    w, V, beyond = eigen._arpack_with_next(lin, m, v0, 20, 1e-8, 10_000)
    # reference: scipy.sparse.linalg.eigsh with the same start vector and parameters
    w_ref, V_ref = eigsh(lin, k=m, which="LA", v0=v0, ncv=20, tol=1e-8, maxiter=10_000)
    assert np.array_equal(w, w_ref) and np.array_equal(V, V_ref)
    assert beyond is not None and beyond[0].shape == (20 - m,) == beyond[1].shape


def test_next_ritz_values_lie_within_their_bounds_of_eigenvalues():
    M = _operator()
    n, m = M.shape[0], 4
    lin = LinearOperator(M.shape, matvec=lambda x: M @ x, dtype=np.float64)
    v0 = np.random.default_rng(3).uniform(-1.0, 1.0, n)
    w, _, (theta, bounds) = eigen._arpack_with_next(lin, m, v0, 20, 1e-8, 10_000)
    exact = np.linalg.eigvalsh(M.toarray())[::-1]          # reference: numpy.linalg.eigvalsh
    assert np.all(np.diff(theta) <= 0)                     # largest first
    slack = 1e-10
    for t, b in zip(theta, bounds):
        # Kahan's bound (Parlett 1998, thm. 4.5.1): an eigenvalue within the residual norm
        assert np.min(np.abs(exact - t)) <= b + slack
    # Cauchy interlacing: the (m+1)-th Ritz value does not exceed the (m+1)-th eigenvalue
    assert theta[0] <= exact[m] + slack
    # the fourth community's eigenvalue is far above the bulk: the first estimate is close to it
    assert abs(theta[0] - exact[m]) <= bounds[0] + slack


def test_decisive_rule():
    ctx = SolverContext()
    w = np.array([1.0, 0.9, 0.8])
    beyond = (np.array([0.5, 0.4, 0.3]), np.array([1e-3, 2e-3, 0.2]))
    got = eigen._decisive_ritz(beyond, w, 2, ctx)
    assert np.array_equal(got, [0.5, 0.4]) and ctx.extra_accuracy == 2e-3
    # the bound of every value asked for counts: 0.8 - 0.5 <= 3 * 0.2, not decisive
    ctx = SolverContext()
    assert eigen._decisive_ritz(beyond, w, 3, ctx) is None and ctx.extra_accuracy is None
    # a tie at the cut-off: 0.8 - 0.79 <= 3 * 0.01
    assert eigen._decisive_ritz((np.array([0.79]), np.array([0.01])), w, 1, SolverContext()) is None
    assert eigen._decisive_ritz((np.array([np.nan]), np.array([0.0])), w, 1, SolverContext()) is None
    assert eigen._decisive_ritz(None, w, 1, SolverContext()) is None
    assert eigen._decisive_ritz((np.array([0.5]), np.array([1e-3])), w, 2, SolverContext()) is None


@pytest.fixture
def planted_3000():
    A, _ = planted_partition(3000, 4, 24.0, 2.0, seed=6)
    return A


def _laplacian_spectrum(A):
    # reference: networkx.normalized_laplacian_matrix, dense eigenvalues by numpy.linalg.eigvalsh
    L = nx.normalized_laplacian_matrix(nx.from_scipy_sparse_array(A)).toarray()
    return np.linalg.eigvalsh(L)


def test_run_reports_lambda_k_plus_one_within_its_bound(planted_3000):
    A = planted_3000
    r = partition(A, "njw", k=4, extra_eigenvalues=3)      # 3000 nodes: the iterative path
    assert r.diagnostics["solver"] != "dense-eigh"
    exact = _laplacian_spectrum(A)
    bound = r.diagnostics["extra_eigenvalue_residual"]
    assert bound is not None and bound < 0.05
    assert np.allclose(r.eigenvalues[:4], exact[:4], atol=1e-5)
    for j in range(4, 7):
        assert abs(r.eigenvalues[j] - exact[j]) <= bound + 1e-9, j


def test_undecisive_estimate_falls_back_to_the_deflated_solve(planted_3000, monkeypatch):
    A = planted_3000
    quick = partition(A, "njw", k=4, extra_eigenvalues=2)
    calls = []
    real = eigen._deflated_values

    def deflated(*args, **kwargs):
        calls.append(1)
        return real(*args, **kwargs)

    monkeypatch.setattr(eigen, "_decisive_ritz", lambda *args: None)
    monkeypatch.setattr(eigen, "_deflated_values", deflated)
    slow = partition(A, "njw", k=4, extra_eigenvalues=2)
    assert calls == [1]
    assert np.array_equal(quick.labels, slow.labels)
    assert slow.diagnostics["matvecs"] > quick.diagnostics["matvecs"]
    exact = _laplacian_spectrum(A)
    for r in (quick, slow):
        bound = r.diagnostics["extra_eigenvalue_residual"] or 1e-6
        assert abs(r.eigenvalues[4] - exact[4]) <= bound + 1e-9


def test_residuals_column_by_column_match_the_block_form(monkeypatch):
    M = _operator()
    op = eigen.SymmetricOperator(M)
    w, V = np.linalg.eigh(M.toarray())
    w, V = w[-5:] + 1e-7, V[:, -5:]                     # pairs a little off: non-zero residuals
    block = eigen._ordered_with_residuals(op, w, V, SolverContext())
    monkeypatch.setattr(eigen, "COLUMNWISE_MIN_ROWS", 0)
    columns = eigen._ordered_with_residuals(op, w, V, SolverContext())
    assert np.array_equal(block[0], columns[0]) and np.array_equal(block[1], columns[1])
    assert np.allclose(block[2], columns[2], rtol=1e-12, atol=0)
    # reference: the residual norms from numpy directly
    direct = np.linalg.norm(M @ columns[1] - columns[1] * columns[0], axis=0)
    assert np.allclose(columns[2], direct, rtol=1e-9, atol=1e-15)


def test_ritz_vectors_from_the_basis_match_eigsh(monkeypatch):
    # reference: scipy.sparse.linalg.eigsh (ARPACK's dseupd) on the same operator and start vector
    M = _operator()
    n, m = M.shape[0], 4
    lin = LinearOperator(M.shape, matvec=lambda x: M @ x, dtype=np.float64)
    v0 = np.random.default_rng(3).uniform(-1.0, 1.0, n)
    w_ref, V_ref = eigsh(lin, k=m, which="LA", v0=v0, ncv=20, tol=1e-8, maxiter=10_000)
    monkeypatch.setattr(eigen, "RITZ_VECTORS_MIN_ROWS", 0)
    w, V, beyond = eigen._arpack_with_next(lin, m, v0, 20, 1e-8, 10_000)
    assert beyond is not None
    assert np.allclose(w, w_ref, rtol=0.0, atol=1e-13)
    signs = np.sign(np.sum(V * V_ref, axis=0))
    assert np.allclose(V * signs, V_ref, rtol=0.0, atol=1e-12)
    assert np.allclose(V.T @ V, np.eye(m), atol=1e-12)


@pytest.mark.parametrize("method", ["njw", "shi-malik", "regularized", "bethe"])
def test_memberships_the_same_with_ritz_vectors_from_the_basis(method, planted_3000, monkeypatch):
    A = planted_3000
    before = partition(A, method, k=4)
    monkeypatch.setattr(eigen, "RITZ_VECTORS_MIN_ROWS", 0)
    after = partition(A, method, k=4)
    assert np.array_equal(before.labels, after.labels)
    assert np.allclose(before.eigenvalues, after.eigenvalues, rtol=0.0, atol=1e-12)
