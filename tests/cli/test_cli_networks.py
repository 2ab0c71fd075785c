"""CLI contract for networks: import, projects, networks, versions, show, changes.

Checks the documented --json keys, exit codes, "no new version for equal content",
store untouched after bad input, and two processes importing into one store at once.
"""

from __future__ import annotations

import json
import sqlite3
import subprocess
import sys
from pathlib import Path

import networkx as nx
import pytest

from tests_support import dump_store, write_edges  # noqa: E402  (tests/support on sys.path via conftest)

REPO = Path(__file__).resolve().parents[2]


def test_import_json_contract_and_unchanged_reimport(cli, tmp_path):
    f = write_edges(tmp_path / "a.csv", [("x", "y", 2.0), ("y", "z", 1.0), ("z", "x", 3.0), ("z", "w", 1.0)],
                    header="source,target,weight")
    r = cli("import", f, "--project", "harbour", "--network", "ferries", "--weight", "weight", "--json")
    assert r.code == 0, r.err
    doc = r.json
    assert set(doc) >= {"ref", "version", "nodes", "edges", "content_hash", "new_version", "report"}
    assert doc["ref"] == "harbour/ferries@1" and doc["version"] == 1 and doc["new_version"] is True
    assert (doc["nodes"], doc["edges"]) == (4, 4)
    assert doc["report"]["components"] == 1
    # same content, other line order and endpoint order: no new version
    g = write_edges(tmp_path / "b.csv", [("w", "z", 1.0), ("x", "z", 3.0), ("y", "x", 2.0), ("z", "y", 1.0)],
                    header="source,target,weight")
    r2 = cli("import", g, "--project", "harbour", "--network", "ferries", "--weight", "weight", "--json")
    assert r2.code == 0 and r2.json["new_version"] is False and r2.json["version"] == 1
    assert r2.json["content_hash"] == doc["content_hash"]
    # human text goes to stderr under --json: stdout is exactly one JSON document
    json.loads(r2.out)


def test_listing_commands_and_changes(cli, tmp_path):
    a = write_edges(tmp_path / "a.csv", [("a", "b", 1), ("b", "c", 1), ("c", "d", 1)], header="u,v,w")
    b = write_edges(tmp_path / "b.csv", [("a", "b", 5), ("b", "c", 1), ("d", "e", 1)], header="u,v,w")
    assert cli("import", a, "--project", "p", "--network", "n", "--weight", "w").code == 0
    assert cli("import", b, "--project", "p", "--network", "n", "--weight", "w", "-m", "second").code == 0
    assert cli("projects", "--json").json == [{"project": "p", "networks": 1,
                                               "created": cli("projects", "--json").json[0]["created"]}]
    nets = cli("networks", "--json").json
    assert nets[0]["network"] == "n" and nets[0]["latest_version"] == 2
    vers = cli("versions", "p/n", "--json").json
    assert [v["version"] for v in vers] == [1, 2] and vers[1]["message"] == "second"
    show = cli("show", "p/n", "--json").json
    assert show["version"] == 2 and show["parent"] == "p/n@1"
    ch = cli("changes", "p/n@1", "p/n@2", "--json").json
    # worked by hand: nodes {a,b,c,d} -> {a,b,c,d,e}; edges {ab,bc,cd} -> {ab,bc,de}; ab weight 1 -> 5
    assert (ch["nodes_added"], ch["nodes_removed"], ch["edges_added"], ch["edges_removed"],
            ch["weights_changed"]) == (1, 0, 1, 1, 1)
    assert cli("show", "p/n@1", "--json").json["changes_from_parent"] is None
    # equal content (a version against itself; the first file imported again as version 3): the
    # same answer as structural_changes of one graph against itself, every count 0
    assert cli("import", a, "--project", "p", "--network", "n", "--weight", "w").code == 0
    for ref in ("p/n@1", "p/n@3"):
        same = cli("changes", "p/n@1", ref, "--json").json
        assert [same[k] for k in ("nodes_added", "nodes_removed", "edges_added", "edges_removed",
                                  "weights_changed")] == [0, 0, 0, 0, 0]
        assert same["listings"]["edges_added"] == [] and same["truncated"] is False
    assert cli("changes", "p/n@3", "p/n@2", "--json").json["edges_added"] == 1


def test_show_compares_with_the_parent_up_to_a_size_unless_asked(cli, tmp_path, monkeypatch):
    """`show` compares a version with its parent only up to PARENT_CHANGES_MAX_EDGES edges in the two
    (two 10M-node versions took 35 s and 11 GB); above, it says so and names the command, and
    `--changes` compares at any size. Counts worked by hand as in the test above."""
    from workspace.services import networks

    a = write_edges(tmp_path / "a.csv", [("a", "b", 1), ("b", "c", 1), ("c", "d", 1)], header="u,v,w")
    b = write_edges(tmp_path / "b.csv", [("a", "b", 5), ("b", "c", 1), ("d", "e", 1)], header="u,v,w")
    assert cli("import", a, "--project", "p", "--network", "n", "--weight", "w").code == 0
    assert cli("import", b, "--project", "p", "--network", "n", "--weight", "w").code == 0
    assert cli("show", "p/n", "--json").json["changes_from_parent"]["edges_added"] == 1
    monkeypatch.setattr(networks, "PARENT_CHANGES_MAX_EDGES", 5)         # the two hold 3 + 3 edges
    shown = cli("show", "p/n", "--json").json
    assert shown["changes_from_parent"] is None
    assert "cutbook changes p/n@1 p/n@2" in shown["changes_not_computed"]
    text = cli("show", "p/n")
    assert text.code == 0 and "changes from p/n@1: not compared here: 6 edges" in text.out
    assert "show --changes" in text.out
    forced = cli("show", "p/n", "--changes", "--json").json["changes_from_parent"]
    assert (forced["nodes_added"], forced["edges_added"], forced["edges_removed"], forced["weights_changed"]) \
        == (1, 1, 1, 1)


def test_show_of_a_version_with_its_parents_graph_loads_no_graph(cli, tmp_path, monkeypatch):
    """A version that only adds a node table keeps its parent's graph and content hash: no change,
    answered without loading either graph (at 10M nodes the comparison found nothing in 35 s)."""
    from workspace.store import repo

    a = write_edges(tmp_path / "a.csv", [("a", "b", 1), ("b", "c", 1)], header="u,v,w")
    nodes = tmp_path / "nodes.csv"
    nodes.write_text("node,zone\na,north\nb,south\nc,north\n")
    assert cli("import", a, "--project", "p", "--network", "n").code == 0
    assert cli("nodes", "add", "p/n", str(nodes)).code == 0

    def no_load(*args, **kwargs):
        raise AssertionError("a graph was loaded")

    monkeypatch.setattr(repo, "load_graph", no_load)
    shown = cli("show", "p/n@2", "--json").json
    assert shown["parent"] == "p/n@1"
    ch = shown["changes_from_parent"]
    assert [ch[k] for k in ("nodes_added", "nodes_removed", "edges_added", "edges_removed",
                            "weights_changed")] == [0, 0, 0, 0, 0]


def test_not_found_and_usage_exit_codes(cli):
    assert cli("versions", "nope/none").code == 3
    assert cli("show", "nope/none@2").code == 3
    r = cli("show", "not a ref")
    assert r.code == 2 and "error" in r.err
    with pytest.raises(SystemExit) as e:
        cli("import")  # argparse usage error
    assert e.value.code == 2


BAD_INPUTS = [
    # (file name, content, expected fragment of the message, expect a line number)
    ("empty.csv", "", "no records", False),
    ("header_only.csv", "source,target,weight\n", "no edge", False),
    ("nan.csv", "source,target,weight\na,b,1\nb,c,nan\n", ":3:", True),
    ("negative.csv", "source,target,weight\na,b,1\nb,c,-2\n", ":3:", True),
    ("text_weight.csv", "source,target,weight\na,b,1\nb,c,heavy\n", ":3:", True),
    ("inf.csv", "source,target,weight\na,b,inf\n", ":2:", True),
    ("columns.csv", "source,target,weight\na,b,1\nb\n", ":3:", True),
    ("zeros.csv", "source,target,weight\na,b,0\nb,c,0\n", "no edge", False),
    ("self_only.csv", "a,a\nb,b\n", "no edge", False),
    ("unknown.xyz", "a b\n", "format", False),
    ("bad.graphml", "<graphml><graph edgedefault='undirected'><node id='a'/>", "", False),
    ("bad.json", "{\"nodes\": [", "", False),
    ("bad.mtx", "%%MatrixMarket matrix coordinate real general\n3 2 1\n1 1 1\n", "square", False),
]


@pytest.mark.parametrize("name,content,fragment,has_line", BAD_INPUTS, ids=[b[0] for b in BAD_INPUTS])
def test_bad_input_leaves_store_untouched(cli, store_target, tmp_path, name, content, fragment, has_line):
    good = write_edges(tmp_path / "good.csv", [("a", "b", 1), ("b", "c", 2)], header="source,target,weight")
    assert cli("import", good, "--project", "keep", "--network", "me", "--weight", "weight").code == 0
    before = dump_store(store_target)
    f = tmp_path / name
    f.write_text(content, encoding="utf-8")
    weight = ["--weight", "weight"] if name.endswith(".csv") and content.startswith("source") else []
    for project in ("keep", "fresh"):  # into an existing network, and into a project that does not exist yet
        r = cli("import", f, "--project", project, "--network", "me", *weight)
        assert r.code != 0, (name, r.out, r.err)
        assert r.err.count("\n") == 1 and "Traceback" not in r.err, r.err
        assert str(f) in r.err or name in r.err
        assert fragment in r.err
        if has_line:
            assert f"{name}:" in r.err
        assert dump_store(store_target) == before


def test_missing_file_and_directory(cli, tmp_path, store_target):
    good = write_edges(tmp_path / "good.csv", [("a", "b", 1)], header=None)
    assert cli("import", good, "--project", "p", "--network", "n").code == 0
    before = dump_store(store_target)
    r = cli("import", tmp_path / "nope.csv", "--project", "p", "--network", "n")
    assert r.code == 1 and "nope.csv" in r.err
    r = cli("import", tmp_path, "--project", "p", "--network", "n")
    assert r.code == 1 and "Traceback" not in r.err
    assert dump_store(store_target) == before


@pytest.mark.slow
def test_two_processes_import_at_once(tmp_path):
    # Two writers on one fresh SQLite store: both must succeed (BEGIN IMMEDIATE + busy timeout).
    store = tmp_path / "shared.sqlite"
    files = []
    for i in range(2):
        g = nx.gnm_random_graph(3000, 20000, seed=i)  # networkx generator as a neutral source of edges
        files.append(write_edges(tmp_path / f"g{i}.csv", [(f"n{u}", f"n{v}", 1) for u, v in g.edges()]))
    env = {"PYTHONPATH": str(REPO), "PATH": "/usr/bin:/bin"}
    procs = [subprocess.Popen([sys.executable, "-m", "workspace.cli", "--store", str(store), "import", str(f),
                               "--project", "p", "--network", f"net{i}", "--json"],
                              stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
             for i, f in enumerate(files)]
    outs = [p.communicate(timeout=120) for p in procs]
    for p, (out, err) in zip(procs, outs):
        assert p.returncode == 0, err
        assert json.loads(out)["new_version"] is True
    con = sqlite3.connect(store)
    assert con.execute("SELECT count(*) FROM network_versions").fetchone()[0] == 2
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
