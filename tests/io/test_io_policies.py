"""Each ImportPolicy field, on small files whose expected graphs are worked out by hand
(or read by networkx where a library reading exists).

Symmetrisation rules are the entrywise matrix forms A + A^T, max(A, A^T),
min(A, A^T), (A + A^T) / 2 (common practice, e.g. Newman, "Networks", 2nd
ed. 2018, section 6.4 on making directed networks undirected).
"""

from __future__ import annotations

import json
from pathlib import Path

import networkx as nx
import numpy as np
import pytest

from workspace.domain import ImportPolicy
from workspace.errors import InputError, ParameterError
from workspace.io import FORMATS, read_network

DATA = Path(__file__).resolve().parents[1] / "data"


def edges(graph) -> dict[tuple[str, str], float]:
    ids = graph.node_ids
    return {(str(ids[a]), str(ids[b])): float(w)
            for a, b, w in zip(graph.edge_u, graph.edge_v, graph.weight)}


def write(tmp_path: Path, name: str, text: str) -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


DUPLICATES = "a,b,1\nb,a,3\na,b,2\nb,c,5\n"


@pytest.mark.parametrize("rule, expected", [("sum", 6.0), ("max", 3.0), ("first", 1.0)])
def test_duplicates_rules(tmp_path, rule, expected):
    # hand computed: the pair {a, b} appears with weights 1, 3, 2 (reversed pairs count)
    path = write(tmp_path, "d.csv", DUPLICATES)
    graph, report = read_network(path, policy=ImportPolicy(weight=2, duplicates=rule))
    assert edges(graph) == {("a", "b"): expected, ("b", "c"): 5.0}
    assert report.duplicates_merged == 2
    assert any(f"merged by {rule}" in note for note in report.notes)


def test_duplicates_default_is_max(tmp_path):
    graph, _ = read_network(write(tmp_path, "d.csv", DUPLICATES), policy=ImportPolicy(weight=2))
    assert edges(graph)[("a", "b")] == 3.0


def test_duplicates_error_names_the_repeat_line(tmp_path):
    with pytest.raises(InputError) as err:
        read_network(write(tmp_path, "d.csv", DUPLICATES),
                     policy=ImportPolicy(weight=2, duplicates="error"))
    assert err.value.line == 2
    assert "duplicate edge 'a' - 'b' (first at line 1)" in str(err.value)
    assert "--duplicates" in str(err.value)


LOOPS = "a,b\nb,b\nb,c\nc,c\n"


def test_self_loops_drop_keep_error(tmp_path):
    path = write(tmp_path, "l.csv", LOOPS)
    dropped, report = read_network(path, policy=ImportPolicy(self_loops="drop"))
    assert edges(dropped) == {("a", "b"): 1.0, ("b", "c"): 1.0}
    assert (report.self_loops_found, report.self_loops_kept) == (2, 0)
    kept, report = read_network(path, policy=ImportPolicy(self_loops="keep"))
    assert edges(kept) == {("a", "b"): 1.0, ("b", "b"): 1.0, ("b", "c"): 1.0, ("c", "c"): 1.0}
    assert (report.self_loops_found, report.self_loops_kept) == (2, 2)
    # a kept loop puts w once on the diagonal (networkx.to_scipy_sparse_array does the same)
    G = nx.Graph([("a", "b"), ("b", "b"), ("b", "c"), ("c", "c")])
    ref = nx.to_scipy_sparse_array(G, nodelist=["a", "b", "c"]).toarray()
    assert np.array_equal(kept.adjacency().toarray(), ref)
    with pytest.raises(InputError) as err:
        read_network(path, policy=ImportPolicy(self_loops="error"))
    assert err.value.line == 2 and "self-loop on node 'b'" in str(err.value)


def _nx_directed_weights():
    # reference reading: networkx.read_graphml of the same directed file
    D = nx.read_graphml(DATA / "directed.graphml")
    assert D.is_directed()
    pairs = {}
    for a, b in {tuple(sorted(e)) for e in D.edges}:
        w_ab = D.get_edge_data(a, b, {}).get("weight", 0.0)
        w_ba = D.get_edge_data(b, a, {}).get("weight", 0.0)
        pairs[(a, b)] = (w_ab, w_ba)
    return D, pairs


@pytest.mark.parametrize("rule, combine", [
    ("sum", lambda x, y: x + y), ("max", max), ("min", min), ("mean", lambda x, y: (x + y) / 2),
])
def test_directed_rules_against_networkx_reading(rule, combine):
    D, pairs = _nx_directed_weights()
    expected = {p: combine(*w) for p, w in pairs.items() if combine(*w) != 0}
    graph, report = read_network(DATA / "directed.graphml",
                                 policy=ImportPolicy(weight="weight", directed=rule))
    assert edges(graph) == expected
    asymmetric = sum(1 for w_ab, w_ba in pairs.values() if w_ab != w_ba)
    assert report.asymmetric_pairs == asymmetric == 2
    assert set(graph.node_ids.tolist()) == set(D.nodes)  # "lonely" stays, isolated
    assert report.isolated_nodes == nx.number_of_isolates(D)


def test_directed_error_counts_pairs_and_names_the_flag():
    with pytest.raises(InputError) as err:
        read_network(DATA / "directed.graphml", policy=ImportPolicy(weight="weight"))
    message = str(err.value)
    assert "2 asymmetric pair(s)" in message and "--directed sum|max|min|mean" in message


def test_directed_but_symmetric_input_is_accepted(tmp_path):
    data = {"directed": True, "multigraph": False, "graph": {},
            "nodes": [{"id": "a"}, {"id": "b"}, {"id": "c"}],
            "links": [{"source": "a", "target": "b", "w": 2}, {"source": "b", "target": "a", "w": 2},
                      {"source": "c", "target": "c", "w": 1}]}
    path = write(tmp_path, "g.json", json.dumps(data))
    graph, report = read_network(path, policy=ImportPolicy(weight="w", self_loops="keep"))
    assert edges(graph) == {("a", "b"): 2.0, ("c", "c"): 1.0}
    assert report.asymmetric_pairs == 0
    # A + A^T doubles the diagonal: a loop arc is its own reverse
    summed, _ = read_network(path, policy=ImportPolicy(weight="w", self_loops="keep",
                                                       directed="sum"))
    assert edges(summed) == {("a", "b"): 4.0, ("c", "c"): 2.0}


def test_matrix_market_general_is_directed(tmp_path):
    text = ("%%MatrixMarket matrix coordinate real general\n3 3 3\n"
            "1 2 2.0\n2 1 2.0\n3 1 1.5\n")
    path = write(tmp_path, "g.mtx", text)
    with pytest.raises(InputError, match="1 asymmetric pair"):
        read_network(path, policy=ImportPolicy(weight="value"))
    graph, _ = read_network(path, policy=ImportPolicy(weight="value", directed="max"))
    assert edges(graph) == {("1", "2"): 2.0, ("1", "3"): 1.5}


@pytest.mark.parametrize("weight", ["w", "W", 3, "3"])
def test_weight_column_by_name_or_index(tmp_path, weight):
    path = write(tmp_path, "g.csv", "src,dst,other,w\na,b,9,1.5\nb,c,9,2.5\n")
    graph, report = read_network(path, policy=ImportPolicy(weight=weight))
    assert edges(graph) == {("a", "b"): 1.5, ("b", "c"): 2.5}
    assert report.weighted


def test_no_weight_column_means_weight_one(tmp_path):
    path = write(tmp_path, "g.csv", "src,dst,w\na,b,1.5\nb,c,2.5\n")
    graph, report = read_network(path)
    assert edges(graph) == {("a", "b"): 1.0, ("b", "c"): 1.0}
    assert not report.weighted
    assert any("ignored" in note for note in report.notes)


def test_weight_column_errors(tmp_path):
    path = write(tmp_path, "g.csv", "src,dst,w\na,b,1.5\n")
    with pytest.raises(ParameterError, match="endpoint column"):
        read_network(path, policy=ImportPolicy(weight=1))
    with pytest.raises(InputError, match="does not exist: the file has 3 columns"):
        read_network(path, policy=ImportPolicy(weight=5))
    with pytest.raises(InputError, match="no single column named 'mass'") as err:
        read_network(path, policy=ImportPolicy(weight="mass"))
    assert err.value.line == 1
    with pytest.raises(ParameterError, match="header='no'"):
        read_network(path, policy=ImportPolicy(weight="w", header="no"))


def test_zero_weights_dropped_and_counted(tmp_path):
    path = write(tmp_path, "g.csv", "a,b,0\nb,c,2\nc,d,0.0\n")
    graph, report = read_network(path, policy=ImportPolicy(weight=2))
    assert edges(graph) == {("b", "c"): 2.0}
    assert report.zero_weight_dropped == 2
    assert graph.n_nodes == 4  # nodes named by dropped records stay (isolated)


def test_numeric_ids(tmp_path):
    path = write(tmp_path, "g.csv", "007,7,1\n+7,8,2\n 9 ,10,1\n")
    verbatim, _ = read_network(path, policy=ImportPolicy(weight=2))
    assert set(verbatim.node_ids.tolist()) == {"007", "7", "+7", "8", " 9 ", "10"}
    numeric, report = read_network(path, policy=ImportPolicy(weight=2, numeric_ids=True))
    assert edges(numeric) == {("10", "9"): 1.0, ("7", "8"): 2.0}  # code-point order: "10" < "9"
    assert report.self_loops_found == 1  # "007" - "7" became a loop on 7
    bad = write(tmp_path, "bad.csv", "1,2\n\n3,x\n")
    with pytest.raises(InputError, match="node id 'x' is not an integer") as err:
        read_network(bad, policy=ImportPolicy(numeric_ids=True))
    assert err.value.line == 3


def test_comment_marker(tmp_path):
    text = "# exported 2024\na,b,1 # first\n\n   # indented comment\nb,c,2\n#c,d,3\nc,d,x\n"
    path = write(tmp_path, "g.csv", text)
    with pytest.raises(InputError) as err:  # no comment marker by default
        read_network(path, policy=ImportPolicy(weight=2))
    with pytest.raises(InputError, match="weight 'x' is not a number") as err:
        read_network(path, policy=ImportPolicy(weight=2, comment="#"))
    assert err.value.line == 7  # comment and blank lines are counted
    fixed = write(tmp_path, "ok.csv", text.replace("c,d,x", "c,d,4"))
    graph, _ = read_network(fixed, policy=ImportPolicy(weight=2, comment="#"))
    assert edges(graph) == {("a", "b"): 1.0, ("b", "c"): 2.0, ("c", "d"): 4.0}


@pytest.mark.parametrize("delimiter, text", [
    (";", "a;b;1\nb;c;2\n"), ("tab", "a\tb\t1\nb\tc\t2\n"), ("|", "a|b|1\nb|c|2\n"),
    ("whitespace", "a   b 1\n b\tc 2\n"), (",", "a,b,1\nb,c,2\n"),
])
def test_delimiter(tmp_path, delimiter, text):
    path = write(tmp_path, "g.csv", text)
    graph, _ = read_network(path, policy=ImportPolicy(weight=2, delimiter=delimiter))
    assert edges(graph) == {("a", "b"): 1.0, ("b", "c"): 2.0}


def test_delimiter_must_be_one_character(tmp_path):
    with pytest.raises(ParameterError, match="one character"):
        read_network(write(tmp_path, "g.csv", "a,b\n"), policy=ImportPolicy(delimiter=";;"))


@pytest.mark.parametrize("text, header, reason", [
    ("source,target\nalice,bob\nbob,carol\n", True, "names the endpoint columns"),
    ("From,To\n1,2\n", True, "names the endpoint columns"),
    ("a,b,weight\nx,y,1.5\ny,z,2\n", True, "column below it is numeric"),
    ("left,right\n1,2\n2,3\n", True, "column below it is numeric"),
    ("alice,bob\ncarol,dave\n", False, "read as data"),          # nothing marks a header
    ("1,2\n2,3\n", False, "read as data"),                       # numeric first line
    ("hub,root\nhub,1\n1,2\n", False, "also occur as node ids"),  # names reappear as ids
    ("root,1\n1,2\n", False, "read as data"),                    # a numeric field
])
def test_header_auto(tmp_path, text, header, reason):
    path = write(tmp_path, "g.csv", text)
    graph, report = read_network(path)
    first = text.splitlines()[0].split(",")
    edge = tuple(sorted(first[:2]))
    assert (edge not in edges(graph)) == header
    assert any(reason in note for note in report.notes), report.notes


def test_header_yes_and_no(tmp_path):
    path = write(tmp_path, "g.csv", "alice,bob\ncarol,dave\n")
    assert ("alice", "bob") not in edges(read_network(path, policy=ImportPolicy(header="yes"))[0])
    path = write(tmp_path, "h.csv", "source,target\nalice,bob\n")
    assert ("source", "target") in edges(read_network(path, policy=ImportPolicy(header="no"))[0])


def test_policy_values_are_checked(tmp_path):
    path = write(tmp_path, "g.csv", "a,b\n")
    for bad in (ImportPolicy(duplicates="min"), ImportPolicy(self_loops="yes"),
                ImportPolicy(directed="up"), ImportPolicy(header="maybe"),
                ImportPolicy(weight=-1), ImportPolicy(comment="")):
        with pytest.raises(ParameterError):
            read_network(path, policy=bad)
    with pytest.raises(ParameterError, match="unknown format"):
        read_network(path, format="xlsx")


def test_format_option_overrides_extension(tmp_path):
    path = write(tmp_path, "edges.dat", "a b 2\nb c 3\n")
    graph, report = read_network(path, format="edgelist", policy=ImportPolicy(weight=2))
    assert edges(graph) == {("a", "b"): 2.0, ("b", "c"): 3.0} and report.format == "edgelist"
    assert [name for name, _ in FORMATS] == ["csv", "tsv", "edgelist", "graphml", "mtx", "json"]


def test_progress_reports_stages(tmp_path):
    seen = []
    read_network(write(tmp_path, "g.csv", "a,b\nb,c\n"),
                 progress=lambda stage, done, total: seen.append(stage))
    assert {"read", "parse", "canonicalise", "report"} <= set(seen)


def test_report_fields(tmp_path):
    # two components {a,b,c} and {d,e}, isolated f (only a dropped loop), hand counted
    path = write(tmp_path, "g.csv", "a,b,1\nb,c,3\nd,e,2\nf,f,1\nc,a,0\nb,a,5\n")
    graph, report = read_network(path, policy=ImportPolicy(weight=2))
    G = nx.Graph([("a", "b"), ("b", "c"), ("d", "e")])
    G.add_node("f")
    assert report.records_read == 6
    assert (report.nodes, report.edges) == (6, 3)
    assert report.components == nx.number_connected_components(G) == 3
    assert report.component_sizes == sorted((len(c) for c in nx.connected_components(G)),
                                            reverse=True)
    assert report.isolated_nodes == 1
    assert (report.self_loops_found, report.duplicates_merged, report.zero_weight_dropped) == \
        (1, 1, 1)
    assert report.weight_summary == {"min": 2.0, "max": 5.0, "mean": 10 / 3, "median": 3.0,
                                     "total": 10.0}
    assert json.loads(json.dumps(report.as_dict()))["format"] == "csv"


def test_mixed_graphml_counts_undirected_edges_as_two_arcs(tmp_path):
    # hand computed: a-b undirected (3) is symmetric; b->c directed (2) has no reverse
    text = ('<?xml version="1.0"?>\n<graphml xmlns="http://graphml.graphdrawing.org/xmlns">\n'
            '<key id="w" for="edge" attr.name="weight"/>\n<graph edgedefault="undirected">\n'
            '<edge source="a" target="b"><data key="w">3</data></edge>\n'
            '<edge source="b" target="c" directed="true"><data key="w">2</data></edge>\n'
            '</graph></graphml>\n')
    path = write(tmp_path, "mixed.graphml", text)
    with pytest.raises(InputError, match="1 asymmetric pair") as err:
        read_network(path, policy=ImportPolicy(weight="weight"))
    assert err.value.line == 6
    graph, report = read_network(path, policy=ImportPolicy(weight="weight", directed="mean"))
    assert edges(graph) == {("a", "b"): 3.0, ("b", "c"): 1.0}
    assert report.asymmetric_pairs == 1
