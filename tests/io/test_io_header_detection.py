"""``header="auto"``: common endpoint-name lines are column names, not a phantom edge.

Each file's expected graph comes from ``networkx.parse_edgelist`` (networkx 3.x) on the lines
that are data - all lines, or all but the first. Endpoint column names such as ``source,target``,
``from,to``, ``u,v``, ``i,j`` are common practice in edge-list files (e.g. the networkx and
pandas ``from_pandas_edgelist`` defaults ``source``/``target``; ``u, v`` in graph-theory texts).
"""

from __future__ import annotations

from pathlib import Path

import networkx as nx
import pytest

from workspace.domain import ImportPolicy
from workspace.io import read_network

BODY = ["alice,bob", "bob,carol", "carol,alice", "carol,dave"]


def _write(tmp_path: Path, lines: list[str], name: str = "g.csv") -> Path:
    path = tmp_path / name
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _edge_set(graph) -> set[frozenset]:
    ids = graph.node_ids
    return {frozenset((str(ids[a]), str(ids[b]))) for a, b in zip(graph.edge_u, graph.edge_v)}


def _networkx(lines: list[str]) -> nx.Graph:
    return nx.parse_edgelist(lines, delimiter=",", nodetype=str, data=False)


def _same_graph(graph, reference: nx.Graph) -> bool:
    return (set(map(str, graph.node_ids)) == set(reference.nodes)
            and _edge_set(graph) == {frozenset(e) for e in reference.edges})


@pytest.mark.parametrize("header", [
    "a,b", "u,v", "i,j", "x,y", "s,t", "p,q", "from,to", "From,To", "source,target",
    "Source_ID,Target_ID", "src,dst", "node1,node2", "node_1,node_2", "n1,n2", "v1,v2",
    "origin,destination", "sender,receiver", "tail,head", "ego,alter",
    "from_station,to_station", "station_src,station_dst", "user1,user2",
])
def test_endpoint_names_are_read_as_a_header(tmp_path, header):
    path = _write(tmp_path, [header] + BODY)
    graph, report = read_network(path)
    assert _same_graph(graph, _networkx(BODY)), header
    assert report.components == 1  # no phantom 2-node component
    assert any("read as column names" in n and "--header no" in n for n in report.notes)
    # forcing it the other way keeps the line as an edge
    forced, _ = read_network(path, policy=ImportPolicy(header="no"))
    assert _same_graph(forced, _networkx([header] + BODY))


@pytest.mark.parametrize("lines", [
    ["a,b", "b,c", "c,a"],                 # the names are ids used below: data
    ["u,v", "v,w", "w,u", "u,x"],
    ["x,y"],                               # one line: an edge, never names over nothing
    ["alice,bob", "carol,dave"],           # a matching: line 1 is like every other line
    ["user1,user2", "user3,user4", "user5,user6"],          # name-like ids, every line a pair
    ["start-1,end-1", "start-2,end-2", "start-3,end-3"],
    ["u,v", "w,x", "y,z"],
    ["1,2", "2,3"],                        # numbers are data
])
def test_lines_that_are_data_stay_data_and_keep_their_hash(tmp_path, lines):
    path = _write(tmp_path, lines)
    graph, report = read_network(path)
    assert _same_graph(graph, _networkx(lines))
    # the content hash is the one of reading every line as data, as before header detection
    assert graph.content_hash() == read_network(path, policy=ImportPolicy(header="no"))[0].content_hash()
    assert not any(n.startswith("warning") for n in report.notes), report.notes


def test_unknown_names_forming_a_phantom_pair_warn_and_say_how_to_force(tmp_path):
    lines = ["person_a,person_b"] + BODY
    path = _write(tmp_path, lines)
    graph, report = read_network(path)
    assert _same_graph(graph, _networkx(lines))  # read as data, as the rule says ...
    assert report.components == 2 and sorted(report.component_sizes) == [2, 4]
    warning = [n for n in report.notes if n.startswith("warning")]
    assert len(warning) == 1  # ... but loudly, naming the line, the ids and the option
    assert "'person_a'" in warning[0] and "line 1" in warning[0]
    assert "--header yes" in warning[0]
    forced, _ = read_network(path, policy=ImportPolicy(header="yes"))
    assert _same_graph(forced, _networkx(BODY))


def test_header_detection_in_tab_and_whitespace_files(tmp_path):
    tsv = tmp_path / "g.tsv"
    tsv.write_text("u\tv\n" + "\n".join(b.replace(",", "\t") for b in BODY) + "\n")
    txt = tmp_path / "g.txt"
    txt.write_text("from  to\n" + "\n".join(b.replace(",", "   ") for b in BODY) + "\n")
    for path in (tsv, txt):
        graph, _ = read_network(path)
        assert _same_graph(graph, _networkx(BODY)), path


def test_cli_shows_the_warning_and_the_decision(cli, tmp_path):
    path = _write(tmp_path, ["person_a,person_b"] + BODY)
    r = cli("import", path, "--project", "p", "--network", "n")
    assert r.code == 0, r.err
    assert "WARNING:" in r.out and "--header yes" in r.out
    r = cli("import", path, "--project", "p", "--network", "m", "--json")
    assert r.code == 0 and "warning" in r.err and "--header yes" in r.err
    r = cli("import", _write(tmp_path, ["u,v"] + BODY, "h.csv"), "--project", "p", "--network",
            "k", "--json")
    assert r.code == 0 and r.json["nodes"] == 4 and r.json["edges"] == 4
