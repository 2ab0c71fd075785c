"""`cutbook nodes`, import --nodes, composition from the stored table, and --label-by (both back ends)."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from sklearn.metrics import adjusted_rand_score, normalized_mutual_info_score

from graphs import adjacency_to_csv


@pytest.fixture
def club(cli, tmp_path):
    """Zachary's karate club (networkx) imported with a node table: its recorded "club" split, and names."""
    G = nx.karate_club_graph()
    A = nx.to_scipy_sparse_array(G, nodelist=range(34), weight="weight")
    csv = adjacency_to_csv(A, tmp_path / "karate.csv", [f"m{i:02d}" for i in range(34)])
    table = tmp_path / "people.csv"
    table.write_text("node,name,club,founder\n" + "".join(
        f"m{i:02d},person {i},{G.nodes[i]['club']},{'yes' if i in (0, 33) else 'no'}\n" for i in range(34)),
        encoding="utf-8")
    res = cli("import", csv, "--project", "club", "--network", "karate", "--weight", "weight", "--nodes", table,
              "--json")
    assert res.code == 0, res.err
    return G, csv, table, res.json


def test_import_with_nodes_and_show(cli, club):
    G, csv, table, doc = club
    assert {c["name"]: c["type"] for c in doc["node_table"]["columns"]} == \
        {"name": "text", "club": "text", "founder": "boolean"}
    shown = cli("nodes", "show", "club/karate", "--json").json
    assert shown["table"]["rows"] == 34 and shown["content_hash"] == doc["content_hash"]
    text = cli("nodes", "show", "club/karate")
    assert text.code == 0 and "founder" in text.out and "boolean" in text.out
    values = cli("nodes", "values", "club/karate", "club", "--json").json
    # networkx's karate club "club" attribute as the reference
    assert dict(values["nodes"]) == {f"m{i:02d}": G.nodes[i]["club"] for i in range(34)}
    # the same file and table again: no new version
    again = cli("import", csv, "--project", "club", "--network", "karate", "--weight", "weight", "--nodes", table,
                "--json").json
    assert again["new_version"] is False


def test_nodes_add_makes_the_next_version_with_the_same_hash(cli, club, tmp_path):
    G, csv, table, doc = club
    other = tmp_path / "zones.csv"
    other.write_text("id,zone,x,y\n" + "".join(f"m{i:02d},{'z' + str(i % 3)},{i % 6},{i // 6}\n" for i in range(34)),
                     encoding="utf-8")
    res = cli("nodes", "add", "club/karate", other, "--coords", "x,y", "--json")
    assert res.code == 0, res.err
    assert res.json["version"] == 2 and res.json["content_hash"] == doc["content_hash"]
    versions = cli("versions", "club/karate", "--json").json
    assert [v["content_hash"] for v in versions] == [doc["content_hash"]] * 2
    assert cli("nodes", "add", "club/karate", other, "--coords", "x,y", "--json").json["new_version"] is False
    bad = cli("nodes", "add", "club/karate", other, "--coords", "x,zone")
    assert bad.code == 1 and "zones.csv" in bad.err and "'zone' holds text" in bad.err
    assert cli("nodes", "add", "club/karate", other, "--coords", "x").code == 2


def test_composition_reads_the_stored_table(cli, club, tmp_path):
    G, csv, table, doc = club
    run = cli("run", "club/karate", "--method", "njw", "--k", "2", "--json").json["run"]
    res = cli("composition", run, "--by", "club", "--json")
    assert res.code == 0, res.err
    doc = res.json
    assert doc["categories"] == ["Mr. Hi", "Officer"] and "stored with club/karate@1" in doc["nodes_file"]
    members = cli("members", run, "--json").json
    labels = {n: c["community"] for c in members["communities"] for n in c["nodes"]}
    ids = sorted(labels)
    truth = [G.nodes[int(n[1:])]["club"] for n in ids]
    part = [labels[n] for n in ids]
    # scikit-learn's ARI and NMI as the references; counts by numpy bincount
    assert doc["ari"] == pytest.approx(adjusted_rand_score(part, truth), abs=1e-12)
    assert doc["nmi"] == pytest.approx(normalized_mutual_info_score(part, truth), abs=1e-12)
    codes = np.array([0 if t == "Mr. Hi" else 1 for t in truth])
    for row in doc["communities"]:
        sel = np.array(part) == row["community"]
        assert row["counts"] == np.bincount(codes[sel], minlength=2).tolist()
    # a file still overrides the stored table
    override = tmp_path / "over.csv"
    override.write_text("node,club\n" + "".join(f"m{i:02d},{'a' if i < 10 else 'b'}\n" for i in range(34)),
                        encoding="utf-8")
    assert cli("composition", run, "--nodes", override, "--by", "club", "--json").json["categories"] == ["a", "b"]
    missing = cli("composition", run, "--by", "district")
    assert missing.code == 3 and "no node attribute 'district'" in missing.err and "founder" in missing.err


def test_label_by_in_members_where_diff_and_show(cli, club):
    run_a = cli("run", "club/karate", "--method", "njw", "--k", "2", "--json").json["run"]
    run_b = cli("run", "club/karate", "--method", "njw", "--k", "3", "--json").json["run"]
    members = cli("members", run_a, "--label-by", "name", "--json").json
    for c in members["communities"]:
        assert c["labels"] == [f"person {int(n[1:])}" for n in c["nodes"]]
    text = cli("members", run_a, "--label-by", "name")
    assert "person 0 [m00]" in text.out
    where = cli("where", "m05", "--label-by", "name", "--json").json
    assert {r["node_label"] for r in where["runs"]} == {"person 5"}
    assert "person 5" in cli("where", "m05", "--label-by", "name").out
    diff = cli("diff", run_a, run_b, "--label-by", "name", "--json").json
    assert diff["moved_labels"] == [f"person {int(m[0][1:])}" for m in diff["moved_nodes"]]
    if diff["moved_nodes"]:
        first = diff["moved_nodes"][0][0]
        assert f"person {int(first[1:])}" in cli("diff", run_a, run_b, "--label-by", "name").out
    shown = cli("show", run_a, "--label-by", "name")
    assert shown.code == 0 and "first members by name" in shown.out
    assert cli("members", run_a, "--label-by", "nickname").code == 3


def test_label_by_in_the_diff_report(cli, club, tmp_path):
    run_a = cli("run", "club/karate", "--method", "njw", "--k", "2", "--json").json["run"]
    run_b = cli("run", "club/karate", "--method", "njw", "--k", "3", "--json").json["run"]
    moved = cli("diff", run_a, run_b, "--json").json["moved_nodes"]
    page = tmp_path / "d.html"
    assert cli("report", run_a, run_b, "--label-by", "name", "-o", page).code == 0
    text = page.read_text(encoding="utf-8")
    assert "<th>name</th>" in text
    for node, *_ in moved[:50]:
        assert f"<td>{node}</td><td>person {int(node[1:])}</td>" in text
    assert cli("report", "--chain", run_a, run_b, "--label-by", "name", "-o", page).code == 2
