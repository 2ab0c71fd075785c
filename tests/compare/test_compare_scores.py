"""Scores (ARI, NMI, AMI, VI) against outside references.

References used here:
- scikit-learn: sklearn.metrics.adjusted_rand_score, normalized_mutual_info_score
  (average_method=...), adjusted_mutual_info_score, mutual_info_score.
- scipy.stats.entropy for Shannon entropies.
- Meilă (2007), "Comparing clusterings -- an information based distance", the
  identity VI = H(U) + H(V) - 2 I(U;V).
- Vinh, Epps & Bailey (2010), JMLR 11, eq. (24a) for E[I], evaluated here with
  exact rationals (fractions.Fraction, math.comb).
- Hubert & Arabie (1985) closed form of ARI from pair counts.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from scipy.stats import entropy
from sklearn.metrics import (
    adjusted_mutual_info_score, adjusted_rand_score, mutual_info_score,
    normalized_mutual_info_score,
)

from workspace.compare import (
    NORMALIZATIONS, adjusted_mutual_info, adjusted_rand_index, contingency_table, entropies,
    expected_mutual_information, mutual_information, normalized_mutual_info,
    variation_of_information,
)
from workspace.errors import ComputeError, ParameterError, UsageError

TOL = 1e-12


def _random_pair(seed: int):
    rng = np.random.default_rng(seed)
    n = int(rng.integers(2, 2500))
    ka = int(rng.integers(1, 60))
    kb = int(rng.integers(1, 60))
    a = rng.integers(0, ka, n)
    if seed % 3 == 0:  # correlated pair: b copies a and relabels 30 % at random
        b = np.where(rng.random(n) < 0.3, rng.integers(0, max(ka, 2), n), a)
    elif seed % 3 == 1:  # unequal community sizes
        b = rng.choice(kb, n, p=rng.dirichlet(np.ones(kb)))
    else:
        b = rng.integers(0, kb, n)
    return a, b


def _check_all_against_sklearn(a, b, skip_ami_min=False):
    t = contingency_table(a, b)
    # sklearn.metrics.adjusted_rand_score
    assert abs(adjusted_rand_index(table=t) - adjusted_rand_score(a, b)) <= TOL
    assert abs(adjusted_rand_index(a, b) - adjusted_rand_score(a, b)) <= TOL
    for m in NORMALIZATIONS:
        # sklearn.metrics.normalized_mutual_info_score(average_method=m)
        ref = normalized_mutual_info_score(a, b, average_method=m)
        assert abs(normalized_mutual_info(table=t, normalization=m) - ref) <= TOL, m
        one_side_singletons = (t.shape[0] == t.n or t.shape[1] == t.n) and not t.is_one_to_one()
        if m == "min" and (skip_ami_min or one_side_singletons):
            # 0/0 case (see test_singletons_against_any_partition_ami_is_zero):
            # our documented value is 0.0; sklearn returns noise there.
            if one_side_singletons:
                assert adjusted_mutual_info(table=t, normalization=m) == 0.0
            continue
        # sklearn.metrics.adjusted_mutual_info_score(average_method=m)
        ref = adjusted_mutual_info_score(a, b, average_method=m)
        ours = adjusted_mutual_info(table=t, normalization=m)
        if abs(ours - ref) > TOL:
            # sklearn's own E[I] carries relative rounding errors up to ~1e-11
            # for a few thousand nodes, which near AMI = 0 can exceed 1e-12.
            # Then both are held against the exact value (E[I] as an exact
            # rational sum, Vinh et al. 2010 eq. 24a): ours must be within
            # 1e-13 of it and closer than sklearn.
            exact = _ami_exact(t, m)
            assert abs(ours - exact) <= 1e-13, m
            assert abs(ours - exact) < abs(ref - exact), m


@pytest.mark.parametrize("seed", range(60))
def test_scores_agree_with_sklearn_on_random_pairs(seed):
    a, b = _random_pair(seed)
    _check_all_against_sklearn(a, b)


def test_ami_many_small_communities_agrees_with_sklearn():
    # Many small communities: ~600 and ~900 groups over 3000 nodes.
    rng = np.random.default_rng(11)
    a = rng.integers(0, 600, 3000)
    b = np.where(rng.random(3000) < 0.5, a, rng.integers(0, 900, 3000))
    _check_all_against_sklearn(a, b)


def test_ami_large_n_agrees_with_sklearn():
    # 120k nodes, k = 30 / 25: exercises the truncated hypergeometric sums.
    rng = np.random.default_rng(12)
    a = rng.integers(0, 30, 120_000)
    b = np.where(rng.random(120_000) < 0.2, rng.integers(0, 25, 120_000), a % 25)
    for m in ("arithmetic", "max"):
        ref = adjusted_mutual_info_score(a, b, average_method=m)  # sklearn
        assert abs(adjusted_mutual_info(a, b, normalization=m) - ref) <= TOL


DEGENERATE = {
    "one community both": (np.zeros(20, int), np.zeros(20, int)),
    "one community vs split": (np.zeros(20, int), np.arange(20) % 3),
    "split vs one community": (np.arange(20) % 4, np.zeros(20, int)),
    "singletons both": (np.arange(30), np.arange(30)[::-1].copy()),
    "singletons vs one community": (np.arange(30), np.zeros(30, int)),
    "identical renamed": (np.arange(50) % 5, (np.arange(50) % 5 + 2) % 5 * 10),
    "single node": (np.array([3]), np.array([7])),
    "two nodes apart vs together": (np.array([0, 1]), np.array([0, 0])),
}


@pytest.mark.parametrize("name", sorted(DEGENERATE))
def test_degenerate_cases_agree_with_sklearn(name):
    a, b = DEGENERATE[name]
    _check_all_against_sklearn(a, b)


def test_degenerate_values_are_the_documented_ones():
    # Values of sklearn.metrics' conventions (and ARI/NMI/AMI = 1 for identical).
    one = np.zeros(10, int)
    split = np.arange(10) % 2
    assert adjusted_rand_index(one, one) == 1.0
    assert normalized_mutual_info(one, one) == 1.0
    assert adjusted_mutual_info(one, one) == 1.0
    assert variation_of_information(one, one) == (0.0, 0.0)
    assert normalized_mutual_info(one, split) == 0.0
    assert adjusted_mutual_info(one, split) == 0.0
    assert adjusted_rand_index(one, split) == 0.0
    single = np.arange(10)
    for m in NORMALIZATIONS:
        assert normalized_mutual_info(single, single[::-1].copy(), normalization=m) == 1.0
        assert adjusted_mutual_info(single, single[::-1].copy(), normalization=m) == 1.0


@pytest.mark.parametrize("seed", range(5))
def test_singletons_against_any_partition_ami_is_zero(seed):
    # All singletons vs B: E[I] = H(B) = I exactly (derivation in the AMI
    # docstring), so AMI is 0 for every normalisation. Checked against
    # scipy.stats.entropy for H(B) and sklearn.metrics.mutual_info_score for I;
    # sklearn's AMI itself returns rounding noise here (for "min" an arbitrary
    # number), so for it we only compare the well-conditioned normalisations.
    rng = np.random.default_rng(seed)
    n = 60
    single = np.arange(n)
    b = rng.integers(0, 5, n)
    h_b = entropy(np.unique(b, return_counts=True)[1])
    assert expected_mutual_information(single, b) == pytest.approx(h_b, rel=1e-13)
    assert mutual_information(single, b) == pytest.approx(mutual_info_score(single, b), rel=1e-13)
    for m in NORMALIZATIONS:
        assert adjusted_mutual_info(single, b, normalization=m) == 0.0
        assert adjusted_mutual_info(b, single, normalization=m) == 0.0
    _check_all_against_sklearn(single, b, skip_ami_min=True)


def test_zero_nodes_is_a_compute_error():
    # Our decision (sklearn returns 1.0 for empty labelings): nothing to compare.
    e = np.zeros(0, dtype=np.int64)
    for fn in (adjusted_rand_index, normalized_mutual_info, adjusted_mutual_info,
               variation_of_information, mutual_information, entropies,
               expected_mutual_information):
        with pytest.raises(ComputeError):
            fn(e, e)


def test_bad_arguments():
    a = np.array([0, 1, 1])
    with pytest.raises(ParameterError):
        normalized_mutual_info(a, a, normalization="harmonic")
    with pytest.raises(ParameterError):
        adjusted_mutual_info(a, a, normalization="mean")
    with pytest.raises(UsageError):
        adjusted_rand_index(a, np.array([0, 1]))
    with pytest.raises(UsageError):
        adjusted_rand_index(a, np.array([0.0, 1.0, 1.0]))
    with pytest.raises(UsageError):
        adjusted_rand_index(a, a, table=contingency_table(a, a))
    with pytest.raises(ParameterError):
        expected_mutual_information(a, a, tail_mass=1.5)


def test_vi_worked_example_by_hand():
    # Worked by hand (Meilă 2007 definition VI = H(U|V) + H(V|U)):
    # U = {0,1,2},{3,4,5};  V = {0,1},{2,3,4,5};  n = 6.
    # H(U|V): V-block {0,1} is pure -> 0; V-block {2,3,4,5} holds 1 node of
    #   U1 and 3 of U2 -> ln4 - (3/4) ln3, weight 4/6  => (2/3) ln4 - (1/2) ln3.
    # H(V|U): U-block {0,1,2} holds 2 of V1 and 1 of V2 -> ln3 - (2/3) ln2,
    #   weight 3/6; U-block {3,4,5} is pure  => (1/2) ln3 - (1/3) ln2.
    # VI = (4/3) ln2 - (1/3) ln2 = ln 2 nats = exactly 1 bit.
    u = np.array([0, 0, 0, 1, 1, 1])
    v = np.array([0, 0, 1, 1, 1, 1])
    nats, bits = variation_of_information(u, v)
    assert nats == pytest.approx(math.log(2.0), abs=1e-15)
    assert bits == pytest.approx(1.0, abs=1e-15)


@pytest.mark.parametrize("seed", range(25))
def test_vi_identity_with_scipy_entropies(seed):
    # Meilă (2007): VI = H(U) + H(V) - 2 I(U;V); H from scipy.stats.entropy,
    # I from sklearn.metrics.mutual_info_score.
    a, b = _random_pair(seed)
    h_u = entropy(np.unique(a, return_counts=True)[1])
    h_v = entropy(np.unique(b, return_counts=True)[1])
    i_uv = mutual_info_score(a, b)
    nats, bits = variation_of_information(a, b)
    assert nats == pytest.approx(h_u + h_v - 2.0 * i_uv, abs=1e-12)
    assert bits == pytest.approx((h_u + h_v - 2.0 * i_uv) / math.log(2.0), abs=1e-12)
    hu, hv = entropies(a, b)
    assert hu == pytest.approx(h_u, abs=1e-12) and hv == pytest.approx(h_v, abs=1e-12)
    # A second identity from the same paper: VI = 2 H(U,V) - H(U) - H(V).
    joint = np.unique(a.astype(np.int64) * 1000 + b, return_counts=True)[1]
    assert nats == pytest.approx(2.0 * entropy(joint) - h_u - h_v, abs=1e-12)


def _emi_exact(a_sizes, b_sizes, n, a_mult=None, b_mult=None):
    # Vinh, Epps & Bailey (2010) eq. (24a) with the hypergeometric probability
    # as an exact fraction (math.comb) and the sum taken with math.fsum;
    # optional multiplicities for repeated sizes.
    a_mult = a_mult or [1] * len(a_sizes)
    b_mult = b_mult or [1] * len(b_sizes)
    terms = []
    for s, ms in zip(a_sizes, a_mult):
        for t, mt in zip(b_sizes, b_mult):
            den = math.comb(n, t)
            for k in range(max(1, s + t - n), min(s, t) + 1):
                p = Fraction(math.comb(s, k) * math.comb(n - s, t - k), den)
                terms.append(ms * mt * (k / n * math.log(n * k / (s * t)) * float(p)))
    return math.fsum(terms)


def _ami_exact(t, normalization):
    # AMI with E[I] from _emi_exact; MI and entropies from sklearn / scipy.
    n = t.n
    rs, rm = np.unique(t.row_sizes, return_counts=True)
    cs, cm = np.unique(t.col_sizes, return_counts=True)
    emi = _emi_exact(rs.tolist(), cs.tolist(), n, rm.tolist(), cm.tolist())
    a = np.repeat(t.rows[t.cell_row], t.cell_count)
    b = np.repeat(t.cols[t.cell_col], t.cell_count)
    mi = mutual_info_score(a, b)
    h_a, h_b = entropy(t.row_sizes), entropy(t.col_sizes)
    mean = {"arithmetic": (h_a + h_b) / 2, "geometric": math.sqrt(h_a * h_b),
            "max": max(h_a, h_b), "min": min(h_a, h_b)}[normalization]
    return (mi - emi) / (mean - emi)


@pytest.mark.parametrize("n,ka,kb,seed", [(40, 3, 4, 0), (300, 5, 2, 1), (900, 3, 3, 2),
                                          (120, 30, 40, 3)])
def test_expected_mutual_information_matches_exact_rational_sum(n, ka, kb, seed):
    rng = np.random.default_rng(seed)
    a = rng.integers(0, ka, n)
    b = rng.integers(0, kb, n)
    t = contingency_table(a, b)
    ref = _emi_exact(t.row_sizes.tolist(), t.col_sizes.tolist(), n)
    assert expected_mutual_information(table=t) == pytest.approx(ref, rel=1e-12)
    assert expected_mutual_information(table=t, tail_mass=0.0) == pytest.approx(ref, rel=1e-12)


def test_ari_known_values_from_sklearn_docs():
    # Examples in the sklearn.metrics.adjusted_rand_score docstring (recalled
    # from that docstring): perfectly discordant pairs give -0.5; one group vs
    # singletons gives 0.
    assert adjusted_rand_index([0, 0, 1, 1], [0, 1, 0, 1]) == pytest.approx(-0.5, abs=1e-15)
    assert adjusted_rand_index([0, 0, 0, 0], [0, 1, 2, 3]) == 0.0


def test_ten_million_nodes_exact_counts_and_scores():
    # a_i = i mod 2000, b_i = i mod 3000 over n = 6000 * 1667 = 10,002,000
    # nodes. By the Chinese remainder theorem (common practice), a cell (x, y)
    # is non-empty iff x = y (mod gcd = 1000), and then holds exactly
    # n / lcm(2000, 3000) = 1667 nodes: 6000 cells. Row sizes 5001, column
    # sizes 3334. ARI follows from Hubert & Arabie's (1985) closed form with
    # exact integers; MI from its definition with those counts.
    n = 6000 * 1667
    i = np.arange(n, dtype=np.int64)
    a = i % 2000
    b = i % 3000
    t = contingency_table(a, b)
    assert t.n == n and t.shape == (2000, 3000) and t.nnz == 6000
    assert t.cell_count.dtype == np.int64
    assert np.all(t.cell_count == 1667)
    assert np.all((t.rows[t.cell_row] - t.cols[t.cell_col]) % 1000 == 0)
    assert np.all(t.row_sizes == 5001) and np.all(t.col_sizes == 3334)

    def c2(x):
        return x * (x - 1) // 2
    index = 6000 * c2(1667)
    s_a = 2000 * c2(5001)
    s_b = 3000 * c2(3334)
    total = c2(n)
    expected_ari = Fraction(index - Fraction(s_a * s_b, total),
                            Fraction(s_a + s_b, 2) - Fraction(s_a * s_b, total))
    assert adjusted_rand_index(table=t) == pytest.approx(float(expected_ari), rel=1e-14)
    expected_mi = 6000 * (1667 / n) * math.log(n * 1667 / (5001 * 3334))
    assert mutual_information(table=t) == pytest.approx(expected_mi, rel=1e-12)


def test_ami_matches_exact_value_at_a_few_thousand_nodes():
    # Independent labels, n = 3500, 70 x 60 groups: AMI is near 0, where the
    # rounding of E[I] matters most. Reference: E[I] as an exact rational sum
    # (Vinh et al. 2010 eq. 24a), MI from sklearn.metrics.mutual_info_score,
    # entropies from scipy.stats.entropy. sklearn's own AMI is also within
    # 1e-11 here, but ours must be within 1e-13 of the exact value.
    rng = np.random.default_rng(2024)
    a = rng.integers(0, 70, 3500)
    b = rng.integers(0, 60, 3500)
    t = contingency_table(a, b)
    exact = _ami_exact(t, "arithmetic")
    assert abs(adjusted_mutual_info(table=t) - exact) <= 1e-13
    assert abs(adjusted_mutual_info_score(a, b) - exact) <= 1e-11
