"""Fine partitions (hundreds to thousands of communities): the sparse contingency table, the
scores, the exact matching and the expected mutual information, each against an outside
reference named beside the check.

References used: scikit-learn (``sklearn.metrics.cluster.contingency_matrix`` with
``sparse=True``, ``adjusted_rand_score``, ``normalized_mutual_info_score``,
``adjusted_mutual_info_score``, ``mutual_info_score``), scipy (``scipy.stats.entropy``,
``scipy.optimize.linear_sum_assignment``, ``scipy.stats.hypergeom``), and exact rational sums
(``fractions.Fraction`` / ``math.comb``) for Vinh, Epps & Bailey (2010) eq. (24a).
"""

from __future__ import annotations

import math
import subprocess
import sys
from fractions import Fraction

import numpy as np
import pytest
from scipy.optimize import linear_sum_assignment
from scipy.stats import entropy, hypergeom
from sklearn.metrics import (
    adjusted_mutual_info_score, adjusted_rand_score, mutual_info_score, normalized_mutual_info_score,
)
from sklearn.metrics.cluster import contingency_matrix

from workspace.compare import compare_memberships, contingency_table, match_communities
from workspace.compare import matching as matching_module
from workspace.compare.scores import _expected_mutual_information, _poisson_type_upper


def _fine_pair(n: int, k: int, moved: float, seed: int):
    """A with k communities of unequal sizes, B = A renamed with a share of nodes moved."""
    rng = np.random.default_rng(seed)
    a = rng.choice(k, n, p=rng.dirichlet(np.full(k, 2.0))).astype(np.int64)
    b = rng.permutation(k)[a]
    who = rng.random(n) < moved
    b[who] = rng.integers(0, k, int(who.sum()))
    return a, b


@pytest.mark.parametrize("k,n,seed", [(2, 500, 0), (17, 3000, 1), (300, 20000, 2),
                                      (1000, 50000, 3), (5000, 60000, 4)])
def test_sparse_contingency_equals_sklearn_sparse_contingency_matrix(k, n, seed):
    # Reference: sklearn.metrics.cluster.contingency_matrix(a, b, sparse=True), whose rows
    # and columns are the sorted distinct labels, as ours.
    rng = np.random.default_rng(seed)
    a = rng.integers(0, k, n)
    b = np.where(rng.random(n) < 0.5, a, rng.integers(0, k, n))
    t = contingency_table(a, b)
    ref = contingency_matrix(a, b, sparse=True).tocoo()
    assert t.shape == ref.shape
    assert t.nnz == ref.nnz
    mine = sorted(zip(t.cell_row.tolist(), t.cell_col.tolist(), t.cell_count.tolist()))
    theirs = sorted(zip(ref.row.tolist(), ref.col.tolist(), ref.data.tolist()))
    assert mine == theirs
    assert np.array_equal(t.rows, np.unique(a)) and np.array_equal(t.cols, np.unique(b))


@pytest.mark.parametrize("k,n,moved,seed", [
    (2, 2000, 0.3, 10), (40, 5000, 0.2, 11), (400, 30000, 0.1, 12), (1000, 60000, 0.05, 13),
    pytest.param(5000, 40000, 0.05, 14, marks=pytest.mark.slow),  # sklearn's E[I]: ~7 s
])
def test_scores_of_fine_partitions_match_sklearn(k, n, moved, seed):
    # ARI, NMI, AMI from sklearn.metrics; VI = H(A) + H(B) - 2 I(A;B) (Meila 2007) with the
    # entropies from scipy.stats.entropy and I from sklearn.metrics.mutual_info_score.
    a, b = _fine_pair(n, k, moved, seed)
    ids = np.char.add("v", np.char.zfill(np.arange(n).astype(str), 6))
    d = compare_memberships(ids, a, ids, b)
    assert d.ari == pytest.approx(adjusted_rand_score(a, b), abs=1e-12)
    assert d.nmi == pytest.approx(normalized_mutual_info_score(a, b), abs=1e-12)
    # sklearn's E[I] carries ~1e-9 relative error at a thousand communities (measured); its
    # effect on AMI stays below 1e-10 here, and the exact-sum checks below pin ours tighter.
    assert d.ami == pytest.approx(adjusted_mutual_info_score(a, b), abs=1e-10)
    h_a = entropy(np.unique(a, return_counts=True)[1])
    h_b = entropy(np.unique(b, return_counts=True)[1])
    assert d.vi_nats == pytest.approx(h_a + h_b - 2 * mutual_info_score(a, b), abs=1e-12)


def _emi_exact(t) -> float:
    # Vinh, Epps & Bailey (2010) eq. (24a) with the hypergeometric pmf as an exact fraction
    # (math.comb), summed with math.fsum over distinct sizes times multiplicities.
    n = t.n
    rs, rm = np.unique(t.row_sizes, return_counts=True)
    cs, cm = np.unique(t.col_sizes, return_counts=True)
    terms = []
    for s, ms in zip(rs.tolist(), rm.tolist()):
        for u, mu in zip(cs.tolist(), cm.tolist()):
            den = math.comb(n, u)
            for k in range(max(1, s + u - n), min(s, u) + 1):
                p = Fraction(math.comb(s, k) * math.comb(n - s, u - k), den)
                terms.append(ms * mu * (k / n * math.log(n * k / (s * u)) * float(p)))
    return math.fsum(terms)


@pytest.mark.parametrize("n,k,seed", [(1500, 120, 20), (3000, 300, 21), (800, 40, 22)])
def test_expected_mutual_information_fine_partitions_exact_sum(n, k, seed):
    # Many small communities: every size pair has a small mean (the fast product form).
    a, b = _fine_pair(n, k, 0.3, seed)
    t = contingency_table(a, b)
    ref = _emi_exact(t)
    assert _expected_mutual_information(t) == pytest.approx(ref, rel=1e-12, abs=1e-15)
    assert _expected_mutual_information(t, tail_mass=0.0) == pytest.approx(ref, rel=1e-12,
                                                                             abs=1e-15)
    # AMI (Vinh et al. 2010, arithmetic mean) with that exact E[I], I from
    # sklearn.metrics.mutual_info_score and entropies from scipy.stats.entropy.
    ids = np.char.add("v", np.char.zfill(np.arange(n).astype(str), 5))
    h_a = entropy(t.row_sizes)
    h_b = entropy(t.col_sizes)
    mi = mutual_info_score(a, b)
    exact_ami = (mi - ref) / ((h_a + h_b) / 2 - ref)
    assert compare_memberships(ids, a, ids, b).ami == pytest.approx(exact_ami, abs=1e-12)


@pytest.mark.parametrize("S,T,N", [(1000, 1000, 1_000_000), (300, 5000, 1_000_000),
                                   (40, 60, 3000), (5, 900, 1000)])
def test_factorial_moment_window_leaves_out_at_most_the_tail(S, T, N):
    # The upper window end h must satisfy P(K > h) <= tail for K ~ Hypergeometric(N, S, T);
    # reference: scipy.stats.hypergeom(M=N, n=S, N=T).sf(h) = P(K > h). For these small
    # means it is also within one of the exact quantile (hypergeom.isf), i.e. nearly tight.
    for tail in (1e-6, 1e-12):
        hi = np.array([min(S, T)], dtype=np.int64)
        h = int(_poisson_type_upper(np.array([S]), np.array([T]), N, hi, math.log(tail))[0])
        assert hypergeom(N, S, T).sf(h) <= tail
        assert h <= int(hypergeom(N, S, T).isf(tail)) + 1


def _dense_optimum(t) -> int:
    # scipy.optimize.linear_sum_assignment on the dense table (communities only).
    D = t.dense()[t.rows >= 0][:, t.cols >= 0]
    ri, ci = linear_sum_assignment(D, maximize=True)
    return int(D[ri, ci].sum())


def _check_matching(t) -> None:
    got = match_communities(t)
    assert len({m.a for m in got}) == len(got) == len({m.b for m in got})
    assert all(m.overlap > 0 and m.a >= 0 and m.b >= 0 for m in got)
    # equal total overlap to the dense Hungarian optimum (ties may pick other pairs)
    assert sum(m.overlap for m in got) == _dense_optimum(t)


@pytest.mark.parametrize("seed", range(6))
def test_matching_equals_linear_sum_assignment_up_to_300_communities(seed):
    rng = np.random.default_rng(100 + seed)
    k_a = int(rng.integers(2, 301))
    k_b = int(rng.integers(2, 301))
    n = int(rng.integers(2000, 30000))
    a = rng.integers(0, k_a, n)
    kind = seed % 3
    if kind == 0:    # unrelated partitions: a dense, tie-rich table
        b = rng.integers(0, k_b, n)
    elif kind == 1:  # similar partitions: settled by the exchange bound
        b = np.where(rng.random(n) < 0.1, rng.integers(0, k_b, n), a % k_b)
    else:            # merges of pairs plus noise: the bound settles part, the solver the rest
        b = np.where(rng.random(n) < 0.3, rng.integers(0, k_b, n), (a // 2) % k_b)
    a[rng.random(n) < 0.02] = -1  # a few unassigned nodes: never matched
    _check_matching(contingency_table(a, b))


@pytest.mark.parametrize("seed", range(4))
def test_sparse_solver_path_equals_linear_sum_assignment(seed, monkeypatch):
    # Force every left-over block onto the padded sparse solver
    # (scipy.sparse.csgraph.min_weight_full_bipartite_matching).
    monkeypatch.setattr(matching_module, "_DENSE_BLOCK", 0)
    rng = np.random.default_rng(200 + seed)
    k = int(rng.integers(2, 120))
    n = int(rng.integers(500, 6000))
    a = rng.integers(0, k, n)
    b = rng.integers(0, k, n) if seed % 2 else np.where(rng.random(n) < 0.4,
                                                          rng.integers(0, k, n), a)
    _check_matching(contingency_table(a, b))


def test_exchange_bound_settles_similar_fine_partitions_without_a_solver():
    # 1000 communities, 5 % of nodes moved: every community is settled by the exchange bound,
    # so no assignment solver is imported (checked in a fresh interpreter); the pairs equal
    # scipy.optimize.linear_sum_assignment's total overlap (checked here).
    code = (
        "import sys, numpy as np\n"
        "from workspace.compare import compare_memberships\n"
        "rng = np.random.default_rng(5)\n"
        "n, k = 200000, 1000\n"
        "a = rng.integers(0, k, n); b = rng.permutation(k)[a]\n"
        "w = rng.random(n) < 0.05; b[w] = rng.integers(0, k, int(w.sum()))\n"
        "ids = np.char.add('v', np.char.zfill(np.arange(n).astype(str), 6))\n"
        "d = compare_memberships(ids, a, ids, b)\n"
        "print(len(d.matches), 'scipy.optimize' in sys.modules, 'scipy.sparse.csgraph' in sys.modules)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    assert out.stdout.split() == ["1000", "False", "False"]
    rng = np.random.default_rng(5)
    a = rng.integers(0, 1000, 200000)
    b = rng.permutation(1000)[a]
    w = rng.random(200000) < 0.05
    b[w] = rng.integers(0, 1000, int(w.sum()))
    _check_matching(contingency_table(a, b))


def test_json_contingency_cells_by_label_and_dense_only_for_small_tables():
    from workspace.compare.diff import DENSE_LIMIT
    from workspace.errors import ParameterError

    a, b = _fine_pair(5000, 200, 0.2, 30)
    ids = np.char.add("v", np.char.zfill(np.arange(5000).astype(str), 5))
    d = compare_memberships(ids, a, ids, b)
    c = d.contingency_dict()
    # the cells rebuild sklearn's sparse contingency matrix, addressed by label
    ref = contingency_matrix(a, b, sparse=True).todok()
    rows, cols = np.unique(a).tolist(), np.unique(b).tolist()
    assert {(rows[i], cols[j]): int(v) for (i, j), v in ref.items()} == \
        {(x, y): n for x, y, n in c["cells"]}
    assert c["nnz"] == ref.nnz and c["shape"] == list(ref.shape)
    assert 200 * 200 > DENSE_LIMIT
    with pytest.raises(ParameterError, match="dense form"):
        d.contingency_dict(dense=True)
    small = compare_memberships(ids, a % 7, ids, b % 5)
    dense = small.contingency_dict(dense=True)["counts"]
    assert dense == contingency_matrix(a % 7, b % 5).tolist()  # sklearn, dense
