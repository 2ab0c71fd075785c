"""`track`, `import` with tracked sets (and `--no-track`), `update` and `updates` from the command line,
on both back ends: --json contracts, the change report equal to `diff --json` on the same runs, the
moved-node listing in one numbering, and a failing tracked run that keeps the import (exit 1).

References: planted-partition graphs from ``networkx.planted_partition_graph`` (Condon & Karp 2001);
scikit-learn ``adjusted_rand_score``; scipy ``optimize.linear_sum_assignment`` (Kuhn 1955).
"""

from __future__ import annotations

import csv

import networkx as nx
import numpy as np
from scipy.optimize import linear_sum_assignment
from sklearn.metrics import adjusted_rand_score
from sklearn.metrics.cluster import contingency_matrix

from graphs import adjacency_to_csv

NAMES = [f"n{i:03d}" for i in range(60)]


def _graph(tmp_path, name: str, seed: int, join: bool = False):
    """Three planted groups of 20; ``join``: groups 1 and 2 densely joined (one riding area)."""
    G = nx.planted_partition_graph(3, 20, 0.5, 0.01, seed=seed)
    if join:
        rng = np.random.default_rng(seed)
        G.add_edges_from((u, v) for u in range(20, 40) for v in range(40, 60) if rng.random() < 0.5)
    A = nx.to_scipy_sparse_array(G, nodelist=range(60), format="csr")
    return adjacency_to_csv(A, tmp_path / f"{name}.csv", NAMES)


def _setup(cli, tmp_path):
    assert cli("import", _graph(tmp_path, "v1", 7), "--project", "p", "--network", "g", "--weight", "weight").code == 0
    assert cli("params", "save", "p/auto", "--method", "njw", "--k", "auto").code == 0
    first = cli("run", "p/g", "--params", "p/auto", "--json").json["run"]
    res = cli("track", "add", "p/g", "p/auto", "--json")
    assert res.code == 0 and res.json["added"]["params"] == "p/auto@1"
    return first


def test_import_runs_the_tracked_set_and_the_report_equals_diff(cli, tmp_path):
    first = _setup(cli, tmp_path)
    listed = cli("track", "list", "p/g", "--json").json
    assert [t["params"] for t in listed["tracked"]] == ["p/auto@1"] and listed["tracked"][0]["method"] == "njw"
    res = cli("import", _graph(tmp_path, "v2", 7, join=True), "--project", "p", "--network", "g", "--weight",
              "weight", "--json")
    assert res.code == 0, res.err
    doc = res.json
    assert doc["ref"] == "p/g@2" and doc["new_version"] is True
    upd = doc["update"]
    assert upd["status"] == "done" and upd["trigger"] == "import" and upd["previous"] == "p/g@1"
    (st,) = upd["sets"]
    assert st["previous_run"] == first and st["status"] == "done"
    same = cli("diff", str(first), str(st["run"]), "--json")
    assert same.code == 0 and st["diff"] == same.json  # the report's diff is `cutbook diff` on the same runs
    # three planted groups become two: one merge (planted structure); ARI against scikit-learn
    assert st["diff"]["k_a"] == 3 and st["diff"]["k_b"] == 2 and st["summary"]["events"]["merged"] == 1
    la = _export(cli, tmp_path, first)
    lb = _export(cli, tmp_path, st["run"])
    assert st["summary"]["ari"] == adjusted_rand_score([la[v] for v in NAMES], [lb[v] for v in NAMES])
    # stored, latest first, and shown again on request
    assert cli("updates", "list", "p/g", "--json").json[0]["update"] == upd["update"]
    assert cli("updates", "--json").json == cli("updates", "list", "--json").json  # no action: the list
    again = cli("updates", "show", "--json")
    assert again.code == 0 and again.json["sets"][0]["diff"] == same.json
    text = cli("updates", "show", str(upd["update"]))
    assert "merged" in text.out and f"run {st['run']} against run {first}" in text.out


def _export(cli, tmp_path, run, *extra) -> dict[str, int]:
    out = tmp_path / f"run{run}.csv"
    assert cli("export", str(run), "-o", out, *extra).code == 0
    with open(out, newline="") as fh:
        return {r["node"]: int(r["community"]) for r in csv.DictReader(fh)}


def test_no_track_runs_nothing_and_update_runs_on_request(cli, tmp_path):
    _setup(cli, tmp_path)
    res = cli("import", _graph(tmp_path, "v2", 8), "--project", "p", "--network", "g", "--weight", "weight",
              "--no-track", "--json")
    assert res.code == 0 and res.json["update"] is None
    assert [r["version"] for r in cli("runs", "p/g", "--json").json] == [1]
    assert cli("updates", "list", "--json").json == []
    res = cli("update", "p/g", "--json")
    assert res.code == 0 and res.json["ref"] == "p/g@2" and res.json["trigger"] == "request"
    assert [r["version"] for r in cli("runs", "p/g", "--json").json] == [2, 1]
    removed = cli("track", "remove", "p/g", "p/auto", "--json")
    assert removed.code == 0 and removed.json["tracked"] == []
    bad = cli("update", "p/g")
    assert bad.code == 3 and "tracks no parameter set" in bad.err


def test_a_failing_tracked_run_keeps_the_import(cli, tmp_path):
    _setup(cli, tmp_path)
    assert cli("params", "save", "p/huge", "--method", "njw", "--k", "70").code == 0
    assert cli("track", "add", "p/g", "p/huge").code == 0
    res = cli("import", _graph(tmp_path, "v2", 9), "--project", "p", "--network", "g", "--weight", "weight")
    assert res.code == 1
    assert "imported p/g@2" in res.out and "p/huge@1" in res.out and "failed" in res.out
    assert cli("versions", "p/g", "--json").json[-1]["version"] == 2
    statuses = {s["params"]: s["status"] for s in cli("updates", "list", "--json").json[0]["sets"]}
    assert statuses == {"p/auto@1": "done", "p/huge@1": "failed"}


def test_moved_nodes_show_one_numbering_and_export_align_to(cli, tmp_path):
    first = _setup(cli, tmp_path)
    res = cli("import", _graph(tmp_path, "v2", 7, join=True), "--project", "p", "--network", "g", "--weight",
              "weight", "--json")
    st = res.json["update"]["sets"][0]
    la, lb = _export(cli, tmp_path, first), _export(cli, tmp_path, st["run"])
    aligned = _export(cli, tmp_path, st["run"], "--align-to", str(first))
    # independent matching: each new community takes the label of its linear_sum_assignment partner
    a = np.array([la[v] for v in NAMES])
    b = np.array([lb[v] for v in NAMES])
    C = contingency_matrix(a, b)
    r, c = linear_sum_assignment(C, maximize=True)
    partner = {int(j): int(i) for i, j in zip(r, c) if C[i, j] > 0}
    for v in NAMES:
        if lb[v] in partner:
            assert aligned[v] == partner[lb[v]]
    moved = {v for v in NAMES if partner.get(lb[v]) != la[v]}
    assert moved == {v for v in NAMES if aligned[v] != la[v]}
    text = cli("diff", str(first), str(st["run"]), "--limit", "100").out
    rows = [line.split() for line in text.splitlines() if line.strip().startswith("n0")]
    assert rows and {row[0] for row in rows} == moved
    assert all(row[1] != row[2] for row in rows)  # never "from 3 to 3"
