"""compare_memberships: alignment across versions, matching, moved nodes, JSON output.

Outside references: sklearn.metrics (ARI / NMI / AMI on the aligned labels),
hand-built cases whose expected values are worked out in the comments, and
brute-force enumeration of all assignments for the Hungarian matching
(common practice).
"""

from __future__ import annotations

import itertools
import json

import numpy as np
import pytest
from sklearn.metrics import (
    adjusted_mutual_info_score, adjusted_rand_score, normalized_mutual_info_score,
)

from workspace.compare import (
    align_nodes, compare_memberships, contingency_table, match_communities,
)
from workspace.errors import ComputeError, ParameterError, UsageError


def ids(*names):
    return np.array(sorted(names))


def test_renamed_labels_give_ari_one_and_no_moved_nodes():
    rng = np.random.default_rng(3)
    node_ids = np.array(sorted(f"v{i:04d}" for i in range(500)))
    a = rng.integers(0, 12, 500)
    rename = rng.permutation(12)
    b = rename[a]
    d = compare_memberships(node_ids, a, node_ids, b)
    assert d.ari == 1.0 and d.nmi == 1.0 and d.ami == 1.0
    assert d.vi_nats == 0.0 and d.vi_bits == 0.0
    assert d.moved == 0 and d.moved_nodes() == []
    assert {(m.a, m.b) for m in d.matches} == {(i, int(rename[i])) for i in np.unique(a)}
    assert all(m.jaccard == 1.0 for m in d.matches)
    assert all(e.kind == "kept" for e in d.events) and len(d.events) == len(np.unique(a))
    assert adjusted_rand_score(a, b) == 1.0  # sklearn.metrics agrees


def test_moved_nodes_hand_built():
    # A: x={a,b,c,d} y={e,f,g}   B (renamed): 5={a,b,c} 9={d,e,f,g}
    # Hungarian on overlaps [[3,1],[0,3]] matches x->5, y->9 (total 6), so only
    # d moved: from x (0) to 9, where x's match is 5.
    nid = ids("a", "b", "c", "d", "e", "f", "g")
    a = np.array([0, 0, 0, 0, 1, 1, 1])
    b = np.array([5, 5, 5, 9, 9, 9, 9])
    d = compare_memberships(nid, a, nid, b)
    assert d.moved == 1
    assert d.moved_nodes() == [{"node": "d", "from": 0, "to": 9, "from_match": 5}]
    assert [(m.a, m.b, m.overlap) for m in d.matches] == [(0, 5, 3), (1, 9, 3)]
    assert d.matches[0].jaccard == pytest.approx(3 / 4)
    assert d.matches[1].jaccard == pytest.approx(3 / 4)
    # sklearn.metrics on the same labels
    assert d.ari == pytest.approx(adjusted_rand_score(a, b), abs=1e-12)
    assert d.nmi == pytest.approx(normalized_mutual_info_score(a, b), abs=1e-12)
    assert d.ami == pytest.approx(adjusted_mutual_info_score(a, b), abs=1e-12)


def test_unmatched_community_nodes_count_as_moved():
    # A has 3 communities, B has 2: x={a,b} y={c,d} z={e,f};  B: 0={a,b,c}, 1={d,e,f}.
    # Overlaps [[2,0],[1,1],[0,2]]: the optimum matches x->0, z->1 (total 4) and
    # y stays unmatched, so c and d are moved with from_match None.
    nid = ids("a", "b", "c", "d", "e", "f")
    a = np.array([0, 0, 1, 1, 2, 2])
    b = np.array([0, 0, 0, 1, 1, 1])
    d = compare_memberships(nid, a, nid, b)
    assert [(m.a, m.b) for m in d.matches] == [(0, 0), (2, 1)]
    assert d.moved_nodes() == [{"node": "c", "from": 1, "to": 0, "from_match": None},
                               {"node": "d", "from": 1, "to": 1, "from_match": None}]


def test_cross_version_alignment_common_and_all():
    # A = {a,b,c,d,e}, B = {b,c,d,e,f,g}: shared {b,c,d,e}; only_in_a {a};
    # only_in_b {f,g}; coverage = 4 / 7.
    nid_a = ids("a", "b", "c", "d", "e")
    nid_b = ids("b", "c", "d", "e", "f", "g")
    lab_a = np.array([0, 0, 1, 1, 1])          # a b | c d e
    lab_b = np.array([3, 3, 4, 4, 4, 4])       # b c | d e f g
    al = align_nodes(nid_a, nid_b)
    assert al.common_a.tolist() == [1, 2, 3, 4] and al.common_b.tolist() == [0, 1, 2, 3]
    assert al.only_a.tolist() == [0] and al.only_b.tolist() == [4, 5]
    assert al.coverage == pytest.approx(4 / 7)

    d = compare_memberships(nid_a, lab_a, nid_b, lab_b)
    assert (d.only_in_a, d.only_in_b) == (1, 2)
    assert d.only_in_a_ids.tolist() == ["a"] and d.only_in_b_ids.tolist() == ["f", "g"]
    assert d.coverage == pytest.approx(4 / 7)
    assert d.n_common == d.n_scored == 4
    # Scored on shared nodes b c d e: A = 0 1 1 1, B = 3 3 4 4 (sklearn.metrics).
    sa, sb = [0, 1, 1, 1], [3, 3, 4, 4]
    assert d.ari == pytest.approx(adjusted_rand_score(sa, sb), abs=1e-12)
    assert d.nmi == pytest.approx(normalized_mutual_info_score(sa, sb), abs=1e-12)
    assert d.ami == pytest.approx(adjusted_mutual_info_score(sa, sb), abs=1e-12)
    # Hungarian: overlaps [[1,0],[1,2]] -> 0->3 and 1->4 (total 3); c moved 1 -> 3.
    assert d.moved_nodes() == [{"node": "c", "from": 1, "to": 3, "from_match": 4}]

    d2 = compare_memberships(nid_a, lab_a, nid_b, lab_b, nodes="all")
    assert d2.n_scored == 7
    # Union a..g with "absent" as its own group on the missing side (code -2 here
    # for sklearn): A = 0 0 1 1 1 absent absent; B = absent 3 3 4 4 4 4.
    ua = [0, 0, 1, 1, 1, -2, -2]
    ub = [-2, 3, 3, 4, 4, 4, 4]
    assert d2.ari == pytest.approx(adjusted_rand_score(ua, ub), abs=1e-12)
    assert d2.nmi == pytest.approx(normalized_mutual_info_score(ua, ub), abs=1e-12)
    assert d2.ami == pytest.approx(adjusted_mutual_info_score(ua, ub), abs=1e-12)
    c = d2.to_dict()["contingency"]
    assert c["rows"] == ["absent", 0, 1] and c["cols"] == ["absent", 3, 4]
    # Sparse cells [a, b, count] by label; the dense form only on request.
    assert c["cells"] == [["absent", 4, 2], [0, "absent", 1], [0, 3, 1], [1, 3, 1], [1, 4, 2]]
    assert c["shape"] == [3, 3] and c["nnz"] == 5 and "counts" not in c
    assert d2.contingency_dict(dense=True)["counts"] == [[0, 0, 2], [1, 1, 0], [0, 1, 2]]
    assert c["row_sizes"] == [2, 2, 3] and c["col_sizes"] == [1, 2, 4]
    # Absent is never matched and absent nodes are never "moved".
    assert all(isinstance(m.a, int) and m.a >= 0 and m.b >= 0 for m in d2.matches)
    assert d2.moved_nodes() == [{"node": "c", "from": 1, "to": 3, "from_match": 4}]


def test_disjoint_node_sets():
    nid_a, nid_b = ids("a", "b", "c"), ids("x", "y")
    with pytest.raises(ComputeError, match="share no node"):
        compare_memberships(nid_a, np.array([0, 0, 1]), nid_b, np.array([0, 1]))
    d = compare_memberships(nid_a, np.array([0, 0, 1]), nid_b, np.array([0, 1]), nodes="all")
    assert d.coverage == 0.0 and d.n_common == 0 and d.moved == 0
    ua, ub = [0, 0, 1, -2, -2], [-2, -2, -2, 0, 1]
    assert d.ari == pytest.approx(adjusted_rand_score(ua, ub), abs=1e-12)  # sklearn
    assert {e.kind for e in d.events} == {"dissolved", "new"}
    with pytest.raises(ComputeError):
        compare_memberships(np.array([], dtype=str), np.array([], dtype=np.int64),
                            np.array([], dtype=str), np.array([], dtype=np.int64), nodes="all")


def test_unassigned_label():
    # -1 is its own group for the scores (sklearn sees it as a label), is never
    # matched, and a node unassigned on both sides is not moved.
    nid = ids("a", "b", "c", "d", "e", "f")
    a = np.array([0, 0, 0, 1, 1, -1])
    b = np.array([1, 1, -1, 0, 0, -1])
    d = compare_memberships(nid, a, nid, b)
    assert d.ari == pytest.approx(adjusted_rand_score(a, b), abs=1e-12)
    assert d.nmi == pytest.approx(normalized_mutual_info_score(a, b), abs=1e-12)
    assert d.ami == pytest.approx(adjusted_mutual_info_score(a, b), abs=1e-12)
    assert d.k_a == 2 and d.k_b == 2
    assert [(m.a, m.b) for m in d.matches] == [(0, 1), (1, 0)]
    assert d.moved_nodes() == [{"node": "c", "from": 0, "to": "unassigned", "from_match": 1}]
    out = d.to_dict()
    assert out["contingency"]["rows"] == ["unassigned", 0, 1]


def test_matching_is_optimal_against_brute_force():
    # Brute force over all injective assignments (common practice oracle).
    for seed in range(15):
        rng = np.random.default_rng(seed)
        ka, kb = int(rng.integers(1, 6)), int(rng.integers(1, 6))
        a = rng.integers(0, ka, 60)
        b = np.where(rng.random(60) < 0.5, a % kb, rng.integers(0, kb, 60))
        t = contingency_table(a, b)
        dense = t.dense()
        r, c = dense.shape
        best = 0
        if r <= c:
            for perm in itertools.permutations(range(c), r):
                best = max(best, sum(dense[i, perm[i]] for i in range(r)))
        else:
            for perm in itertools.permutations(range(r), c):
                best = max(best, sum(dense[perm[j], j] for j in range(c)))
        got = match_communities(t)
        assert sum(m.overlap for m in got) == best
        assert len({m.a for m in got}) == len(got) == len({m.b for m in got})


def test_matching_many_components_and_ties():
    # Identical partitions into 2000 pairs: 2000 one-cell components.
    a = np.arange(4000) // 2
    b = (a * 7919) % 2000
    got = match_communities(contingency_table(a, b))
    assert len(got) == 2000 and all(m.b == (m.a * 7919) % 2000 for m in got)
    # Tie on overlap broken by Jaccard: A0 = {0,1}, A1 = {2..9}; B0 = {0,1,2,3},
    # the rest of B unassigned. Overlaps with B0: 2 and 2 (a tie); Jaccard
    # 2/4 = 0.5 and 2/10 = 0.2, so A0 gets B0.
    a = np.array([0, 0, 1, 1, 1, 1, 1, 1, 1, 1])
    b = np.array([0, 0, 0, 0, -1, -1, -1, -1, -1, -1])
    got = match_communities(contingency_table(a, b))
    assert [(x.a, x.b, x.overlap, x.jaccard) for x in got] == [(0, 0, 2, 0.5)]
    # Same with the A labels swapped: the choice follows the Jaccard, not the label.
    got = match_communities(contingency_table(1 - a, b))
    assert [(x.a, x.b) for x in got] == [(1, 0)]


def test_moved_limit_and_json_output():
    rng = np.random.default_rng(8)
    nid = np.array(sorted(f"n{i:05d}" for i in range(2000)))
    a = rng.integers(0, 6, 2000)
    b = np.where(rng.random(2000) < 0.2, rng.integers(0, 6, 2000), a)
    full = compare_memberships(nid, a, nid, b)
    cut = compare_memberships(nid, a, nid, b, moved_limit=10)
    assert cut.moved == full.moved > 10
    assert cut.moved_nodes() == full.moved_nodes()[:10]
    out = json.loads(json.dumps(cut.to_dict()))
    for key in ("ari", "nmi", "nmi_normalization", "ami", "vi_nats", "vi_bits", "moved",
                "moved_nodes", "only_in_a", "only_in_b", "coverage", "matches", "events",
                "contingency", "n_common", "k_a", "k_b", "event_thresholds"):
        assert key in out
    assert out["moved_nodes_truncated"] is True and len(out["moved_nodes"]) == 10
    assert set(out["moved_nodes"][0]) == {"node", "from", "to", "from_match"}
    assert set(out["matches"][0]) == {"a", "b", "overlap", "jaccard", "size_a", "size_b"}
    assert set(out["contingency"]) >= {"rows", "cols", "cells", "shape", "nnz", "row_sizes",
                                       "col_sizes"}
    assert "counts" not in out["contingency"]
    rows_out = cut.to_dict(moved_rows=True)["moved_nodes"]
    assert rows_out == [[m["node"], m["from"], m["to"], m["from_match"]]
                        for m in cut.moved_nodes()]
    assert out["event_thresholds"] == {"jaccard": 0.3, "share": 0.5, "min_part": 0.1,
                                       "size_change": 0.1}
    # Moved nodes are exactly those whose B label differs from the match of their A label.
    match = {m["a"]: m["b"] for m in out["matches"]}
    expected = [str(v) for v, x, y in zip(nid, a, b) if match.get(int(x)) != int(y)]
    assert [m["node"] for m in full.moved_nodes()] == expected
    for m in ("geometric", "max", "min"):
        d = compare_memberships(nid, a, nid, b, nmi_normalization=m)
        assert d.to_dict()["nmi_normalization"] == m
        assert d.nmi == pytest.approx(normalized_mutual_info_score(a, b, average_method=m),
                                      abs=1e-12)  # sklearn.metrics
        assert d.ami == pytest.approx(adjusted_mutual_info_score(a, b, average_method=m),
                                      abs=1e-12)  # sklearn.metrics


def test_input_errors_are_clear():
    nid = ids("a", "b", "c")
    lab = np.array([0, 1, 1])
    with pytest.raises(UsageError, match="sorted ascending"):
        compare_memberships(np.array(["b", "a", "c"]), lab, nid, lab)
    with pytest.raises(UsageError, match="sorted ascending"):
        compare_memberships(np.array(["a", "a", "c"]), lab, nid, lab)
    with pytest.raises(UsageError, match="aligned"):
        compare_memberships(nid, np.array([0, 1]), nid, lab)
    with pytest.raises(UsageError, match="-1"):
        compare_memberships(nid, np.array([0, -3, 1]), nid, lab)
    with pytest.raises(UsageError, match="integer"):
        compare_memberships(nid, np.array([0.0, 1.0, 1.0]), nid, lab)
    with pytest.raises(UsageError, match="str node ids"):
        compare_memberships(np.array([1, 2, 3]), lab, nid, lab)
    with pytest.raises(ParameterError, match="nodes"):
        compare_memberships(nid, lab, nid, lab, nodes="some")
    with pytest.raises(ParameterError, match="normalization"):
        compare_memberships(nid, lab, nid, lab, nmi_normalization="sum")
    with pytest.raises(ParameterError, match="moved_limit"):
        compare_memberships(nid, lab, nid, lab, moved_limit=-1)
    with pytest.raises(ParameterError, match="jaccard"):
        compare_memberships(nid, lab, nid, lab, event_thresholds={"jaccard": 0.0})
    with pytest.raises(ParameterError, match="unknown event threshold"):
        compare_memberships(nid, lab, nid, lab, event_thresholds={"overlap": 0.5})
    # Object arrays of str are accepted like numpy str arrays.
    d = compare_memberships(np.array(["a", "b", "c"], dtype=object), lab, nid, lab)
    assert d.ari == 1.0


def test_packed_ids_of_one_version_give_the_same_diff_as_strings():
    # runs of one stored version: the same PackedNodeIds object on both sides is never decoded
    # whole, and the result equals the one over str arrays; the moved nodes are those whose A
    # community is not matched to their B community (recomputed here from the matches), with
    # ARI from sklearn.metrics.adjusted_rand_score
    from workspace.domain import PackedNodeIds, encode_node_ids

    rng = np.random.default_rng(9)
    names = np.array(sorted({f"näme-{i:05d}," * (1 + i % 3) for i in range(600)}))
    a = rng.integers(0, 5, names.size)
    b = (a + (rng.random(names.size) < 0.1)) % 5
    b[:7] = -1
    packed = PackedNodeIds(*encode_node_ids(names))
    for limit in (None, 3, 0):
        plain = compare_memberships(names, a, names, b, moved_limit=limit).to_dict(moved_rows=True)
        fast = compare_memberships(packed, a, packed, b, moved_limit=limit).to_dict(moved_rows=True)
        assert fast == plain
    assert packed._decoded is None  # only the listed ids were decoded
    d = compare_memberships(packed, a, packed, b)
    assert d.ari == pytest.approx(adjusted_rand_score(a, b), abs=1e-12)
    match = {m.a: m.b for m in d.matches}
    moved = [n for n, x, y in zip(names.tolist(), a.tolist(), b.tolist()) if match.get(x) != y]
    assert d.moved_ids.tolist() == moved
    # two different packed objects (two versions) are aligned by their decoded strings
    other = PackedNodeIds(*encode_node_ids(names[5:]))
    assert compare_memberships(packed, a, other, b[5:]).to_dict() == \
        compare_memberships(names, a, names[5:], b[5:]).to_dict()


@pytest.mark.parametrize("cap", [None, 0])
def test_two_packed_versions_align_like_their_strings_without_decoding(monkeypatch, cap):
    """Two stored versions (two PackedNodeIds) are aligned from their bytes: equal lists at once, a
    few differences by merging the sorted lists (workspace.domain.merge_sorted_ids), none decoded;
    with the merge declined (cap 0) by the decoded strings. Every field equals the alignment of the
    plain str arrays, the reference being Python set algebra on the names."""
    from workspace import domain
    from workspace.domain import PackedNodeIds, encode_node_ids

    if cap is not None:
        monkeypatch.setattr(domain, "MERGE_MAX_DIFFERENCES", cap)
    rng = np.random.default_rng(21)
    pool = sorted({f"stop-{i:04d}" for i in range(400)} | {"Ärger", "日本", "x" * 4096, "stop-", ""})
    for trial in range(6):
        r = rng.random(len(pool))
        names_a = np.array([x for x, v in zip(pool, r) if v < 0.97])
        names_b = np.array([x for x, v in zip(pool, r) if v > 0.02]) if trial else names_a.copy()
        pa_, pb_ = PackedNodeIds(*encode_node_ids(names_a)), PackedNodeIds(*encode_node_ids(names_b))
        got, ref = align_nodes(pa_, pb_), align_nodes(names_a, names_b)
        for field in ("common_a", "common_b", "only_a", "only_b"):
            assert getattr(got, field).tolist() == getattr(ref, field).tolist(), (trial, field)
        assert (got.n_a, got.n_b) == (ref.n_a, ref.n_b)
        shared = set(names_a.tolist()) & set(names_b.tolist())
        assert names_a[got.common_a].tolist() == sorted(shared) == names_b[got.common_b].tolist()
        assert names_b[got.only_b].tolist() == sorted(set(names_b.tolist()) - shared)
        if cap is None:
            assert pa_._decoded is None and pb_._decoded is None
