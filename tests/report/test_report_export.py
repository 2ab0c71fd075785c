"""Exports carry the network: GraphML and node-link JSON read back with networkx."""

from __future__ import annotations

import io
import json
from pathlib import Path

import networkx as nx
import pytest

from graphs import adjacency_to_csv

IDS = [f"m{i:02d}" for i in range(34)]


@pytest.fixture
def karate_run(cli, tmp_path):
    # Zachary (1977) karate club as shipped by networkx (networkx.karate_club_graph), with its weights
    G = nx.karate_club_graph()
    A = nx.to_scipy_sparse_array(G, nodelist=range(34), weight="weight")
    path = adjacency_to_csv(A, tmp_path / "karate.csv", IDS)
    assert cli("import", path, "--project", "club", "--network", "karate", "--weight", "weight").code == 0
    r = cli("run", "club/karate", "--method", "njw", "--k", "3", "--json")
    assert r.code == 0, r.err
    return G, r.json["run"]




def _expected(G):
    """Edges {frozenset(u, v): weight} of networkx's karate club, renamed like the import."""
    return {frozenset((IDS[u], IDS[v])): float(d["weight"]) for u, v, d in G.edges(data=True)}


def _membership(store_path, run_id):
    from workspace.services import runs
    from workspace.services.store import open_workspace

    st = open_workspace(store_path)
    try:
        ids, labels, _ = runs.load_membership(st, run_id)
    finally:
        st.dispose()
    return dict(zip(ids.tolist(), labels.tolist()))


def test_graphml_export_reads_back_with_networkx(cli, karate_run, tmp_path, store_path):
    G, run_id = karate_run
    out = tmp_path / "run.graphml"
    res = cli("export", run_id, "--format", "graphml", "-o", out, "--json")
    assert res.code == 0, res.err
    assert res.json["edges"] == G.number_of_edges() == 78
    back = nx.read_graphml(out)  # networkx.read_graphml as the outside reader
    assert not back.is_directed()
    assert sorted(back.nodes) == sorted(IDS)
    got = {frozenset((u, v)): d["weight"] for u, v, d in back.edges(data=True)}
    assert got == _expected(G)
    membership = _membership(store_path, run_id)
    assert {n: d["community"] for n, d in back.nodes(data=True)} == membership
    assert len(set(membership.values())) == 3


def test_graphml_to_standard_output_equals_the_file(cli, karate_run, tmp_path):
    _, run_id = karate_run
    out = tmp_path / "run.graphml"
    assert cli("export", run_id, "--format", "graphml", "-o", out).code == 0
    piped = cli("export", run_id, "--format", "graphml", "-o", "-")
    assert piped.code == 0, piped.err
    assert piped.out == out.read_text(encoding="utf-8")
    back = nx.read_graphml(io.BytesIO(piped.out.encode("utf-8")))
    assert back.number_of_edges() == 78
    assert "standard output" in piped.err
    # --json would mix two documents on standard output: refused
    assert cli("export", run_id, "--format", "graphml", "-o", "-", "--json").code == 2


def test_node_link_export_reads_back_with_networkx(cli, karate_run, tmp_path, store_path):
    G, run_id = karate_run
    piped = cli("export", run_id, "--format", "json", "-o", "-")
    assert piped.code == 0, piped.err
    back = nx.node_link_graph(json.loads(piped.out), edges="links")  # networkx.node_link_graph
    assert sorted(back.nodes) == sorted(IDS)
    got = {frozenset((u, v)): d["weight"] for u, v, d in back.edges(data=True)}
    assert got == _expected(G)
    assert {n: d["community"] for n, d in back.nodes(data=True)} == _membership(store_path, run_id)
    # the export is itself a membership file: `attach` reads it back as the same partition
    f = tmp_path / "back.json"
    f.write_text(piped.out, encoding="utf-8")
    att = cli("attach", f, "--to", "club/karate", "--label", "again", "--json")
    assert att.code == 0, att.err
    shown_a = cli("show", run_id, "--json").json
    assert cli("show", att.json["run"], "--json").json["membership_hash"] == shown_a["membership_hash"]
    # a diff report names the attached run by its label, not as the method "attached"
    page = tmp_path / "diff.html"
    assert cli("report", att.json["run"], run_id, "-o", page).code == 0
    assert f"A: run {att.json['run']} (attached ‘again’ on club/karate@1" in page.read_text(encoding="utf-8")


def test_csv_export_is_unchanged(cli, karate_run, tmp_path, store_path):
    _, run_id = karate_run
    piped = cli("export", run_id, "-o", "-")
    lines = piped.out.splitlines()
    assert lines[0] == "node,community" and len(lines) == 35
    membership = _membership(store_path, run_id)
    assert {a: int(b) for a, b in (x.split(",") for x in lines[1:])} == membership


def test_directed_graphml_export_keeps_the_arcs(cli, tmp_path):
    src = Path(__file__).resolve().parents[1] / "data" / "directed.graphml"
    assert cli("import", src, "--project", "d", "--network", "arcs", "--weight", "weight",
               "--directed", "keep").code == 0
    att = tmp_path / "m.csv"
    att.write_text("node,community\na,x\nb,x\nc,y\nd,y\nlonely,z\n", encoding="utf-8")
    run = cli("attach", att, "--to", "d/arcs", "--label", "hand", "--json")
    assert run.code == 0, run.err
    piped = cli("export", run.json["run"], "--format", "graphml", "-o", "-")
    assert piped.code == 0, piped.err
    back = nx.read_graphml(io.BytesIO(piped.out.encode("utf-8")))
    ref = nx.read_graphml(src)  # networkx.read_graphml of the input file as the reference
    assert back.is_directed() and ref.is_directed()
    assert sorted(back.nodes) == sorted(ref.nodes)
    assert {(u, v): d["weight"] for u, v, d in back.edges(data=True)} == \
        {(u, v): d["weight"] for u, v, d in ref.edges(data=True)}
    assert {n: d["community"] for n, d in back.nodes(data=True)} == \
        {"a": 0, "b": 0, "c": 1, "d": 1, "lonely": 2}


def test_exports_carry_the_stored_node_attributes(cli, tmp_path):
    import json

    G = nx.karate_club_graph()  # Zachary's karate club (networkx) with its "club" attribute
    A = nx.to_scipy_sparse_array(G, nodelist=range(34))
    from graphs import adjacency_to_csv

    edges = adjacency_to_csv(A, tmp_path / "k.csv", [f"m{i:02d}" for i in range(34)])
    table = tmp_path / "t.csv"
    table.write_text("node,club,age,founder\n" + "".join(
        f"m{i:02d},{G.nodes[i]['club']},{20 + i if i % 5 else ''},{'yes' if i in (0, 33) else 'no'}\n"
        for i in range(34)), encoding="utf-8")
    assert cli("import", edges, "--project", "p", "--network", "k", "--nodes", table).code == 0
    run = cli("run", "p/k", "--method", "njw", "--k", "2", "--json").json["run"]
    graphml, nodelink = tmp_path / "out.graphml", tmp_path / "out.json"
    assert cli("export", run, "--format", "graphml", "-o", graphml).code == 0
    assert cli("export", run, "--format", "json", "-o", nodelink).code == 0
    # networkx.read_graphml / node_link_graph as the reference readings of the exported files
    for H in (nx.read_graphml(graphml),
              nx.node_link_graph(json.loads(nodelink.read_text(encoding="utf-8")), edges="links")):
        for i in range(34):
            data = H.nodes[f"m{i:02d}"]
            assert data["club"] == G.nodes[i]["club"]
            assert data["founder"] is (i in (0, 33))
            if i % 5:
                assert data["age"] == 20 + i
            else:
                assert "age" not in data
            assert "community" in data
