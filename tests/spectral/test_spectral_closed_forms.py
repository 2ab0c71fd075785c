"""Closed-form Laplacian spectra of classic graph families.

Sources: Brouwer & Haemers, *Spectra of Graphs* (2012), Sec. 1.4 (path,
cycle, complete, complete bipartite, star, hypercube; unnormalised L);
Chung, *Spectral Graph Theory* (1997), Example 1.1–1.6 (normalised L_sym,
whose spectrum L_rw shares). Eigenpairs are checked by the residual
||L x - λ x||, never by raw eigenvector entries.
"""

from math import comb

import networkx as nx
import numpy as np
import pytest

from workspace.spectral import laplacian_eigenpairs
from workspace.spectral.laplacians import laplacian_matrix


def _adj(G):
    return nx.to_scipy_sparse_array(G, nodelist=sorted(G), format="csr", dtype=float)


def _path(n):
    j = np.arange(n)
    # Brouwer & Haemers 2012, Sec. 1.4.4: L(P_n) has 2 - 2cos(pi j / n), j = 0..n-1
    L = 2 - 2 * np.cos(np.pi * j / n)
    # Chung 1997, Example 1.4: L_sym(P_n) has 1 - cos(pi j / (n-1)), j = 0..n-1
    N = 1 - np.cos(np.pi * j / (n - 1))
    return nx.path_graph(n), L, N


def _cycle(n):
    j = np.arange(n)
    # Brouwer & Haemers 2012, Sec. 1.4.3: L(C_n) has 2 - 2cos(2 pi j / n)
    L = 2 - 2 * np.cos(2 * np.pi * j / n)
    # Chung 1997, Example 1.5: L_sym(C_n) has 1 - cos(2 pi j / n)
    return nx.cycle_graph(n), L, L / 2


def _complete(n):
    # Brouwer & Haemers 2012, Sec. 1.4.1: 0 and n (multiplicity n-1)
    # Chung 1997, Example 1.1: 0 and n/(n-1) (multiplicity n-1)
    return (nx.complete_graph(n), np.r_[0.0, np.full(n - 1, float(n))],
            np.r_[0.0, np.full(n - 1, n / (n - 1))])


def _star(n):
    # K_{1,n-1}: L has 0, 1 (mult n-2), n (Brouwer & Haemers 2012, Sec. 1.4.2)
    # L_sym has 0, 1 (mult n-2), 2 (Chung 1997, Example 1.2)
    return (nx.star_graph(n - 1), np.r_[0.0, np.ones(n - 2), float(n)],
            np.r_[0.0, np.ones(n - 2), 2.0])


def _bipartite(a, b):
    # K_{a,b}: L has 0, a (mult b-1), b (mult a-1), a+b (Brouwer & Haemers 2012, Sec. 1.4.2)
    # L_sym has 0, 1 (mult a+b-2), 2 (Chung 1997, Example 1.3)
    L = np.r_[0.0, np.full(b - 1, float(a)), np.full(a - 1, float(b)), float(a + b)]
    N = np.r_[0.0, np.ones(a + b - 2), 2.0]
    return nx.complete_bipartite_graph(a, b), L, N


def _hypercube(d):
    # Q_d: L has 2i with multiplicity C(d, i) (Brouwer & Haemers 2012, Sec. 1.4.6);
    # Q_d is d-regular, so L_sym = L/d (Chung 1997, Example 1.6)
    L = np.concatenate([np.full(comb(d, i), 2.0 * i) for i in range(d + 1)])
    G = nx.convert_node_labels_to_integers(nx.hypercube_graph(d), ordering="sorted")
    return G, L, L / d


FAMILIES = {
    "path-9": lambda: _path(9),
    "path-40": lambda: _path(40),
    "cycle-12": lambda: _cycle(12),
    "complete-7": lambda: _complete(7),
    "star-9": lambda: _star(9),
    "bipartite-3-5": lambda: _bipartite(3, 5),
    "hypercube-5": lambda: _hypercube(5),
}


def _residuals(A, kind, values, vectors):
    L = laplacian_matrix(A, kind).toarray()
    return np.linalg.norm(L @ vectors - vectors * values, axis=0)


@pytest.mark.parametrize("family", list(FAMILIES))
@pytest.mark.parametrize("kind", ["unnormalized", "sym", "rw"])
def test_full_spectrum_matches_closed_form(family, kind):
    G, L_vals, N_vals = FAMILIES[family]()
    A = _adj(G)
    n = A.shape[0]
    sol = laplacian_eigenpairs(A, n, laplacian=kind)
    expected = np.sort(L_vals if kind == "unnormalized" else N_vals)
    np.testing.assert_allclose(sol.values, expected, atol=1e-10)
    assert sol.solver == "dense-eigh"
    assert max(_residuals(A, kind, sol.values, sol.vectors)) < 1e-9


@pytest.mark.parametrize("kind", ["unnormalized", "sym", "rw"])
def test_iterative_path_matches_closed_form(kind):
    # path graph: all eigenvalues simple, so a single-vector Lanczos finds each
    G, L_vals, N_vals = _path(300)
    A = _adj(G)
    sol = laplacian_eigenpairs(A, 6, laplacian=kind, dense_threshold=0, eig_tol=1e-12)
    assert sol.solver in ("arpack-eigsh", "lobpcg")
    expected = np.sort(L_vals if kind == "unnormalized" else N_vals)[:6]
    np.testing.assert_allclose(sol.values, expected, atol=1e-8)
    assert max(_residuals(A, kind, sol.values, sol.vectors)) < 1e-6


def test_iterative_hypercube_values_are_in_the_closed_form_set():
    # Lanczos with one start vector may return fewer copies of a repeated
    # eigenvalue; every value it returns must still be a true eigenvalue
    # (Brouwer & Haemers 2012: spectrum of Q_7 is {2i}), with small residual.
    G, L_vals, _ = _hypercube(7)
    A = _adj(G)
    sol = laplacian_eigenpairs(A, 5, laplacian="unnormalized", dense_threshold=0)
    for v in sol.values:
        assert np.min(np.abs(v - np.unique(L_vals))) < 1e-6
    assert sol.values[0] == pytest.approx(0.0, abs=1e-8)
    assert max(_residuals(A, "unnormalized", sol.values, sol.vectors)) < 1e-5


def test_rw_vectors_solve_the_generalized_problem():
    # L u = lambda D u  <=>  L_rw u = lambda u  (Shi & Malik 2000, Sec. 2)
    G = nx.karate_club_graph()
    A = _adj(G)
    sol = laplacian_eigenpairs(A, 4, laplacian="rw")
    L = laplacian_matrix(A, "unnormalized").toarray()
    D = np.diag(A.sum(axis=1))
    R = L @ sol.vectors - D @ sol.vectors * sol.values
    assert np.abs(R).max() < 1e-9
