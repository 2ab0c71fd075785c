"""Tracked parameter sets and updates through the service layer (both store back ends).

An update runs every tracked set exactly once on the new version through the ordinary run path;
its change report holds the same diff as ``diff_runs`` on the same two runs; opting out runs
nothing; a failing or cancelled tracked run keeps the version; shown labels follow the matching.

References: planted-partition graphs from ``networkx.planted_partition_graph`` (Condon & Karp
2001); scikit-learn ``adjusted_rand_score`` / ``contingency_matrix`` and scipy's
``optimize.linear_sum_assignment`` (the Hungarian method, Kuhn 1955) as independent checks.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from scipy.optimize import linear_sum_assignment
from sklearn.metrics import adjusted_rand_score
from sklearn.metrics.cluster import contingency_matrix

from graphs import adjacency_to_csv
from workspace.domain import ImportPolicy
from workspace.errors import Cancelled, ConflictError, NotFoundError, UsageError
from workspace.services import diffs, networks, params, runs, tracking

GROUPS, SIZE = 4, 20


def _planted(seed: int, merge: bool = False):
    """Four planted groups of 20 (p_in 0.5, p_out 0.01); ``merge``: groups 2 and 3 densely joined."""
    G = nx.planted_partition_graph(GROUPS, SIZE, 0.5, 0.01, seed=seed)
    if merge:
        rng = np.random.default_rng(seed)
        for u in range(2 * SIZE, 3 * SIZE):
            for v in range(3 * SIZE, 4 * SIZE):
                if rng.random() < 0.5:
                    G.add_edge(u, v)
    return nx.to_scipy_sparse_array(G, nodelist=range(GROUPS * SIZE), format="csr")


def _import(store, tmp_path, A, names, name):
    f = adjacency_to_csv(A, tmp_path / f"{name}.csv", names)
    return networks.import_network(store, f, project="city", network="roads", policy=ImportPolicy(weight="weight"))


@pytest.fixture
def tracked(store, tmp_path):
    names = [f"n{i:03d}" for i in range(GROUPS * SIZE)]
    _import(store, tmp_path, _planted(1), names, "v1")
    params.save_params(store, "city/four", method="njw", k=4)
    params.save_params(store, "city/auto", method="njw", k="auto")
    first = {p: runs.launch(store, runs.prepare_run(store, "city/roads@1", params_ref=f"city/{p}"))["run"]
             for p in ("four", "auto")}
    tracking.add_tracked(store, "city/roads", "city/four")
    tracking.add_tracked(store, "city/roads", "city/auto")
    return names, first


def _runs_on(store, version: int) -> list[dict]:
    return [r for r in runs.list_runs(store, f"city/roads@{version}")]


def test_update_after_import_runs_each_tracked_set_once_and_reports_the_diff(store, tmp_path, tracked):
    names, first = tracked
    # version 2: groups 2 and 3 joined, two nodes gone, one node added
    A = _planted(1, merge=True)
    keep = [i for i in range(GROUPS * SIZE) if i not in (5, 6)]
    names2 = [names[i] for i in keep]
    B = A[keep][:, keep].tolil()
    B.resize(len(keep) + 1, len(keep) + 1)
    B[len(keep), 0] = B[0, len(keep)] = 1.0
    B[len(keep), 1] = B[1, len(keep)] = 1.0
    outcome = _import(store, tmp_path, B.tocsr(), names2 + ["n999"], "v2")
    upd = tracking.update_after_import(store, outcome)
    assert upd["status"] == "done" and upd["ref"] == "city/roads@2" and upd["previous"] == "city/roads@1"
    on_v2 = _runs_on(store, 2)
    assert len(on_v2) == 2 and {runs.show_run(store, r["run"])["param_set"] for r in on_v2} == {"city/four@1", "city/auto@1"}
    assert all(r["status"] == "done" for r in on_v2)
    report = tracking.change_report(store, upd["update"], moved_rows=True)
    assert [s["params"] for s in report["sets"]] == ["city/four@1", "city/auto@1"]
    for st in report["sets"]:
        assert st["previous_run"] == first[st["params"].split("/")[1].split("@")[0]]
        same = diffs.diff_runs(store, st["previous_run"], st["run"], moved_rows=True)
        assert st["diff"] == same  # the report is the diff of the same two runs
        assert st["diff"]["only_in_a"] == 2 and st["diff"]["only_in_b"] == 1
        # the ARI on the shared nodes, against scikit-learn
        ia, la, _ = runs.load_membership(store, st["previous_run"])
        ib, lb, _ = runs.load_membership(store, st["run"])
        shared = np.intersect1d(ia, ib)
        ref = adjusted_rand_score(la[np.searchsorted(ia, shared)], lb[np.searchsorted(ib, shared)])
        assert st["summary"]["ari"] == pytest.approx(ref, abs=1e-12)
        assert st["summary"]["nodes_added"] == 1 and st["summary"]["nodes_removed"] == 2
    # k=auto sees the joined groups as one: a merge event (planted structure, common practice)
    auto = report["sets"][1]
    assert auto["diff"]["k_b"] == 3 and auto["summary"]["events"].get("merged") == 1
    # the runs went through the ordinary run path: provenance names the update
    shown = runs.show_run(store, auto["run"])
    assert shown["provenance"]["update"] == {"update": upd["update"], "tracked": "city/auto@1"}
    assert tracking.list_updates(store, "city/roads")[0]["update"] == upd["update"]


def test_opting_out_runs_nothing(store, tmp_path, tracked):
    names, _ = tracked
    outcome = _import(store, tmp_path, _planted(2), names, "v2")
    assert tracking.update_after_import(store, outcome, track=False) is None
    assert _runs_on(store, 2) == [] and tracking.list_updates(store) == []
    # content equal to the latest version makes no version and runs nothing
    again = _import(store, tmp_path, _planted(2), names, "v2b")
    assert not again.new_version and tracking.update_after_import(store, again) is None


def test_a_failing_tracked_run_keeps_the_version_and_is_reported(store, tmp_path, tracked):
    names, _ = tracked
    params.save_params(store, "city/too-many", method="njw", k=90)  # more communities than the 80 nodes
    tracking.add_tracked(store, "city/roads", "city/too-many")
    # an eigensolver budget too small to converge: the run is recorded and fails in the computation
    params.save_params(store, "city/starved", method="njw", k=4, values={"max_matvecs": "10", "dense_threshold": "2"})
    tracking.add_tracked(store, "city/roads", "city/starved")
    outcome = _import(store, tmp_path, _planted(3), names, "v2")
    upd = tracking.update_after_import(store, outcome)
    assert upd["status"] == "failed"
    by = {s["params"]: s for s in upd["sets"]}
    # k=90 cannot be prepared on 80 nodes: reported failed, no run recorded
    assert by["city/too-many@1"]["status"] == "failed" and "k=90" in by["city/too-many@1"]["error"]
    assert by["city/too-many@1"]["run"] is None
    assert by["city/starved@1"]["status"] == "failed" and "max_matvecs" in by["city/starved@1"]["error"]
    assert runs.show_run(store, by["city/starved@1"]["run"])["status"] == "failed"
    assert by["city/four@1"]["status"] == "done" and by["city/auto@1"]["status"] == "done"
    assert networks.list_versions(store, "city/roads")[-1]["version"] == 2


def test_cancel_stops_the_update_and_keeps_the_version(store, tmp_path, tracked):
    names, _ = tracked
    _import(store, tmp_path, _planted(4), names, "v2")
    with pytest.raises(Cancelled):
        tracking.run_update(store, "city/roads@2", cancel=lambda: True)
    u = tracking.list_updates(store)[0]
    assert u["status"] == "cancelled"
    assert [s["status"] for s in u["sets"]] == ["cancelled", "skipped"]
    assert runs.show_run(store, u["sets"][0]["run"])["status"] == "cancelled"
    assert networks.list_versions(store, "city/roads")[-1]["version"] == 2


def test_update_on_request_and_tracked_list(store, tmp_path, tracked):
    with pytest.raises(ConflictError):
        tracking.add_tracked(store, "city/roads", "city/four")
    params.save_params(store, "other/x", method="njw", k=2)
    with pytest.raises(UsageError):
        tracking.add_tracked(store, "city/roads", "other/x")
    assert [t["params"] for t in tracking.list_tracked(store, "city/roads")["tracked"]] == ["city/four@1", "city/auto@1"]
    upd = tracking.run_update(store, "city/roads")  # version 1 itself: no earlier version to compare with
    assert upd["trigger"] == "request" and all(s["previous_run"] is None for s in upd["sets"])
    assert tracking.change_report(store, upd["update"])["sets"][0]["diff"] is None
    res = tracking.remove_tracked(store, "city/roads", "city/four")
    assert res["removed"] == ["city/four@1"] and len(res["tracked"]) == 1
    with pytest.raises(NotFoundError):
        tracking.remove_tracked(store, "city/roads", "city/four")


# --- shown labels ---------------------------------------------------------------------------------

def _lsa_moved(a: np.ndarray, b: np.ndarray) -> set[int]:
    """Positions whose A community is not matched to their B community by an independent maximum-overlap
    matching: scipy's linear_sum_assignment on scikit-learn's contingency matrix."""
    ua, ub = np.unique(a), np.unique(b)
    C = contingency_matrix(a, b)
    r, c = linear_sum_assignment(C, maximize=True)
    match = {int(ua[i]): int(ub[j]) for i, j in zip(r, c) if C[i, j] > 0}
    return {i for i in range(a.shape[0]) if match.get(int(a[i])) != int(b[i])}


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_renaming_the_previous_run_moves_no_other_node(seed):
    from workspace.compare import compare_memberships

    rng = np.random.default_rng(seed)
    n = 300
    ids = np.array([f"x{i:04d}" for i in range(n)])
    a = rng.integers(0, 6, n)
    b = a.copy()
    flip = rng.random(n) < 0.15
    b[flip] = rng.integers(0, 8, int(flip.sum()))  # a noisy copy with two extra communities
    expected = _lsa_moved(a, b)
    seen = []
    for perm in (np.arange(6), rng.permutation(6), rng.permutation(6)):
        a_renamed = perm[a]  # shown labels of the previous run, renamed
        d = compare_memberships(ids, a_renamed, ids, b)
        shown_ref = {int(x): int(x) for x in np.unique(a_renamed)}
        mapping, _ = tracking.aligned_map([(m.a, m.b) for m in d.matches], int(b.max()) + 1, shown_ref, 6)
        shown_b = np.asarray(mapping)[b]
        moved = set(np.flatnonzero(a_renamed != shown_b).tolist())
        assert moved == expected  # the same nodes, whatever the previous run's numbering
        assert {int(np.searchsorted(ids, x)) for x in d.moved_ids.tolist()} == expected
        seen.append(moved)
    assert seen[0] == seen[1] == seen[2]


def test_shown_labels_of_a_tracked_run_follow_the_previous_run(store, tmp_path, tracked):
    names, first = tracked
    outcome = _import(store, tmp_path, _planted(1, merge=True), names, "v2")
    upd = tracking.update_after_import(store, outcome)
    st = upd["sets"][0]  # k=4 on both versions
    prev_ids, prev, _ = runs.load_membership(store, st["previous_run"])
    new_ids, new, _ = runs.load_membership(store, st["run"])
    mapping = st["shown_labels"]["map"]
    assert st["shown_labels"]["aligned_to"] == st["previous_run"] and sorted(mapping) == sorted(set(mapping))
    # independent check: each new community is shown with the label of its LSA match in the previous run
    C = contingency_matrix(prev, new)
    r, c = linear_sum_assignment(C, maximize=True)
    for i, j in zip(r, c):
        if C[i, j] > 0:
            assert mapping[j] == i
    # the diff's moved listing: both sides in one numbering, never "from 3 to 3"
    d = diffs.diff_runs(store, st["previous_run"], st["run"])
    sa = dict(map(tuple, d["shown_labels"]["a"]))
    sb = dict(map(tuple, d["shown_labels"]["b"]))
    assert all(sa[m["from"]] != sb[m["to"]] for m in d["moved_nodes"])
    assert [sb[k] for k in range(len(mapping))] == mapping
    # tables: show and members give the shown label beside the stored one
    shown = runs.show_run(store, st["run"])
    assert {c["community"]: c["shown"] for c in shown["communities"]} == dict(enumerate(mapping))
    # export --align-to: the labels are the shown ones
    out = tmp_path / "aligned.csv"
    runs.export_run(store, st["run"], out, align_to=st["previous_run"])
    rows = dict(line.split(",") for line in out.read_text().splitlines()[1:])
    assert all(int(rows[v]) == mapping[int(c)] for v, c in zip(new_ids.tolist(), new.tolist()))


def test_deleting_a_tracked_run_or_the_network_leaves_nothing_dangling(store, tmp_path, tracked):
    from workspace.services import delete

    names, _ = tracked
    outcome = _import(store, tmp_path, _planted(5), names, "v2")
    upd = tracking.update_after_import(store, outcome)
    gone = upd["sets"][0]["run"]
    delete.delete_runs(store, [gone])
    after = tracking.show_update(store, upd["update"])
    assert after["sets"][0]["run"] is None and after["sets"][1]["run"] == upd["sets"][1]["run"]
    assert tracking.change_report(store, upd["update"])["sets"][0]["diff"] is None
    delete.delete_target(store, "city/roads")
    assert tracking.list_updates(store) == []
    with pytest.raises(NotFoundError):
        tracking.list_tracked(store, "city/roads")


def test_an_update_whose_process_vanished_is_shown_interrupted(store, tracked):
    """An update left ``running`` by a process that is gone reads as ``interrupted`` (process identity as for
    runs: pid plus its start time from /proc, common practice on Linux)."""
    import socket
    import subprocess
    import sys

    from workspace.store.schema import NetworkVersion, TrackedUpdate
    from workspace.store import repo

    child = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True, text=True)
    dead_pid = int(child.stdout)
    with store.write() as s:
        v = s.query(NetworkVersion).first()
        s.add(TrackedUpdate(network_id=v.network_id, version_id=v.id, trigger="request", status="running",
                            started_at=repo.utcnow(), host=socket.gethostname(), pid=dead_pid,
                            process_token=f"{dead_pid}:0"))
    assert tracking.list_updates(store)[0]["status"] == "interrupted"
