"""The demo's update loop: July's trips imported with a tracked parameter set (invented scenario,
deterministic). The update runs every tracked set exactly once, its change report equals `diff` on the
same runs, and the story holds: Cinder Bridge reopens, so the two riding areas across it merge again.

References: scikit-learn ``adjusted_rand_score`` on the stored memberships; scipy
``optimize.linear_sum_assignment`` (Kuhn 1955) for the shown labels.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import linear_sum_assignment
from sklearn.metrics import adjusted_rand_score
from sklearn.metrics.cluster import contingency_matrix

from workspace.demo.build import CITY, build_demo
from workspace.demo import scenario
from workspace.services import diffs, networks, runs, tracking


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    from workspace.services.store import open_workspace

    store = open_workspace(tmp_path_factory.mktemp("demo-update") / "demo.sqlite")
    summary = build_demo(store)
    yield store, summary
    store.dispose()


def test_update_runs_every_tracked_set_once_and_equals_diff(demo):
    store, summary = demo
    tracked = tracking.list_tracked(store, f"{CITY}/stations")["tracked"]
    assert [t["params"] for t in tracked] == [f"{CITY}/districts@1"]
    (upd,) = tracking.list_updates(store)
    assert upd["update"] == summary["updates"]["july"] and upd["status"] == "done" and upd["trigger"] == "import"
    july = networks.list_versions(store, f"{CITY}/stations")[-1]
    assert upd["ref"] == july["ref"] and upd["previous"] == f"{CITY}/stations@{july['version'] - 1}"
    on_july = runs.list_runs(store, july["ref"])
    assert len(on_july) == len(tracked) == len(upd["sets"])  # each tracked set exactly once
    report = tracking.change_report(store, upd["update"], moved_rows=True)
    for st in report["sets"]:
        assert st["diff"] == diffs.diff_runs(store, st["previous_run"], st["run"], moved_rows=True)
        ia, la, _ = runs.load_membership(store, st["previous_run"])
        ib, lb, _ = runs.load_membership(store, st["run"])
        shared = np.intersect1d(ia, ib)
        ari = adjusted_rand_score(la[np.searchsorted(ia, shared)], lb[np.searchsorted(ib, shared)])
        assert st["summary"]["ari"] == pytest.approx(ari, abs=1e-12)


def test_the_july_story(demo):
    store, summary = demo
    st = tracking.list_updates(store)[0]["sets"][0]
    d = diffs.diff_runs(store, st["previous_run"], st["run"])
    # two new Lantern Wharf stations; Tannery Row and Ferrow Park ride as one area again: one merge
    assert d["only_in_b_nodes"] == ["LW-10", "LW-11"] and d["only_in_a"] == 0
    assert [e["kind"] for e in d["events"]].count("merged") == 1
    merged = next(e for e in d["events"] if e["kind"] == "merged")
    moved = {m["node"] for m in d["moved_nodes"]}
    assert moved and all(scenario.stations(scenario.UPDATE_MONTH)[v] in ("Tannery Row", "Ferrow Park") for v in moved)
    assert len(merged["a"]) == 2
    # shown labels: each July community carries the label of its linear_sum_assignment partner in June
    ia, la, _ = runs.load_membership(store, st["previous_run"])
    ib, lb, _ = runs.load_membership(store, st["run"])
    shared = np.intersect1d(ia, ib)
    C = contingency_matrix(la[np.searchsorted(ia, shared)], lb[np.searchsorted(ib, shared)])
    r, c = linear_sum_assignment(C, maximize=True)
    mapping = st["shown_labels"]["map"]
    assert all(mapping[j] == i for i, j in zip(r, c) if C[i, j] > 0)
