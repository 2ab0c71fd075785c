"""Planted partitions (stochastic block model).

Detectability threshold for k equal groups with mean degree c:
|c_in - c_out| > k sqrt(c), i.e. (c_in - c_out)^2 > 2 (c_in + c_out) for k = 2
(Decelle, Krzakala, Moore & Zdeborová 2011). Partitions are compared with
sklearn.metrics.adjusted_rand_score (Hubert & Arabie 1985).
"""

import numpy as np
import pytest
import scipy.sparse as sp
from sklearn.cluster import SpectralClustering
from sklearn.metrics import adjusted_rand_score

from workspace.spectral import partition, planted_partition


def _kept(r):
    u = r.diagnostics["unassigned_community"]
    return np.ones(r.labels.shape[0], bool) if u is None else r.labels != u


def _detectable(k, c_in, c_out):
    c = (c_in + (k - 1) * c_out) / k
    return abs(c_in - c_out) > k * np.sqrt(c)


# ---- the sampler ---------------------------------------------------------------

def test_sampler_edge_count_and_structure():
    n, k, c_in, c_out = 20000, 4, 12.0, 2.0
    A, truth = planted_partition(n, k, c_in, c_out, seed=11)
    assert isinstance(A, sp.csr_array) and A.shape == (n, n)
    assert (A != A.T).nnz == 0 and A.diagonal().sum() == 0 and set(np.unique(A.data)) == {1.0}
    assert np.bincount(truth).tolist() == [n // k] * k
    # expected edge counts: binomial means, sum over block pairs (Holland et al. 1983)
    s = n // k
    exp_in = k * (s * (s - 1) / 2) * c_in / n
    exp_out = (k * (k - 1) / 2) * s * s * c_out / n
    rows, cols = A.nonzero()
    same = truth[rows] == truth[cols]
    m_in, m_out = same.sum() / 2, (~same).sum() / 2
    # 5 standard deviations of the binomial counts
    assert abs(m_in - exp_in) < 5 * np.sqrt(exp_in)
    assert abs(m_out - exp_out) < 5 * np.sqrt(exp_out)


def test_sampler_is_seeded():
    A1, t1 = planted_partition(5000, 3, 10, 1, seed=7)
    A2, t2 = planted_partition(5000, 3, 10, 1, seed=7)
    A3, _ = planted_partition(5000, 3, 10, 1, seed=8)
    assert (A1 != A2).nnz == 0 and np.array_equal(t1, t2)
    assert (A1 != A3).nnz > 0


# ---- recovery above / below the threshold ------------------------------------

@pytest.mark.parametrize("method", ["njw", "shi-malik", "regularized", "bethe", "fiedler"])
def test_near_perfect_recovery_well_above_threshold(method):
    c_in, c_out = 18.0, 2.0                      # (16)^2 = 256 > 2 * 20 = 40
    assert _detectable(2, c_in, c_out)
    A, truth = planted_partition(4000, 2, c_in, c_out, seed=1)
    r = partition(A, method, k=2, components="largest")
    keep = _kept(r)
    assert adjusted_rand_score(truth[keep], r.labels[keep]) > 0.9


@pytest.mark.parametrize("method", ["njw", "bethe"])
def test_no_recovery_below_threshold(method):
    c_in, c_out = 5.0, 3.0                       # (2)^2 = 4 < 2 * 8 = 16
    assert not _detectable(2, c_in, c_out)
    A, truth = planted_partition(4000, 2, c_in, c_out, seed=2)
    r = partition(A, method, k=2, components="largest")
    keep = _kept(r)
    assert adjusted_rand_score(truth[keep], r.labels[keep]) < 0.05


def test_kway_recovery_above_threshold():
    k, c_in, c_out = 5, 40.0, 2.0
    assert _detectable(k, c_in, c_out)
    A, truth = planted_partition(5000, k, c_in, c_out, seed=3)
    for method in ("njw", "shi-malik", "regularized", "bethe"):
        for assign in ("kmeans", "discretize"):
            r = partition(A, method, k=k, assign=assign, components="largest")
            keep = _kept(r)
            assert adjusted_rand_score(truth[keep], r.labels[keep]) > 0.95, (method, assign)


def test_bethe_finds_k_on_a_sparse_planted_graph():
    # Saade, Krzakala & Zdeborová (2014): on sparse graphs the number of negative
    # eigenvalues of H(r) recovers k, while the spectrum of the normalised
    # Laplacian is blurred by localised eigenvectors: its eigengap here is
    # small next to the bulk (the k=3 it finds is only by a small margin).
    k, c_in, c_out = 3, 10.0, 1.0                # c = 4, |9| > 3 * 2 = 6: detectable
    assert _detectable(k, c_in, c_out)
    A, truth = planted_partition(6000, k, c_in, c_out, seed=3)
    bethe = partition(A, "bethe", k="auto", components="largest")
    njw = partition(A, "njw", k="auto", components="largest")
    assert bethe.diagnostics["eigengap_suggestion"] == k
    assert bethe.k - (bethe.diagnostics["unassigned_community"] is not None) == k
    gaps = np.diff(njw.eigenvalues)
    assert gaps[k - 1] < 0.1 * njw.eigenvalues[k]          # lambda_{k+1} - lambda_k: a narrow gap
    keep = _kept(bethe)
    assert adjusted_rand_score(truth[keep], bethe.labels[keep]) > 0.3


# ---- agreement with scikit-learn ------------------------------------------------

@pytest.mark.parametrize("n,k,c_in,c_out", [
    (1200, 3, 40.0, 2.0),
    pytest.param(3000, 4, 30.0, 2.0, marks=pytest.mark.slow),
])
def test_agreement_with_sklearn_spectral_clustering(n, k, c_in, c_out):
    A, truth = planted_partition(n, k, c_in, c_out, seed=9)
    # keep the test graph connected so both sides embed the same graph
    from scipy.sparse.csgraph import connected_components
    assert connected_components(A)[0] == 1
    ref = SpectralClustering(n_clusters=k, affinity="precomputed", random_state=0,
                             assign_labels="kmeans").fit(A).labels_
    for method in ("njw", "shi-malik"):
        r = partition(A, method, k=k)
        assert adjusted_rand_score(ref, r.labels) >= 0.99, method
