"""Property tests (hypothesis): symmetry and invariance to renaming labels.

Properties from the definitions: ARI (Hubert & Arabie 1985), NMI and AMI
with a symmetric mean (Vinh, Epps & Bailey 2010) and VI (Meilă 2007) are
symmetric in their two arguments and depend on the partitions only, not on
the label values. Each generated pair is also checked against scikit-learn
(sklearn.metrics) for ARI.
"""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.metrics import adjusted_rand_score

from workspace.compare import (
    NORMALIZATIONS, adjusted_mutual_info, adjusted_rand_index, compare_memberships,
    contingency_table, normalized_mutual_info, variation_of_information,
)


@st.composite
def label_pairs(draw):
    n = draw(st.integers(1, 60))
    ka = draw(st.integers(1, 8))
    kb = draw(st.integers(1, 8))
    a = draw(st.lists(st.integers(0, ka - 1), min_size=n, max_size=n))
    b = draw(st.lists(st.integers(0, kb - 1), min_size=n, max_size=n))
    perm_a = draw(st.permutations(range(ka)))
    perm_b = draw(st.permutations(range(kb)))
    return np.array(a), np.array(b), np.array(perm_a), np.array(perm_b)


@settings(max_examples=80, deadline=None)
@given(label_pairs())
def test_scores_symmetric(pair):
    a, b, _, _ = pair
    t, tt = contingency_table(a, b), contingency_table(b, a)
    assert adjusted_rand_index(table=t) == adjusted_rand_index(table=tt)
    assert abs(adjusted_rand_index(table=t) - adjusted_rand_score(a, b)) <= 1e-12  # sklearn
    for m in NORMALIZATIONS:
        assert abs(normalized_mutual_info(table=t, normalization=m)
                   - normalized_mutual_info(table=tt, normalization=m)) <= 1e-12
        assert abs(adjusted_mutual_info(table=t, normalization=m)
                   - adjusted_mutual_info(table=tt, normalization=m)) <= 1e-12
    assert abs(variation_of_information(table=t)[0]
               - variation_of_information(table=tt)[0]) <= 1e-12


@settings(max_examples=80, deadline=None)
@given(label_pairs())
def test_scores_invariant_to_renaming(pair):
    a, b, pa, pb = pair
    ra, rb = pa[a] * 3 + 1, pb[b] * 5  # any injective renaming
    t, tr = contingency_table(a, b), contingency_table(ra, rb)
    assert adjusted_rand_index(table=t) == adjusted_rand_index(table=tr)
    for m in NORMALIZATIONS:
        assert abs(normalized_mutual_info(table=t, normalization=m)
                   - normalized_mutual_info(table=tr, normalization=m)) <= 1e-12
        assert abs(adjusted_mutual_info(table=t, normalization=m)
                   - adjusted_mutual_info(table=tr, normalization=m)) <= 1e-12
    assert abs(variation_of_information(table=t)[0]
               - variation_of_information(table=tr)[0]) <= 1e-12


@settings(max_examples=50, deadline=None)
@given(label_pairs())
def test_renamed_copy_is_identical(pair):
    a, _, pa, _ = pair
    ids = np.array([f"v{i:03d}" for i in range(a.shape[0])])
    d = compare_memberships(ids, a, ids, pa[a])
    assert d.ari == 1.0 and d.nmi == 1.0 and d.ami == 1.0 and d.vi_nats == 0.0
    assert d.moved == 0
    assert all(e.kind == "kept" for e in d.events)


@settings(max_examples=50, deadline=None)
@given(label_pairs())
def test_moved_count_is_invariant_to_renaming(pair):
    a, b, pa, pb = pair
    ids = np.array([f"v{i:03d}" for i in range(a.shape[0])])
    d1 = compare_memberships(ids, a, ids, b)
    d2 = compare_memberships(ids, pa[a], ids, pb[b])
    # Total matched overlap is what the Hungarian step maximises; it cannot
    # depend on the label values (ties may pick different pairs).
    assert sum(m.overlap for m in d1.matches) == sum(m.overlap for m in d2.matches)
    assert d1.moved == d2.moved == a.shape[0] - sum(m.overlap for m in d1.matches)
