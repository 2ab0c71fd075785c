"""Checks against networkx reference functions and published identities."""

import networkx as nx
import numpy as np
import pytest

from workspace.spectral import partition, planted_partition, quality_measures
from workspace.spectral.laplacians import laplacian_matrix


def _adj(G, weight="weight"):
    return nx.to_scipy_sparse_array(G, nodelist=sorted(G), weight=weight, format="csr", dtype=float)


GRAPHS = {
    "karate": lambda: nx.karate_club_graph(),
    "les-miserables": lambda: nx.convert_node_labels_to_integers(nx.les_miserables_graph(), ordering="sorted"),
    "davis": lambda: nx.convert_node_labels_to_integers(nx.davis_southern_women_graph(), ordering="sorted"),
    "florentine": lambda: nx.convert_node_labels_to_integers(nx.florentine_families_graph(), ordering="sorted"),
}


@pytest.mark.parametrize("name", list(GRAPHS))
@pytest.mark.parametrize("weighted", [False, True])
def test_lambda2_matches_networkx_algebraic_connectivity(name, weighted):
    G = GRAPHS[name]()
    w = "weight" if weighted else None
    A = _adj(G, w)
    for lap, normalized in (("unnormalized", False), ("sym", True)):
        r = partition(A, "fiedler", laplacian=lap)
        # reference: networkx.algebraic_connectivity (TraceMIN/LOBPCG, tol 1e-10)
        ref = nx.algebraic_connectivity(G, weight=w, normalized=normalized, tol=1e-12,
                                        method="tracemin_lu")
        assert r.eigenvalues[1] == pytest.approx(ref, rel=1e-6)


def test_lambda2_iterative_path_matches_networkx():
    A, _ = planted_partition(3000, 2, 12, 3, seed=5)
    r = partition(A, "fiedler", laplacian="sym", components="largest", eig_tol=1e-10)
    assert r.diagnostics["solver"] == "arpack-eigsh"
    keep = np.flatnonzero(r.labels != r.diagnostics["unassigned_community"]) \
        if r.diagnostics["unassigned_community"] is not None else np.arange(3000)
    G = nx.from_scipy_sparse_array(A[keep][:, keep])
    ref = nx.algebraic_connectivity(G, normalized=True, tol=1e-12, method="tracemin_lu")
    assert r.eigenvalues[1] == pytest.approx(ref, rel=1e-5)


@pytest.mark.parametrize("name", list(GRAPHS))
def test_modularity_matches_networkx(name):
    G = GRAPHS[name]()
    A = _adj(G)
    rng = np.random.default_rng(1)
    for labels in (partition(A, "njw", k=3).labels, rng.integers(0, 4, A.shape[0])):
        comms = [set(np.flatnonzero(labels == c).tolist()) for c in np.unique(labels)]
        q = quality_measures(A, labels)
        # reference: networkx.community.modularity (Newman & Girvan 2004)
        assert q["modularity"] == pytest.approx(
            nx.community.modularity(G, comms, weight="weight"), abs=1e-12)
        # reference: networkx.community.partition_quality -> coverage
        G_unweighted = nx.Graph(G.edges())
        G_unweighted.add_nodes_from(G)
        cov, _ = nx.community.partition_quality(G_unweighted, comms)
        q_unw = quality_measures(_adj(G, None), labels)
        assert q_unw["coverage"] == pytest.approx(cov, abs=1e-12)


@pytest.mark.parametrize("name", list(GRAPHS))
def test_cut_measures_match_networkx(name):
    G = GRAPHS[name]()
    A = _adj(G)
    labels = partition(A, "fiedler").labels
    S = set(np.flatnonzero(labels == 0).tolist())
    T = set(G) - S
    q = quality_measures(A, labels)
    # references: networkx.cut_size, normalized_cut_size, conductance
    assert q["cut"] == pytest.approx(nx.cut_size(G, S, T, weight="weight"))
    assert q["normalized_cut"] == pytest.approx(nx.normalized_cut_size(G, S, T, weight="weight"))
    assert q["conductance"] == pytest.approx(nx.conductance(G, S, T, weight="weight"))
    # ratio cut = cut/|S| + cut/|T| (Hagen & Kahng 1992)
    cut = nx.cut_size(G, S, T, weight="weight")
    assert q["ratio_cut"] == pytest.approx(cut / len(S) + cut / len(T))


@pytest.mark.parametrize("name", list(GRAPHS))
def test_ncut_rayleigh_quotient_identity(name):
    # Shi & Malik (2000), Sec. 2.1: with y = 1_S - b 1_T, b = vol(S)/vol(T),
    # Ncut(S, T) = y^T (D - W) y / (y^T D y)
    G = GRAPHS[name]()
    A = _adj(G)
    d = np.asarray(A.sum(axis=1)).ravel()
    L = laplacian_matrix(A, "unnormalized")
    for labels in (partition(A, "fiedler", split="median").labels,
                   np.random.default_rng(2).integers(0, 2, A.shape[0])):
        S = labels == 0
        b = d[S].sum() / d[~S].sum()
        y = np.where(S, 1.0, -b)
        rayleigh = float(y @ (L @ y)) / float(y @ (d * y))
        assert quality_measures(A, labels)["normalized_cut"] == pytest.approx(rayleigh, rel=1e-12)


CHEEGER_GRAPHS = dict(GRAPHS)
CHEEGER_GRAPHS["path-50"] = lambda: nx.path_graph(50)
CHEEGER_GRAPHS["barbell"] = lambda: nx.barbell_graph(10, 4)
CHEEGER_GRAPHS["planted-600"] = lambda: nx.from_scipy_sparse_array(
    planted_partition(600, 3, 20, 2, seed=4)[0])


@pytest.mark.parametrize("name", list(CHEEGER_GRAPHS))
def test_cheeger_bounds_hold_for_the_sweep_cut(name):
    # Chung (1997), Thm 2.2 / Lemma 2.1: lambda_2/2 <= phi_G <= phi(sweep) <= sqrt(2 lambda_2)
    # for the conductance sweep over D^-1/2 v_2 (the L_rw eigenvector)
    G = CHEEGER_GRAPHS[name]()
    if not nx.is_connected(G):
        G = G.subgraph(max(nx.connected_components(G), key=len)).copy()
        G = nx.convert_node_labels_to_integers(G, ordering="sorted")
    A = _adj(G)
    r = partition(A, "fiedler", laplacian="rw", split="sweep", objective="conductance")
    lam2 = r.eigenvalues[1]
    phi = r.quality["conductance"]
    assert lam2 / 2 - 1e-12 <= phi <= np.sqrt(2 * lam2) + 1e-12
