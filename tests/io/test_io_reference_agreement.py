"""GraphML, Matrix Market and node-link JSON readings agree with the reference readers
networkx.read_graphml, scipy.io.mmread and networkx.node_link_graph on the same files.
"""

from __future__ import annotations

import json
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
import scipy.io
import scipy.sparse as sp

from workspace.domain import ImportPolicy
from workspace.io import read_network

DATA = Path(__file__).resolve().parents[1] / "data"


def edges(graph) -> dict[frozenset, float]:
    ids = graph.node_ids
    return {frozenset((str(ids[a]), str(ids[b]))): float(w)
            for a, b, w in zip(graph.edge_u, graph.edge_v, graph.weight)}


def nx_edges(G, key="weight") -> dict[frozenset, float]:
    return {frozenset((str(a), str(b))): float(d.get(key, 1.0)) for a, b, d in G.edges(data=True)}


def _attribute_graph(seed=4):
    rng = np.random.default_rng(seed)
    G = nx.gnm_random_graph(40, 90, seed=seed)
    H = nx.Graph()
    names = {i: f"n{i:02d}" if i % 3 else f"Knoten-{i}-ä" for i in G}
    H.add_nodes_from(names.values())
    for u, v in G.edges:
        H.add_edge(names[u], names[v], weight=float(rng.integers(1, 40)) / 8,
                   label=f"e{u}-{v}", strength=int(rng.integers(0, 3)))
    H.add_node("island")
    return H


@pytest.mark.parametrize("path", [DATA / "karate.graphml", None])
def test_graphml_agrees_with_networkx_read_graphml(tmp_path, path):
    if path is None:
        path = tmp_path / "attributes.graphml"
        nx.write_graphml(_attribute_graph(), path)
    reference = nx.read_graphml(path)  # networkx.read_graphml
    graph, report = read_network(path, policy=ImportPolicy(weight="weight"))
    assert set(graph.node_ids.tolist()) == {str(n) for n in reference.nodes}
    assert edges(graph) == nx_edges(reference)
    assert report.isolated_nodes == nx.number_of_isolates(reference)
    # another attribute as weight
    if path.name == "attributes.graphml":
        by_label_key, _ = read_network(path, policy=ImportPolicy(weight="strength"))
        expected = {e: w for e, w in nx_edges(reference, "strength").items() if w != 0}
        assert edges(by_label_key) == expected


def test_graphml_unweighted_agrees_with_networkx(tmp_path):
    G = nx.les_miserables_graph()  # shipped with networkx
    nx.write_graphml(G, tmp_path / "lm.graphml")
    reference = nx.read_graphml(tmp_path / "lm.graphml")
    graph, report = read_network(tmp_path / "lm.graphml")
    assert edges(graph) == {e: 1.0 for e in nx_edges(reference)}
    assert report.nodes == reference.number_of_nodes() == 77
    assert report.edges == reference.number_of_edges() == 254
    assert any("present but no weight chosen" in note for note in report.notes)


def test_directed_graphml_agrees_with_networkx_digraph():
    reference = nx.read_graphml(DATA / "directed.graphml")
    graph, _ = read_network(DATA / "directed.graphml",
                            policy=ImportPolicy(weight="weight", directed="max"))
    # symmetrised reference: networkx DiGraph.to_undirected keeps one arc's data, so build
    # max(W_ab, W_ba) from the arcs directly (common practice for max-symmetrisation)
    expected: dict[frozenset, float] = {}
    for a, b, d in reference.edges(data=True):
        key = frozenset((a, b))
        expected[key] = max(expected.get(key, 0.0), d["weight"])
    assert edges(graph) == expected
    assert set(graph.node_ids.tolist()) == set(reference.nodes)


def _dense_from_graph(graph, n):
    index = np.array([int(x) - 1 for x in graph.node_ids.tolist()])
    A = np.zeros((n, n))
    A[index[graph.edge_u], index[graph.edge_v]] = graph.weight
    A[index[graph.edge_v], index[graph.edge_u]] = graph.weight
    return A


def test_matrix_market_agrees_with_scipy_mmread(tmp_path):
    reference = scipy.io.mmread(DATA / "karate.mtx").toarray()  # scipy.io.mmread
    graph, _ = read_network(DATA / "karate.mtx", policy=ImportPolicy(weight="value"))
    assert np.array_equal(_dense_from_graph(graph, 34), reference)
    # a general (directed) matrix, symmetrised by sum: A + A^T
    rng = np.random.default_rng(2)
    M = sp.random_array((25, 25), density=0.1, rng=rng, format="coo")
    M.data = np.round(M.data * 10) + 1
    scipy.io.mmwrite(tmp_path / "general.mtx", M, symmetry="general")
    read_back = scipy.io.mmread(tmp_path / "general.mtx").toarray()
    graph, _ = read_network(tmp_path / "general.mtx",
                            policy=ImportPolicy(weight="value", directed="sum",
                                                self_loops="keep"))
    expected = read_back + read_back.T
    expected[np.diag_indices(25)] = 2 * np.diag(read_back)  # A + A^T on the diagonal
    assert np.array_equal(_dense_from_graph(graph, 25), expected)
    assert graph.n_nodes == 25  # every row is a node, empty rows too


def test_matrix_market_array_format_agrees_with_scipy(tmp_path):
    A = np.array([[0, 2, 0, 0], [2, 0, 1.5, 0], [0, 1.5, 0, 0], [0, 0, 0, 0]])
    scipy.io.mmwrite(tmp_path / "dense.mtx", A, symmetry="symmetric")
    reference = scipy.io.mmread(tmp_path / "dense.mtx")
    graph, report = read_network(tmp_path / "dense.mtx", policy=ImportPolicy(weight="value"))
    assert np.array_equal(_dense_from_graph(graph, 4), reference)
    assert report.isolated_nodes == 1


def test_matrix_market_pattern_agrees_with_scipy(tmp_path):
    text = "%%MatrixMarket matrix coordinate pattern symmetric\n4 4 3\n2 1\n3 2\n4 3\n"
    (tmp_path / "p.mtx").write_text(text)
    reference = scipy.io.mmread(tmp_path / "p.mtx").toarray()
    graph, report = read_network(tmp_path / "p.mtx")
    assert np.array_equal(_dense_from_graph(graph, 4), reference)
    assert not report.weighted


@pytest.mark.parametrize("links_key", ["links", "edges"])
def test_node_link_json_agrees_with_networkx(tmp_path, links_key):
    H = _attribute_graph(seed=9)
    H.add_node(17)  # an integer id
    H.add_edge(17, "n01", weight=2.5)
    (tmp_path / "g.json").write_text(json.dumps(nx.node_link_data(H, edges=links_key)))
    document = json.loads((tmp_path / "g.json").read_text())
    reference = nx.node_link_graph(document, edges=links_key)  # networkx.node_link_graph
    graph, _ = read_network(tmp_path / "g.json", policy=ImportPolicy(weight="weight"))
    assert set(graph.node_ids.tolist()) == {str(n) for n in reference.nodes}
    assert edges(graph) == nx_edges(reference)


def test_csv_agrees_with_networkx_read_edgelist(tmp_path):
    G = nx.les_miserables_graph()  # shipped with networkx, weighted co-appearances
    nx.write_weighted_edgelist(G, tmp_path / "f.txt", delimiter=";")
    reference = nx.read_weighted_edgelist(tmp_path / "f.txt", delimiter=";")
    graph, _ = read_network(tmp_path / "f.txt", policy=ImportPolicy(weight=2, delimiter=";"))
    assert edges(graph) == nx_edges(reference)


@pytest.mark.parametrize("blank_lines", [False, True])
def test_large_file_read_from_the_file_agrees_with_networkx(tmp_path, monkeypatch, blank_lines):
    # file mode (io.delimited.read_delimited_file, the reader of large files: Arrow parses the
    # file itself) on a file larger than the header sample, with a header, weights, quoted ids
    # and (optionally) blank lines; reference networkx.parse_edgelist on the same lines
    from workspace.io import delimited

    taken = []
    original = delimited.read_delimited_file
    monkeypatch.setattr(delimited, "STREAM_FROM_BYTES", 0)
    monkeypatch.setattr(delimited, "read_delimited_file",
                        lambda *a, **k: taken.append(original(*a, **k)) or taken[-1])
    G = nx.gnm_random_graph(3000, 30000, seed=5)
    rng = np.random.default_rng(5)
    rows = [(f"station-{u:06d}-{'x' * (u % 41)}", f"station-{v:06d}-{'x' * (v % 41)}",
             int(rng.integers(1, 9))) for u, v in G.edges]
    lines = ["from,to,w"] + [f'"{a}",{b},{w}' if k % 5 == 0 else f"{a},{b},{w}"
                            for k, (a, b, w) in enumerate(rows)]
    if blank_lines:
        lines[100:100] = ["", ""]
    path = tmp_path / "big.csv"
    path.write_text("\n".join(lines) + "\n")
    assert path.stat().st_size > delimited._SAMPLE_BYTES
    reference = nx.parse_edgelist([f"{a} {b} {w}" for a, b, w in rows], data=[("weight", float)])
    graph, report = read_network(path, policy=ImportPolicy(weight="w", duplicates="error"))
    assert taken and taken[0] is not None
    assert edges(graph) == nx_edges(reference)
    assert report.records_read == len(rows)
    # an error found after parsing names the file line (header and blank lines counted)
    dup = lines[-1]
    path.write_text("\n".join(lines + [dup]) + "\n")
    with pytest.raises(Exception, match=rf":{len(lines) + 1}: duplicate edge"):
        read_network(path, policy=ImportPolicy(weight="w", duplicates="error"))
    assert taken[-1] is not None
