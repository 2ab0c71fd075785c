"""Sweeps over k from one embedding: reuse equals recomputation, stability, split view, recommendation.

Outside references named beside each check: scikit-learn (adjusted_rand_score,
mutual_info_score), scipy.linalg.eigh, networkx (karate club, modularity,
stochastic_block_model), the detectability threshold of Decelle, Krzakala,
Moore & Zdeborová (2011), and the eigengap heuristic (von Luxburg 2007).
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
import scipy.linalg as sla
import scipy.sparse as sp
from sklearn.metrics import adjusted_rand_score, mutual_info_score

from workspace.compare.sweep import recommend_k, split_view, stability
from workspace.errors import ComputeError, ParameterError
from workspace.spectral import partition, planted_partition
from workspace.spectral.sweep import (ascending_spectrum, compute_embedding, eigengaps, k_path, parse_k_range,
                                      perturbed_adjacency)


def _detectable(k, c_in, c_out):
    # Decelle et al. (2011): k equal groups are detectable iff |c_in - c_out| > k sqrt(c)
    c = (c_in + (k - 1) * c_out) / k
    return abs(c_in - c_out) > k * np.sqrt(c)


def _sweep(A, ks, repeats=5, perturb=0.5, method="njw", **params):
    """Sweep as the service does: repeat 0 on A, repeat r >= 1 on A perturbed with seed r."""
    first, emb = k_path(A, method, ks, seed=0, **params)
    runs = {k: [first[k].labels] for k in ks}
    for r in range(1, repeats):
        res, _ = k_path(perturbed_adjacency(A, perturb, r), method, ks, seed=r, **params)
        for k in ks:
            runs[k].append(res[k].labels)
    gaps = eigengaps(ascending_spectrum(emb), ks)
    points = [{"k": k, "eigengap": gaps[k], "modularity": first[k].quality["modularity"], **stability(runs[k])}
              for k in ks]
    return first, points, recommend_k(points)


# ---- one embedding gives the same memberships as a solve per k --------------------------------

@pytest.mark.parametrize("method", ["njw", "shi-malik", "regularized", "bethe"])
def test_reuse_is_bit_identical_on_the_dense_path(method):
    A, _ = planted_partition(400, 4, 20, 2, seed=3)
    ks = [2, 3, 4, 5, 6]
    reused, emb = k_path(A, method, ks, seed=0)
    assert emb.n_vectors == 6 and emb.solver == "dense-eigh"
    for k in ks:
        scratch = partition(A, method, k=k, seed=0)
        # same dense LAPACK path: identical labels, eigenvalues agree to rounding (scipy.linalg.eigh)
        assert np.array_equal(scratch.labels, reused[k].labels), k
        assert reused[k].diagnostics["embedding_reused"] is True
        np.testing.assert_allclose(reused[k].eigenvalues, scratch.eigenvalues, atol=1e-10)


@pytest.mark.parametrize("method", ["njw", "regularized"])
def test_reuse_on_the_iterative_path_agrees_with_scratch(method):
    A, truth = planted_partition(3000, 5, 48, 2, seed=5)
    ks = [2, 3, 4, 5, 6, 7]
    reused, emb = k_path(A, method, ks, seed=0, dense_threshold=0)
    assert emb.solver == "arpack-eigsh"
    for k in ks:
        scratch = partition(A, method, k=k, seed=0, dense_threshold=0)
        if k == ks[-1]:
            # the same solve (k vectors) as the embedding: bit-identical labels
            assert np.array_equal(scratch.labels, reused[k].labels)
        elif k == 5:
            # the planted k: ARI = 1 with the same seed (sklearn.metrics.adjusted_rand_score)
            assert adjusted_rand_score(scratch.labels, reused[k].labels) == 1.0
            assert reused[k].k == 5 and adjusted_rand_score(truth, reused[k].labels) > 0.99
        # every k: the leading eigenvalues agree within the solver tolerance (ARPACK, eig_tol 1e-6)
        np.testing.assert_allclose(reused[k].eigenvalues[:k], scratch.eigenvalues[:k], atol=1e-5)


def test_embedding_refused_for_other_parameters_and_several_components():
    A, _ = planted_partition(300, 3, 20, 2, seed=1)
    emb = compute_embedding(A, "njw", 4)
    with pytest.raises(ComputeError, match="operator"):
        partition(A, "regularized", k=3, embedding=emb)
    with pytest.raises(ParameterError, match="shared embedding"):
        partition(A, "recursive", k=3, embedding=emb)
    two = sp.block_diag([A, A], format="csr")
    assert compute_embedding(two, "njw", 4) is None      # each k spreads parts over components differently
    with pytest.raises(ComputeError, match="one component"):
        partition(two, "njw", k=4, embedding=emb)


def test_spectrum_and_eigengaps_match_dense_eigh_on_karate():
    G = nx.karate_club_graph()
    A = sp.csr_array(nx.to_scipy_sparse_array(G, nodelist=sorted(G), weight=None, dtype=float))
    emb = compute_embedding(A, "njw", 8)
    d = A.sum(axis=1)
    L = np.eye(34) - A.toarray() / np.sqrt(np.outer(d, d))
    ref = sla.eigh(L, eigvals_only=True)                  # scipy.linalg.eigh of L_sym
    spec = ascending_spectrum(emb)
    np.testing.assert_allclose(spec, ref[:spec.shape[0]], atol=1e-10)
    gaps = eigengaps(spec, range(2, 9))
    for k in range(2, 9):
        assert gaps[k] == pytest.approx(ref[k] - ref[k - 1], abs=1e-10)


# ---- stability and split view ------------------------------------------------------------------

def test_stability_matches_sklearn_pairwise_scores():
    rng = np.random.default_rng(0)
    runs = [rng.integers(0, 4, 200) for _ in range(4)]
    st = stability(runs)
    aris, vis = [], []
    for i in range(4):
        for j in range(i + 1, 4):
            aris.append(adjusted_rand_score(runs[i], runs[j]))         # sklearn.metrics
            h = lambda x: -np.sum((c := np.bincount(x) / 200)[c > 0] * np.log(c[c > 0]))  # noqa: E731
            vis.append(h(runs[i]) + h(runs[j]) - 2 * mutual_info_score(runs[i], runs[j]))  # Meilă 2007
    assert st["pairs"] == 6
    assert st["ari_mean"] == pytest.approx(np.mean(aris), abs=1e-12)
    assert st["ari_sd"] == pytest.approx(np.std(aris), abs=1e-12)
    assert st["vi_mean"] == pytest.approx(np.mean(vis), abs=1e-10)
    assert st["vi_sd"] == pytest.approx(np.std(vis), abs=1e-10)
    assert stability([runs[0]])["ari_mean"] is None
    same = stability([runs[0], runs[0].copy()])
    assert same["ari_mean"] == 1.0 and same["vi_mean"] == 0.0


def test_split_view_hand_worked():
    # hand-worked: community 0 (4 nodes) splits into 0 and 2; community 1 is kept as 1
    small = np.array([0, 0, 0, 0, 1, 1, 1])
    large = np.array([0, 0, 2, 2, 1, 1, 1])
    rows = split_view(small, large)
    assert rows[0]["kind"] == "split" and {c["community"] for c in rows[0]["children"]} == {0, 2}
    assert all(c["purity"] == 1.0 and c["from_parent"] == 2 for c in rows[0]["children"])
    assert rows[1]["kind"] == "kept" and rows[1]["children"] == [
        {"community": 1, "size": 3, "from_parent": 3, "purity": 1.0}]


# ---- recommendation on planted partitions (Decelle et al. 2011) ---------------------------------

@pytest.mark.slow
@pytest.mark.parametrize("k,n,c_in,c_out", [(3, 900, 40, 2), (5, 1500, 60, 2), (8, 2400, 90, 2)])
def test_planted_k_is_recommended_and_stable(k, n, c_in, c_out):
    assert _detectable(k, c_in, c_out)                     # above the threshold (Decelle et al. 2011)
    A, truth = planted_partition(n, k, c_in, c_out, seed=2)
    ks = list(range(2, k + 4))
    first, points, rec = _sweep(A, ks)
    by_k = {p["k"]: p for p in points}
    assert rec["recommended"] == k, rec
    assert adjusted_rand_score(truth, first[k].labels) > 0.99        # sklearn.metrics
    assert by_k[k]["ari_mean"] >= 0.95                                 # the stability bar
    # k+1 clearly lower: ARI lower by > 0.03 and VI (Meilă 2007) at least ten times higher. With k groups an
    # extra split touches about 1/k of the nodes, so the ARI of k+1 creeps towards 1 as k grows (0.96 at k=8);
    # below 0.95 it must fall for k = 3 and 5
    assert by_k[k + 1]["ari_mean"] < by_k[k]["ari_mean"] - 0.03
    assert by_k[k + 1]["vi_mean"] >= 10 * max(by_k[k]["vi_mean"], 0.01)
    if k <= 5:
        assert by_k[k + 1]["ari_mean"] < 0.95
    top = rec["candidates"][0]["reasons"]
    assert any("eigengap" in r and "the largest" in r for r in top)   # von Luxburg 2007, Sec. 8.3
    assert any(f"k={k + 1} is less stable" in r for r in top)


def test_below_threshold_no_k_is_stable():
    k, c_in, c_out = 3, 5.0, 3.0
    assert not _detectable(k, c_in, c_out)                 # below the threshold (Decelle et al. 2011)
    A, _ = planted_partition(900, k, c_in, c_out, seed=4)
    _, points, rec = _sweep(A, [2, 3, 4, 5, 6], method="njw", components="largest")
    assert rec["stable"] == [] and rec["recommended"] is None
    assert all(p["ari_mean"] < 0.95 for p in points)
    assert rec["notes"] and rec["notes"][0].startswith("no k is stable")


@pytest.mark.slow
def test_two_level_hierarchy_both_levels_stand_out():
    # 2 groups of 3 blocks (networkx.stochastic_block_model): dense blocks, medium links inside a group
    sizes = [100] * 6
    p = [[0.30 if i == j else (0.06 if i // 3 == j // 3 else 0.002) for j in range(6)] for i in range(6)]
    G = nx.stochastic_block_model(sizes, p, seed=7)
    A = sp.csr_array(nx.to_scipy_sparse_array(G, nodelist=range(600), weight=None, dtype=float))
    block = np.repeat(np.arange(6), 100)
    ks = list(range(2, 9))
    first, points, rec = _sweep(A, ks)
    assert {c["k"] for c in rec["candidates"][:2]} == {2, 6}, rec
    by_k = {p["k"]: p for p in points}
    assert by_k[2]["ari_mean"] >= 0.95 and by_k[6]["ari_mean"] >= 0.95
    assert adjusted_rand_score(block // 3, first[2].labels) == 1.0   # sklearn.metrics
    assert adjusted_rand_score(block, first[6].labels) > 0.99
    rows = split_view(first[2].labels, first[6].labels)
    assert [r["kind"] for r in rows] == ["split", "split"]
    for r in rows:
        assert len(r["children"]) == 3 and all(c["purity"] > 0.98 for c in r["children"])


def test_karate_modularity_vs_k_agrees_with_networkx():
    G = nx.karate_club_graph()
    nodes = sorted(G)
    A = sp.csr_array(nx.to_scipy_sparse_array(G, nodelist=nodes, weight="weight", dtype=float))
    res, _ = k_path(A, "njw", range(2, 9))
    for k, r in res.items():
        comms = [set(np.flatnonzero(r.labels == c).tolist()) for c in range(r.k)]
        # networkx.community.modularity (Newman & Girvan 2004)
        assert r.quality["modularity"] == pytest.approx(nx.community.modularity(G, comms, weight="weight"),
                                                        abs=1e-12)


# ---- inputs ------------------------------------------------------------------------------------

def test_parse_k_range():
    assert parse_k_range("2..5") == [2, 3, 4, 5]
    assert parse_k_range("2,3,5,8") == [2, 3, 5, 8]
    assert parse_k_range("8,2..3,3") == [2, 3, 8]
    for bad in ("1..4", "5..2", "a", "2,,3", "2..x"):
        with pytest.raises(ParameterError):
            parse_k_range(bad)


def test_perturbation_is_seeded_symmetric_and_keeps_edges():
    A, _ = planted_partition(300, 3, 10, 1, seed=0)
    B1, B2, B3 = (perturbed_adjacency(A, 0.5, s) for s in (1, 1, 2))
    assert (B1 != B2).nnz == 0 and (B1 != B3).nnz > 0
    assert (B1 != B1.T).nnz == 0 and B1.nnz == A.nnz
    # Gamma(1/s^2, s^2) factors: mean 1, sd s (numpy.random.Generator.gamma); 5-sigma bounds
    f = B1.data / A.tocsr().data
    m = f.shape[0] / 2
    assert abs(f.mean() - 1) < 5 * 0.5 / np.sqrt(m) and abs(f.std() - 0.5) < 0.05
