"""Community events and tracking on constructed cases.

Each case is built by hand; the expected events follow from the documented
definitions (event vocabulary of Palla, Barabási & Vicsek 2007; Jaccard
continuation of Greene, Doyle & Cunningham 2010) with the default
thresholds jaccard 0.3, share 0.5, min_part 0.1, size_change 0.1. The
overlaps, shares and Jaccard indices that decide each case are worked out in
the comments.
"""

from __future__ import annotations

import numpy as np
import pytest

from workspace.compare import (
    EventThresholds, community_events, compare_memberships, contingency_table,
    track_memberships,
)


def node_ids(n):
    return np.array([f"n{i:04d}" for i in range(n)])


def kinds(events):
    return [(e.kind, tuple(e.a), tuple(e.b)) for e in events]


def test_split_into_two():
    # A: 0 = nodes 0..99, 1 = 100..149.  B: 0 = 0..59, 1 = 60..99, 2 = 100..149.
    # A0->B0: J = 60/100 = 0.6; A0->B1: J = 40/100 = 0.4 (both >= 0.3): split.
    # A1->B2: J = 1, sizes equal: kept.
    a = np.r_[np.zeros(100, int), np.ones(50, int)]
    b = np.r_[np.zeros(60, int), np.ones(40, int), np.full(50, 2)]
    ev = community_events(contingency_table(a, b))
    assert kinds(ev) == [("kept", (1,), (2,)), ("split", (0,), (0, 1))]
    split = ev[1].to_dict()
    assert split["size_a"] == 100
    assert [(p["b"], p["overlap"], p["share_of_a"]) for p in split["parts"]] == \
        [(0, 60, 0.6), (1, 40, 0.4)]


def test_split_into_many_small_parts():
    # A0 (100 nodes) falls into 5 parts of 20: each J = 0.2 < 0.3, but each part
    # comes wholly from A0 (share of B = 1 >= 0.5) and holds 0.2 >= 0.1 of A0.
    a = np.zeros(100, int)
    b = np.arange(100) // 20
    ev = community_events(contingency_table(a, b))
    assert kinds(ev) == [("split", (0,), (0, 1, 2, 3, 4))]


def test_merge_of_two():
    # Reverse of the split: A0 = 0..59, A1 = 60..99, A2 = 100..149;
    # B0 = 0..99, B1 = 100..149.
    a = np.r_[np.zeros(60, int), np.ones(40, int), np.full(50, 2)]
    b = np.r_[np.zeros(100, int), np.ones(50, int)]
    ev = community_events(contingency_table(a, b))
    assert kinds(ev) == [("kept", (2,), (1,)), ("merged", (0, 1), (0,))]
    parts = ev[1].to_dict()["parts"]
    assert [(p["a"], p["overlap"], p["share_of_b"]) for p in parts] == \
        [(0, 60, 0.6), (1, 40, 0.4)]


def test_new_and_dissolved():
    # A: three communities of 100 (0..99, 100..199, 200..299) plus D = 300..329.
    # B: the three keep 90 of their own nodes each plus 10 of D each (sizes 100),
    # and their other 10 nodes each form N (30 nodes).
    # D -> each B_i: 10 nodes, share of D 1/3 < 0.5, share of B_i 0.1, J = 10/120:
    #   not linked -> D dissolved (largest destination overlap 10).
    # N <- each A_i: 10 nodes, share of N 1/3 < 0.5, share of A_i 0.1,
    #   J = 10/120: not linked -> N new.
    # A_i -> B_i: J = 90/110 = 0.82, sizes 100 -> 100: kept.
    a = np.r_[np.repeat([0, 1, 2], 100), np.full(30, 3)]
    b = a.copy()
    for i in range(3):
        b[i * 100 + 90:i * 100 + 100] = 7                    # N
        b[300 + 10 * i:300 + 10 * (i + 1)] = i               # D's nodes join B_i
    ev = community_events(contingency_table(a, b))
    assert kinds(ev) == [("kept", (0,), (0,)), ("kept", (1,), (1,)), ("kept", (2,), (2,)),
                         ("dissolved", (3,), ()), ("new", (), (7,))]
    d = ev[3].to_dict()
    assert d["size_a"] == 30 and d["largest_destination"] == {"b": 0, "overlap": 10}
    n = ev[4].to_dict()
    assert n["size_b"] == 30 and n["largest_source"] == {"a": 0, "overlap": 10}


def test_grown_and_shrunk_across_versions():
    # Version 2 adds 30 nodes to community 0 (100 -> 130 > 1.1 * 100: grown) and
    # removes 30 of community 1's 100 (-> 70 < 0.9 * 100: shrunk); nodes="all".
    ids_a = node_ids(200)
    lab_a = np.repeat([0, 1], 100)
    ids_b = np.r_[node_ids(200)[:170], np.array([f"x{i:03d}" for i in range(30)])]
    lab_b = np.r_[np.zeros(100, int), np.ones(70, int), np.zeros(30, int)]
    order = np.argsort(ids_b)
    d = compare_memberships(ids_a, lab_a, ids_b[order], lab_b[order], nodes="all")
    assert kinds(d.events) == [("grown", (0,), (0,)), ("shrunk", (1,), (1,))]
    assert (d.only_in_a, d.only_in_b) == (30, 30)
    assert d.moved == 0
    # With nodes="common" sizes count shared nodes only (100 -> 100 and 70 -> 70),
    # so both communities are kept: added / removed nodes are not scored.
    d = compare_memberships(ids_a, lab_a, ids_b[order], lab_b[order])
    assert kinds(d.events) == [("kept", (0,), (0,)), ("kept", (1,), (1,))]


def test_thresholds_are_explicit_and_change_the_outcome():
    # A0 = 100 nodes -> B0 gets 90, B1 gets 10. The 10-node part holds 0.1 of A0
    # (= min_part 0.1, so linked): split. With min_part 0.2 it is not linked:
    # A0 -> B0 is one-to-one (90 = 0.9 * 100, not below: kept) and B1 is new.
    a = np.zeros(100, int)
    b = np.r_[np.zeros(90, int), np.ones(10, int)]
    t = contingency_table(a, b)
    assert kinds(community_events(t)) == [("split", (0,), (0, 1))]
    ev = community_events(t, {"min_part": 0.2})
    assert kinds(ev) == [("kept", (0,), (0,)), ("new", (), (1,))]
    d = compare_memberships(node_ids(100), a, node_ids(100), b,
                            event_thresholds=EventThresholds(min_part=0.2))
    assert d.to_dict()["event_thresholds"] == {"jaccard": 0.3, "share": 0.5, "min_part": 0.2,
                                               "size_change": 0.1}


def test_many_to_many_reports_split_and_merge():
    # A0 = 0..99 splits into B0 = 0..49 and B1 = 50..99 + 100..149 (all of A1):
    # A0->B0 J = 0.5; A0->B1: J = 50/150 = 0.33; A1->B1: J = 50/100 = 0.5.
    # A0 splits into {B0, B1}; B1 merges {A0, A1}.
    a = np.r_[np.zeros(100, int), np.ones(50, int)]
    b = np.r_[np.zeros(50, int), np.ones(100, int)]
    ev = community_events(contingency_table(a, b))
    assert kinds(ev) == [("split", (0,), (0, 1)), ("merged", (0, 1), (1,))]


def test_track_chain_of_three_runs():
    # run1: X = 0..59, Y = 60..119.
    # run2 (renamed): 5 = X, Y splits into 6 = 60..89 and 7 = 90..119.
    # run3: 0 = run2's 5 plus 6 (merge, 90 nodes), 1 = run2's 7 (kept).
    ids = node_ids(120)
    r1 = np.r_[np.zeros(60, int), np.ones(60, int)]
    r2 = np.r_[np.full(60, 5), np.full(30, 6), np.full(30, 7)]
    r3 = np.r_[np.zeros(90, int), np.ones(30, int)]
    tr = track_memberships([("r1", ids, r1), ("r2", ids, r2), ("r3", ids, r3)])
    assert len(tr.diffs) == 2
    assert kinds(tr.diffs[0].events) == [("kept", (0,), (5,)), ("split", (1,), (6, 7))]
    assert kinds(tr.diffs[1].events) == [("kept", (7,), (1,)), ("merged", (5, 6), (0,))]
    got = [([(i, c) for i, c, _ in t.path], t.origin, t.fate) for t in tr.threads]
    assert got == [
        ([(0, 0), (1, 5)], ("first_run",), ("merged",)),
        ([(0, 1)], ("first_run",), ("split",)),
        ([(1, 6)], ("split",), ("merged",)),
        ([(1, 7), (2, 1)], ("split",), ("last_run",)),
        ([(2, 0)], ("merged",), ("last_run",)),
    ]
    out = tr.to_dict()
    assert out["runs"] == ["r1", "r2", "r3"]
    assert out["steps"][0]["from_run"] == "r1" and out["steps"][1]["to_run"] == "r3"
    assert out["lineage"][0]["path"] == [{"run": "r1", "community": 0, "size": 60},
                                         {"run": "r2", "community": 5, "size": 60}]
    # Every (run, community) lies on exactly one thread.
    seen = [(i, c) for t in tr.threads for i, c, _ in t.path]
    assert sorted(seen) == sorted({(0, 0), (0, 1), (1, 5), (1, 6), (1, 7), (2, 0), (2, 1)})


def test_track_needs_two_runs():
    from workspace.errors import UsageError
    with pytest.raises(UsageError):
        track_memberships([("only", node_ids(3), np.zeros(3, int))])
