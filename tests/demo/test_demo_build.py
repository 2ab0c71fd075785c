"""The demo workspace: built through the services into a temporary store, with the content the
README promises (projects, versions that differ, parameter sets, several methods incl. a baseline,
a stability run, an attached grouping), deterministically."""

from __future__ import annotations

import pytest
from sklearn.metrics import adjusted_rand_score

from workspace.services import diffs, networks, params, runs
from workspace.services.demo import build_demo_store, demo_exists
from workspace.services.store import open_workspace


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    path = tmp_path_factory.mktemp("demo") / "demo.sqlite"
    summary = build_demo_store(str(path))
    store = open_workspace(path)
    yield store, summary, path
    store.dispose()


def test_content(demo):
    store, summary, path = demo
    assert demo_exists(str(path)) == "demo"
    projects = networks.list_projects(store)
    assert len(projects) >= 2
    versions = networks.list_versions(store, "velmora-bikes/stations")
    assert len(versions) >= 3
    assert len({v["content_hash"] for v in versions}) == len(versions)
    # versions differ in real structure: stations open, trips change
    ch = networks.version_changes(store, "velmora-bikes/stations@2", "velmora-bikes/stations@3")
    assert ch["nodes_added"] == 9 and ch["edges_added"] > 0
    assert len(params.list_params(store)) >= 4
    all_runs = runs.list_runs(store)
    computed = {r["method"] for r in all_runs if r["kind"] == "computed"}
    assert len(computed) >= 3
    assert computed & {"louvain", "greedy-modularity", "label-propagation", "girvan-newman"}  # a baseline
    assert any(r["repeats"] > 1 for r in all_runs)  # a stability run
    assert any(r["kind"] == "attached" for r in all_runs)
    assert all(r["status"] == "done" for r in all_runs)


def test_story_holds(demo):
    store, summary, _ = demo
    ids = summary["runs"]
    # the bridge closure splits the Tannery Row / Ferrow Park riding area between May and June
    d = diffs.diff_runs(store, ids["districts@3"], ids["districts@4"])
    assert any(e["kind"] == "split" for e in d["events"]) and d["moved"] > 0
    # a modularity baseline recovers the city's planning districts on the June network
    # (checked with scikit-learn's adjusted_rand_score as the outside reference)
    _, louvain, _ = runs.load_membership(store, ids["louvain@4"])
    _, districts, _ = runs.load_membership(store, ids["planning-districts@4"])
    assert adjusted_rand_score(districts, louvain) > 0.95
    stab = runs.show_run(store, ids["stability@4"])
    assert stab["repeats"] == 12 and all(c["stability"] is not None for c in stab["communities"])


def test_deterministic(demo, tmp_path):
    store, _, _ = demo
    other = tmp_path / "again.sqlite"
    build_demo_store(str(other))
    s2 = open_workspace(other)
    try:
        a = [(r["ref"], r["method"], r["membership_hash"]) for r in runs.list_runs(store)]
        b = [(r["ref"], r["method"], r["membership_hash"]) for r in runs.list_runs(s2)]
        assert a == b
        assert [v["content_hash"] for v in networks.list_versions(store, "velmora-bikes/stations")] == \
               [v["content_hash"] for v in networks.list_versions(s2, "velmora-bikes/stations")]
    finally:
        s2.dispose()


def test_demo_command_refuses_a_store_with_other_work(cli, tmp_path):
    from tests_support import write_edges

    f = write_edges(tmp_path / "x.csv", [("a", "b", 1)], header=None)
    assert cli("import", f, "--project", "mine", "--network", "n").code == 0
    r = cli("demo", "--no-ui")
    assert r.code == 4 and "already holds" in r.err


def test_station_tables_travel_with_each_month(demo):
    from workspace.services import nodes
    from workspace.services.reports import composition
    from demo import scenario

    store, summary, _ = demo
    for v, month in enumerate(scenario.MONTHS, start=1):
        shown = nodes.show_node_table(store, f"velmora-bikes/stations@{v}")["table"]
        assert shown["coords"] == {"x": "east_km", "y": "north_km", "kind": "plane"}
        assert {c["name"]: c["type"] for c in shown["columns"]} == {
            "name": "text", "district": "text", "bank": "text", "east_km": "number", "north_km": "number",
            "docks": "number", "ebikes": "boolean"}
        # the stored districts round-trip the scenario's own station list, station by station
        stored = dict(nodes.node_values(store, f"velmora-bikes/stations@{v}", "district")["nodes"])
        assert stored == dict(scenario.stations(month))
        # the river runs along north = 0: every station sits on its own bank
        banks = dict(nodes.node_values(store, f"velmora-bikes/stations@{v}", "bank")["nodes"])
        north = dict(nodes.node_values(store, f"velmora-bikes/stations@{v}", "north_km")["nodes"])
        assert all((north[s] > 0) == (banks[s] == "north") for s in north)
    # the districts explain June's modularity baseline almost entirely (scikit-learn ARI in composition,
    # as the attached planning districts do in test_story_holds)
    comp = composition(store, summary["runs"]["louvain@4"], None, "district")
    assert comp["ari"] > 0.95 and len(comp["categories"]) == 8
