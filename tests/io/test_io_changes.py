"""structural_changes against a hand-constructed pair and against Python set algebra."""

from __future__ import annotations

import numpy as np
import pytest

from workspace.domain import GraphData
from workspace.io import structural_changes


def graph_from(edges: dict[tuple[str, str], float], extra_nodes=()) -> GraphData:
    """Canonical GraphData built with plain Python sorting (independent of the readers)."""
    ids = sorted({x for e in edges for x in e} | set(extra_nodes))
    index = {x: i for i, x in enumerate(ids)}
    rows = sorted((min(index[a], index[b]), max(index[a], index[b]), w)
                  for (a, b), w in edges.items())
    return GraphData(node_ids=np.array(ids), edge_u=np.array([r[0] for r in rows], dtype=np.int64),
                     edge_v=np.array([r[1] for r in rows], dtype=np.int64),
                     weight=np.array([r[2] for r in rows], dtype=np.float64))


def test_hand_constructed_pair():
    old = graph_from({("a", "b"): 1.0, ("b", "c"): 2.0, ("c", "d"): 1.0, ("d", "e"): 4.0},
                     extra_nodes=["lonely"])
    new = graph_from({("a", "b"): 1.0, ("b", "c"): 3.0, ("c", "f"): 1.0, ("a", "f"): 5.0,
                      ("d", "e"): 4.0})
    # by hand: node f added, node lonely removed; edges a-f, c-f added; c-d removed;
    # b-c weight 2 -> 3
    changes = structural_changes(old, new)
    assert {k: changes[k] for k in ("nodes_added", "nodes_removed", "edges_added",
                                    "edges_removed", "weights_changed")} == {
        "nodes_added": 1, "nodes_removed": 1, "edges_added": 2, "edges_removed": 1,
        "weights_changed": 1}
    assert changes["listings"] == {
        "nodes_added": ["f"], "nodes_removed": ["lonely"],
        "edges_added": [["a", "f"], ["c", "f"]], "edges_removed": [["c", "d"]],
        "weights_changed": [["b", "c", 2.0, 3.0]]}
    assert changes["truncated"] is False
    limited = structural_changes(old, new, limit=1)
    assert limited["edges_added"] == 2 and limited["listings"]["edges_added"] == [["a", "f"]]
    assert limited["truncated"] is True
    same = structural_changes(old, old)
    assert all(same[k] == 0 for k in ("nodes_added", "nodes_removed", "edges_added",
                                      "edges_removed", "weights_changed"))
    # what the service answers without loading two versions of equal content hash
    from workspace.io.changes import no_changes

    assert no_changes() == same


def test_random_pair_matches_set_algebra():
    rng = np.random.default_rng(5)

    def random_edges(n_nodes, m):
        out = {}
        while len(out) < m:
            a, b = rng.integers(0, n_nodes, 2)
            if a != b:
                out[tuple(sorted((f"n{a}", f"n{b}")))] = float(rng.integers(1, 4))
        return out

    e_old, e_new = random_edges(300, 2000), random_edges(330, 2100)
    for key in list(e_old)[:500]:  # shared edges, some with new weights
        e_new[key] = e_old[key] if rng.random() < 0.7 else e_old[key] + 1
    old, new = graph_from(e_old), graph_from(e_new)
    changes = structural_changes(old, new)
    # reference: Python set algebra on (sorted) id pairs
    n_old = set(old.node_ids.tolist())
    n_new = set(new.node_ids.tolist())
    assert changes["listings"]["nodes_added"] == sorted(n_new - n_old)
    assert changes["listings"]["nodes_removed"] == sorted(n_old - n_new)
    assert changes["listings"]["edges_added"] == [list(e) for e in sorted(set(e_new) - set(e_old))]
    assert changes["listings"]["edges_removed"] == [list(e)
                                                    for e in sorted(set(e_old) - set(e_new))]
    changed = sorted(k for k in set(e_old) & set(e_new) if e_old[k] != e_new[k])
    assert changes["listings"]["weights_changed"] == [[a, b, e_old[(a, b)], e_new[(a, b)]]
                                                      for a, b in changed]
    assert changes["weights_changed"] == len(changed) > 0


def _packed(graph: GraphData) -> GraphData:
    from workspace.domain import PackedNodeIds, encode_node_ids

    return GraphData(PackedNodeIds(*encode_node_ids(graph.node_ids)), graph.edge_u, graph.edge_v, graph.weight)


def test_packed_ids_and_same_node_sets_match_python_set_algebra():
    # ids as stored (PackedNodeIds: never decoded but for the listed ones) on either side, and two
    # versions of the same node set (only weights and edges changed): the listings are those of
    # Python set algebra, sorted by code point (non-ASCII and 4096-byte ids among them)
    rng = np.random.default_rng(11)
    names = [f"n{i}" for i in range(60)] + ["Ärger", "日本", "ü" * 3, "x" * 4096, "z"]

    def random_edges(m):
        out = {}
        while len(out) < m:
            a, b = rng.choice(len(names), 2, replace=False)
            out[tuple(sorted((names[a], names[b])))] = float(rng.integers(1, 4))
        return out

    e_old = random_edges(400)
    e_new = dict(list(e_old.items())[:300])
    e_new.update(random_edges(80))
    for key in list(e_new)[:40]:
        e_new[key] += 1.0
    every = set(names)
    for extra_old, extra_new in (((), ()), (("only-old",), ("only-new", "ä-new"))):
        old = graph_from(e_old, extra_nodes=list(every) + list(extra_old))
        new = graph_from(e_new, extra_nodes=list(every) + list(extra_new))
        expect = {
            "nodes_added": sorted(set(extra_new)), "nodes_removed": sorted(set(extra_old)),
            "edges_added": [list(e) for e in sorted(set(e_new) - set(e_old))],
            "edges_removed": [list(e) for e in sorted(set(e_old) - set(e_new))],
            "weights_changed": [[a, b, e_old[(a, b)], e_new[(a, b)]]
                                for a, b in sorted(k for k in set(e_old) & set(e_new) if e_old[k] != e_new[k])],
        }
        for a, b in ((old, new), (_packed(old), _packed(new)), (_packed(old), new)):
            got = structural_changes(a, b)
            assert got["listings"] == expect
            assert all(got[k] == len(v) for k, v in expect.items())
            short = structural_changes(a, b, limit=2)
            assert short["listings"] == {k: v[:2] for k, v in expect.items()} and short["truncated"]


def _expected(e_old, e_new, n_old, n_new):
    """The five listings by Python set algebra, sorted by code point."""
    return {
        "nodes_added": sorted(n_new - n_old), "nodes_removed": sorted(n_old - n_new),
        "edges_added": [list(e) for e in sorted(set(e_new) - set(e_old))],
        "edges_removed": [list(e) for e in sorted(set(e_old) - set(e_new))],
        "weights_changed": [[a, b, e_old[(a, b)], e_new[(a, b)]]
                            for a, b in sorted(k for k in set(e_old) & set(e_new) if e_old[k] != e_new[k])],
    }


@pytest.mark.parametrize("window", [1, 2, 3, 4096])
def test_merged_ids_and_the_hash_sets_give_python_set_algebra(monkeypatch, window):
    """Two sorted id lists that differ in a few ids are merged in order (domain.merge_sorted_ids), in
    windows of every size down to one id (domain.merge_sorted_ids); more differences than MERGE_MAX_DIFFERENCES, and the hash
    sets of Arrow decide. Both, with ids packed or not, give Python set algebra's listings: ids
    removed and added at the start, the end, next to each other and at window edges, non-ASCII and
    4096-byte ids, ids that are prefixes of others."""
    from workspace import domain
    from workspace.io import changes as ch

    monkeypatch.setattr(domain, "MERGE_FIRST_WINDOW", window)
    monkeypatch.setattr(ch, "SEARCH_CHUNK", window)        # the edge keys searched chunk by chunk too
    monkeypatch.setattr(domain, "MERGE_MAX_WINDOW", max(window, 8))
    merged = []
    real = domain.merge_sorted_ids
    monkeypatch.setattr(ch, "merge_sorted_ids", lambda a, b: merged.append(real(a, b)) or merged[-1])
    rng = np.random.default_rng(window)
    pool = sorted({f"n{i}" for i in range(120)} | {"Ärger", "日本", "ü" * 3, "x" * 4096, "z", "n1x", "n", ""})
    for trial in range(12):
        keep = rng.random(len(pool))
        n_old = {x for x, r in zip(pool, keep) if r < 0.9}
        n_new = {x for x, r in zip(pool, keep) if r > 0.1 or x in n_old and r > 0.05}
        if trial == 0:
            n_old, n_new = set(pool[1:]), set(pool[:-1])      # the first only in new, the last only in old

        def edges(nodes, m):
            nodes = sorted(nodes)
            out = {}
            while len(out) < m:
                a, b = rng.choice(len(nodes), 2, replace=False)
                out[tuple(sorted((nodes[a], nodes[b])))] = float(rng.integers(1, 3))
            return out

        common = sorted(n_old & n_new)
        e_old, e_new = edges(n_old, 150), edges(n_new, 150)
        shared = edges(common, 60)
        e_old.update(shared)
        e_new.update({k: v + float(rng.integers(0, 2)) for k, v in shared.items()})
        old, new = graph_from(e_old, extra_nodes=n_old), graph_from(e_new, extra_nodes=n_new)
        expect = _expected(e_old, e_new, n_old, n_new)
        for cap in (domain.MERGE_MAX_DIFFERENCES, 0):
            monkeypatch.setattr(domain, "MERGE_MAX_DIFFERENCES", cap)
            for a, b in ((old, new), (_packed(old), _packed(new))):
                merged.clear()
                got = structural_changes(a, b)
                assert got["listings"] == expect, (trial, cap)
                assert all(got[k] == len(v) for k, v in expect.items())
                assert (merged[0] is None) == (cap == 0)      # the path meant was taken
        monkeypatch.setattr(domain, "MERGE_MAX_DIFFERENCES", 50_000)


def test_merged_ids_decline_unsorted_or_repeated_lists_and_too_many_differences():
    """The merge relies on both lists being strictly increasing; a list that is not (or too many
    differences) returns None, and the caller uses the hash sets, which rely on neither."""
    import pyarrow as pa

    from workspace.domain import merge_sorted_ids as _merged_ids

    ok = pa.array(["a", "b", "d"])
    assert _merged_ids(pa.array(["b", "a"]), ok) is None
    assert _merged_ids(ok, pa.array(["a", "a", "b"])) is None
    assert _merged_ids(ok, pa.array(["c", "e", "f", "g"]), max_differences=3) is None
    removed, added, pos_a, pos_b, size = _merged_ids(ok, pa.array(["a", "c", "d", "e"]))
    # by hand: union a b c d e; b only in the first list, c and e only in the second
    assert removed.tolist() == [1] and added.tolist() == [1, 3] and size == 5
    assert pos_a.tolist() == [0, 1, 3] and pos_b.tolist() == [0, 2, 3, 4]


def test_graphs_of_one_weight_and_of_two_uniform_weights():
    """Two unweighted versions (every weight 1) have no weight change without comparing weights;
    one weight everywhere in each but a different one (1 and 2) changes every common edge."""
    e_old = {("a", "b"): 1.0, ("b", "c"): 1.0, ("c", "d"): 1.0}
    e_new = {("a", "b"): 1.0, ("b", "c"): 1.0, ("d", "e"): 1.0}
    got = structural_changes(graph_from(e_old), graph_from(e_new))
    assert got["listings"] == _expected(e_old, e_new, {"a", "b", "c", "d"}, {"a", "b", "c", "d", "e"})
    assert got["weights_changed"] == 0
    doubled = {k: 2.0 for k in e_new}
    got = structural_changes(graph_from(e_old), graph_from(doubled))
    assert got["listings"]["weights_changed"] == [["a", "b", 1.0, 2.0], ["b", "c", 1.0, 2.0]]
