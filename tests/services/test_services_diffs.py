"""Diffs through the service layer: two runs on two versions of a network (aligned by node id),
the sparse contingency, the row form of moved nodes, the dense table limit, and the errors.

References: scikit-learn (adjusted_rand_score, normalized_mutual_info_score,
adjusted_mutual_info_score, contingency_matrix) on the labels read back from the store; the
karate club graph as shipped by networkx (Zachary 1977).
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from sklearn.metrics import adjusted_mutual_info_score, adjusted_rand_score, normalized_mutual_info_score
from sklearn.metrics.cluster import contingency_matrix

from graphs import import_adjacency
from workspace.errors import NotFoundError, ParameterError
from workspace.services import diffs, runs


def _attach(store, tmp_path, ref, names, labels, label):
    path = tmp_path / f"{label}.csv"
    path.write_text("node,community\n" + "".join(f"{v},{c}\n" for v, c in zip(names, labels)))
    return runs.attach(store, path, ref, label=label)["run"]


@pytest.fixture
def two_versions(store, tmp_path):
    # version 1: the karate club; version 2: the same club without members m30..m33
    G = nx.karate_club_graph()
    A = nx.to_scipy_sparse_array(G, nodelist=range(34), weight="weight")
    names = [f"m{i:02d}" for i in range(34)]
    import_adjacency(store, A, tmp_path, project="club", network="karate", names=names)
    import_adjacency(store, A[:30][:, :30], tmp_path, project="club", network="karate", names=names[:30])
    from workspace.services.networks import load_graph

    names_b = load_graph(store, "club/karate@2")[1].node_ids.tolist()  # members left with an edge
    rng = np.random.default_rng(4)
    la = rng.integers(0, 6, 34)
    pos = {v: i for i, v in enumerate(names)}
    lb = np.array([la[pos[v]] % 5 if rng.random() > 0.3 else rng.integers(0, 5) for v in names_b])
    ra = _attach(store, tmp_path, "club/karate@1", names, la, "one")
    rb = _attach(store, tmp_path, "club/karate@2", names_b, lb, "two")
    return ra, rb, len(names_b)


def test_diff_across_versions_matches_sklearn_on_the_shared_nodes(store, two_versions):
    ra, rb, n_b = two_versions
    ids_a, a, _ = runs.load_membership(store, ra)
    ids_b, b, _ = runs.load_membership(store, rb)
    d = diffs.diff_runs(store, ra, rb, moved_rows=True)
    shared = np.isin(ids_a, ids_b)
    sa = a[shared]
    sb = b[np.isin(ids_b, ids_a)]
    assert d["n_common"] == n_b < 34 and d["only_in_a"] == 34 - n_b and d["only_in_b"] == 0
    assert d["ari"] == pytest.approx(adjusted_rand_score(sa, sb), abs=1e-12)
    assert d["nmi"] == pytest.approx(normalized_mutual_info_score(sa, sb), abs=1e-12)
    assert d["ami"] == pytest.approx(adjusted_mutual_info_score(sa, sb), abs=1e-12)
    ref = contingency_matrix(sa, sb, sparse=True).todok()
    rows, cols = np.unique(sa).tolist(), np.unique(sb).tolist()
    assert {(x, y): n for x, y, n in d["contingency"]["cells"]} == \
        {(rows[i], cols[j]): int(v) for (i, j), v in ref.items()}
    # rows [node, from, to, from_match], consistent with the matches
    match = {m["a"]: m["b"] for m in d["matches"]}
    for node, x, y, m in d["moved_nodes"]:
        assert match.get(x) == m and m != y
    assert d["moved"] == len(d["moved_nodes"])
    # the default (dict) form carries the same nodes
    plain = diffs.diff_runs(store, ra, rb)
    assert [[m["node"], m["from"], m["to"], m["from_match"]] for m in plain["moved_nodes"]] == \
        d["moved_nodes"]
    assert "counts" not in plain["contingency"]
    dense = diffs.diff_runs(store, ra, rb, dense_table=True)["contingency"]["counts"]
    assert dense == contingency_matrix(sa, sb).tolist()


def test_diff_errors(store, two_versions, tmp_path):
    ra = two_versions[0]
    with pytest.raises(NotFoundError, match="no run 999"):
        diffs.diff_runs(store, ra, 999)
    # a table over the dense limit refuses the dense form
    names = [f"m{i:02d}" for i in range(34)]
    fine = _attach(store, tmp_path, "club/karate@1", names, np.arange(34), "singletons")
    from workspace.compare.diff import DENSE_LIMIT

    assert 34 * 34 <= DENSE_LIMIT  # still small: allowed
    assert len(diffs.diff_runs(store, fine, fine, dense_table=True)["contingency"]["counts"]) == 34
    with pytest.raises(ParameterError, match="dense form"):
        import workspace.compare.diff as diff_module

        old = diff_module.DENSE_LIMIT
        diff_module.DENSE_LIMIT = 100
        try:
            diffs.diff_runs(store, fine, fine, dense_table=True)
        finally:
            diff_module.DENSE_LIMIT = old


def test_diff_decodes_only_the_listed_ids_and_each_version_once(store, tmp_path, monkeypatch):
    # two runs of one version: no full decode of its node ids, only the moved nodes listed are
    # decoded; a track over two versions that differ in a few ids merges their packed lists and
    # decodes no version whole either, and with the merge declined (too many differences) decodes
    # each version once. Reference for the values:
    # sklearn's adjusted_rand_score on the same labels (scikit-learn, sklearn.metrics), and the
    # moved nodes recomputed from the matches the diff reports.
    from workspace import domain
    from workspace.store import repo

    G = nx.karate_club_graph()
    A = nx.to_scipy_sparse_array(G, nodelist=range(34), weight="weight")
    names = [f"m{i:02d}" for i in range(34)]
    import_adjacency(store, A, tmp_path, project="club", network="karate", names=names)
    import_adjacency(store, A[:30][:, :30], tmp_path, project="club", network="karate", names=names[:30])
    la = np.array([G.nodes[i]["club"] == "Mr. Hi" for i in range(34)], dtype=int)
    lb = np.arange(34) % 3
    ra = _attach(store, tmp_path, "club/karate@1", names, la, "clubs")
    rb = _attach(store, tmp_path, "club/karate@1", names, lb, "thirds")
    from workspace.services.networks import load_graph

    names_2 = load_graph(store, "club/karate@2")[1].node_ids.tolist()  # members left with an edge
    rc = _attach(store, tmp_path, "club/karate@2", names_2, np.arange(len(names_2)) % 2, "halves")
    ids_1, stored_a, _ = runs.load_membership(store, ra)  # labels as stored (renumbered)
    stored_b = runs.load_membership(store, rb)[1]
    decoded = []
    real = domain.decode_node_ids

    def counting(offsets, data):
        decoded.append(len(offsets) - 1)
        return real(offsets, data)

    monkeypatch.setattr(domain, "decode_node_ids", counting)
    monkeypatch.setattr(repo, "decode_node_ids", counting)
    d = diffs.diff_runs(store, ra, rb, moved_rows=True)
    assert d["ari"] == pytest.approx(adjusted_rand_score(la, lb), abs=1e-12)
    match = {m["a"]: m["b"] for m in d["matches"]}
    expected = sorted(v for v, x, y in zip(ids_1.tolist(), stored_a.tolist(), stored_b.tolist())
                      if match.get(x) != y)
    assert [row[0] for row in d["moved_nodes"]] == expected and d["moved"] == len(expected) > 0
    assert sum(decoded) == len(expected)  # only the listed ids, never all 34
    decoded.clear()
    assert diffs.diff_runs(store, ra, rb, moved_limit=0)["moved"] == len(expected)
    assert decoded == []  # nothing listed, nothing decoded
    decoded.clear()
    merged_track = diffs.track(store, [ra, rc, rb])
    assert max(decoded) < len(names_2)          # only listed ids (moved, in one version only)
    decoded.clear()
    monkeypatch.setattr(domain, "MERGE_MAX_DIFFERENCES", 0)
    assert diffs.track(store, [ra, rc, rb]) == merged_track
    assert sorted(decoded) == [len(names_2), 34]  # each version once, though version 1 is on two steps
