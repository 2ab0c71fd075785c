"""The ``directed="keep"`` import policy: arcs keep their direction.

Outside references: networkx's readers and writers (``read_weighted_edgelist`` with
``create_using=DiGraph``, ``write_graphml``, ``node_link_data``), scipy.io.mmwrite, and
the content hash documented in README for the shipped sample (recorded before this
policy existed: undirected hashes must not change).
"""

from __future__ import annotations

import json

import networkx as nx
import numpy as np
import pytest
import scipy.io

from workspace.domain import ImportPolicy
from workspace.errors import InputError
from workspace.io import SAMPLES_DIR, read_network

KEEP = ImportPolicy(directed="keep", weight="weight")


def _arcs(graph) -> dict[tuple[str, str], float]:
    ids = graph.node_ids
    return {(str(ids[a]), str(ids[b])): float(w) for a, b, w in zip(graph.edge_u, graph.edge_v, graph.weight)}


def _digraph() -> nx.DiGraph:
    G = nx.gnm_random_graph(40, 150, seed=5, directed=True)
    for k, (u, v) in enumerate(G.edges()):
        G[u][v]["weight"] = 1 + (k % 7) / 4       # exact in text
    return nx.relabel_nodes(G, {v: f"s{v}" for v in G})


def test_csv_rows_are_arcs_and_agree_with_networkx(tmp_path):
    G = _digraph()
    path = tmp_path / "trips.csv"
    with open(path, "w") as out:
        out.write("source,target,weight\n")
        for u, v, w in G.edges(data="weight"):
            out.write(f"{u},{v},{w}\n")
    graph, report = read_network(path, policy=KEEP)
    assert graph.directed
    ref = nx.read_weighted_edgelist(path, delimiter=",", create_using=nx.DiGraph, comments="source")
    assert _arcs(graph) == {(u, v): w for u, v, w in ref.edges(data="weight")}
    # every reciprocal pair with equal weights is symmetric; networkx counts the others
    asym = sum(1 for u, v in G.edges() if not G.has_edge(v, u) or G[v][u]["weight"] != G[u][v]["weight"])
    recip_unequal = sum(1 for u, v in G.edges() if G.has_edge(v, u) and G[v][u]["weight"] != G[u][v]["weight"])
    assert report.asymmetric_pairs == asym - recip_unequal // 2
    assert report.edges == G.number_of_edges()
    # the adjacency has row = tail
    A = graph.adjacency()
    index = {str(x): i for i, x in enumerate(graph.node_ids)}
    for u, v, w in G.edges(data="weight"):
        assert A[index[u], index[v]] == w


def test_same_digraph_in_four_formats_hashes_equal(tmp_path):
    G = _digraph()
    csv_path = tmp_path / "g.csv"
    with open(csv_path, "w") as out:
        out.write("a,b,weight\n")
        for u, v, w in G.edges(data="weight"):
            out.write(f"{u},{v},{w}\n")
    nx.write_graphml(G, tmp_path / "g.graphml")                     # edgedefault="directed"
    (tmp_path / "g.json").write_text(json.dumps(nx.node_link_data(G, edges="links")))
    H = nx.convert_node_labels_to_integers(G, first_label=1, ordering="sorted")
    scipy.io.mmwrite(tmp_path / "g.mtx", nx.to_scipy_sparse_array(H, nodelist=sorted(H), weight="weight"))
    hashes = {}
    for name in ("g.csv", "g.graphml", "g.json"):
        graph, _ = read_network(tmp_path / name, policy=KEEP)
        assert graph.directed and graph.n_edges == G.number_of_edges()
        hashes[name] = graph.content_hash()
    assert len(set(hashes.values())) == 1, hashes
    mtx, _ = read_network(tmp_path / "g.mtx", policy=ImportPolicy(directed="keep", weight="value"))
    assert mtx.directed and mtx.n_edges == G.number_of_edges()


def test_undirected_file_under_keep_gives_two_arcs(tmp_path):
    G = nx.Graph([("a", "b"), ("b", "c")])
    nx.write_graphml(G, tmp_path / "u.graphml")                     # edgedefault="undirected"
    graph, report = read_network(tmp_path / "u.graphml", policy=ImportPolicy(directed="keep"))
    # networkx.Graph.to_directed: each undirected edge becomes two arcs
    assert set(_arcs(graph)) == set(G.to_directed().edges())
    assert any("two arcs" in note for note in report.notes)


def test_undirected_hashes_do_not_change_and_direction_changes_the_hash(tmp_path):
    # README documents this sample's hash prefix (ec0291243a26); the full value was recorded
    # with the code before the "keep" policy existed
    sample = SAMPLES_DIR / "river_towns.csv"
    graph, _ = read_network(sample, policy=ImportPolicy(weight="weight"))
    assert not graph.directed
    assert graph.content_hash() == "ec0291243a265da8d5f509b4d9ac285db54af195f6c40dcd832c8a5cffe7df47"
    kept, _ = read_network(sample, policy=ImportPolicy(weight="weight", directed="keep"))
    assert kept.directed and kept.content_hash() != graph.content_hash()
    # same arrays, other direction flag: never the same hash
    from workspace.domain import GraphData

    as_undirected = GraphData(kept.node_ids, kept.edge_u, kept.edge_v, kept.weight)
    assert as_undirected.content_hash() != kept.content_hash()


def test_keep_policy_duplicates_are_same_direction_only(tmp_path):
    path = tmp_path / "d.csv"
    path.write_text("a,b,1\nb,a,3\na,b,2\n", encoding="utf-8")
    graph, report = read_network(path, policy=ImportPolicy(directed="keep", weight=2, duplicates="sum",
                                                           header="no"))
    # worked by hand: a->b summed (1 + 2), b->a kept apart
    assert _arcs(graph) == {("a", "b"): 3.0, ("b", "a"): 3.0}
    assert report.duplicates_merged == 1 and report.asymmetric_pairs == 0
    with pytest.raises(InputError, match=r"duplicate edge 'a' -> 'b'.*line 1") as err:
        read_network(path, policy=ImportPolicy(directed="keep", weight=2, duplicates="error", header="no"))
    assert err.value.line == 3


def test_keep_policy_self_loop_arcs(tmp_path):
    path = tmp_path / "l.csv"
    path.write_text("a,a,2\na,b,1\nb,c,1\n", encoding="utf-8")
    graph, report = read_network(path, policy=ImportPolicy(directed="keep", weight=2, self_loops="keep",
                                                           header="no"))
    assert _arcs(graph)[("a", "a")] == 2.0 and report.self_loops_kept == 1
    A = graph.adjacency()
    assert A[0, 0] == 2.0 and np.count_nonzero(A.toarray()) == 3
