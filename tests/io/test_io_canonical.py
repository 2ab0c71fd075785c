"""Canonical form and content hash: independent of line order, endpoint order, format.

Outside references: networkx (karate club data set, writers for every
format, ``parse_edgelist``), scipy.io.mmwrite, Python's ``csv`` module for
RFC 4180 field splitting, Python's ``sorted`` for code-point order.
"""

from __future__ import annotations

import csv
import gzip
import io
import json
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
import scipy.io

from workspace.domain import ImportPolicy
from workspace.io import read_network

DATA = Path(__file__).resolve().parents[1] / "data"
KARATE_WEIGHT = {"csv": "weight", "tsv": 2, "txt": 2, "graphml": "weight", "mtx": "value",
                 "json": "weight"}


def _edge_dict(graph) -> dict[tuple[str, str], float]:
    ids = graph.node_ids
    return {tuple(sorted((str(ids[a]), str(ids[b])))): float(w)
            for a, b, w in zip(graph.edge_u, graph.edge_v, graph.weight)}


def test_karate_in_six_formats_hashes_equal_and_matches_networkx():
    # source: networkx.karate_club_graph (Zachary 1977: 34 members, 78 ties, weights)
    reference = nx.karate_club_graph()
    expected = {tuple(sorted((str(u + 1), str(v + 1)))): float(d["weight"])
                for u, v, d in reference.edges(data=True)}
    hashes = {}
    for ext, weight in KARATE_WEIGHT.items():
        graph, report = read_network(DATA / f"karate.{ext}", policy=ImportPolicy(weight=weight))
        assert (graph.n_nodes, graph.n_edges) == (34, 78), ext
        assert _edge_dict(graph) == expected, ext
        assert report.weight_summary["total"] == pytest.approx(reference.size(weight="weight"))
        assert report.components == nx.number_connected_components(reference) == 1
        hashes[ext] = graph.content_hash()
    assert len(set(hashes.values())) == 1, hashes


def _write_csv(path: Path, rows, header=None, delimiter=","):
    with open(path, "w", encoding="utf-8", newline="") as out:
        writer = csv.writer(out, delimiter=delimiter, lineterminator="\n")
        if header:
            writer.writerow(header)
        writer.writerows(rows)


def test_hash_ignores_line_order_and_endpoint_order(tmp_path):
    # reference graph: networkx.gnm_random_graph with weights k/10 (exact in text)
    rng = np.random.default_rng(7)
    G = nx.gnm_random_graph(200, 900, seed=11)
    rows = [(f"v{u}", f"v{v}", str(rng.integers(1, 60) / 10)) for u, v in G.edges]
    _write_csv(tmp_path / "a.csv", rows)
    shuffled = [rows[i] for i in rng.permutation(len(rows))]
    swapped = [(b, a, w) if rng.random() < 0.5 else (a, b, w) for a, b, w in shuffled]
    _write_csv(tmp_path / "b.csv", swapped)
    policy = ImportPolicy(weight=2)
    first, _ = read_network(tmp_path / "a.csv", policy=policy)
    second, _ = read_network(tmp_path / "b.csv", policy=policy)
    assert first.content_hash() == second.content_hash()
    # the graph itself agrees with networkx.parse_edgelist on the same lines
    text = (tmp_path / "b.csv").read_text().splitlines()
    H = nx.parse_edgelist(text, delimiter=",", nodetype=str, data=(("weight", float),))
    expected = {tuple(sorted(e)): d["weight"] for *e, d in H.edges(data=True)}
    assert _edge_dict(first) == expected


def test_sum_of_duplicates_does_not_depend_on_line_order(tmp_path):
    # 0.1 + 0.2 + 0.3 differs in the last bit between summation orders
    # (IEEE 754 double rounding, common practice); the hash must not.
    orders = [("0.1", "0.2", "0.3"), ("0.3", "0.2", "0.1"), ("0.2", "0.3", "0.1")]
    hashes = set()
    for k, order in enumerate(orders):
        rows = [("a", "b", order[0]), ("b", "a", order[1]), ("a", "b", order[2]), ("b", "c", "1")]
        _write_csv(tmp_path / f"{k}.csv", rows)
        graph, report = read_network(tmp_path / f"{k}.csv",
                                     policy=ImportPolicy(weight=2, duplicates="sum"))
        assert report.duplicates_merged == 2
        assert graph.weight[0] == pytest.approx(0.6)
        hashes.add(graph.content_hash())
    assert len(hashes) == 1


def _random_weighted_graph(n=60, m=150, seed=3):
    rng = np.random.default_rng(seed)
    G = nx.gnm_random_graph(n, m, seed=seed)
    H = nx.Graph()
    H.add_nodes_from(str(i + 1) for i in range(n))
    H.add_weighted_edges_from((str(u + 1), str(v + 1), float(rng.integers(1, 50) / 10))
                              for u, v in G.edges)
    return H


def test_same_graph_written_by_networkx_and_scipy_hashes_equal(tmp_path):
    # writers: networkx.write_weighted_edgelist, write_graphml, node_link_data; scipy.io.mmwrite
    H = _random_weighted_graph()
    lonely = [n for n in H if H.degree(n) == 0]
    H.remove_nodes_from(lonely)  # edge lists cannot carry isolated nodes
    nx.write_weighted_edgelist(H, tmp_path / "g.csv", delimiter=",")
    nx.write_weighted_edgelist(H, tmp_path / "g.tsv", delimiter="\t")
    nx.write_weighted_edgelist(H, tmp_path / "g.txt")
    nx.write_graphml(H, tmp_path / "g.graphml")
    (tmp_path / "g.json").write_text(json.dumps(nx.node_link_data(H, edges="links")))
    order = sorted(H.nodes, key=int)
    relabel = {node: str(i + 1) for i, node in enumerate(order)}
    H2 = nx.relabel_nodes(H, relabel)
    matrix = nx.to_scipy_sparse_array(H2, nodelist=[str(i + 1) for i in range(len(order))])
    scipy.io.mmwrite(tmp_path / "g_general.mtx", matrix, symmetry="general")
    scipy.io.mmwrite(tmp_path / "g_symmetric.mtx", matrix, symmetry="symmetric")
    policies = {"csv": 2, "tsv": 2, "txt": 2, "graphml": "weight", "json": "weight"}
    hashes = {ext: read_network(tmp_path / f"g.{ext}", policy=ImportPolicy(weight=w))[0]
              .content_hash() for ext, w in policies.items()}
    assert len(set(hashes.values())) == 1, hashes
    # Matrix Market numbers nodes 1..n; compare with the same graph relabelled
    nx.write_weighted_edgelist(H2, tmp_path / "relabelled.csv", delimiter=",")
    relabelled = read_network(tmp_path / "relabelled.csv", policy=ImportPolicy(weight=2))[0]
    for name in ("g_general.mtx", "g_symmetric.mtx"):
        graph = read_network(tmp_path / name, policy=ImportPolicy(weight="value"))[0]
        assert graph.content_hash() == relabelled.content_hash(), name


def test_isolated_nodes_survive_graphml_json_and_matrix_market(tmp_path):
    H = _random_weighted_graph(n=30, m=20, seed=5)  # sparse: several isolated nodes
    isolated = sorted(n for n in H if H.degree(n) == 0)
    assert isolated
    nx.write_graphml(H, tmp_path / "g.graphml")
    (tmp_path / "g.json").write_text(json.dumps(nx.node_link_data(H, edges="edges")))
    matrix = nx.to_scipy_sparse_array(H, nodelist=[str(i + 1) for i in range(30)])
    scipy.io.mmwrite(tmp_path / "g.mtx", matrix, symmetry="symmetric")
    hashes = set()
    for ext, weight in (("graphml", "weight"), ("json", "weight"), ("mtx", "value")):
        graph, report = read_network(tmp_path / f"g.{ext}", policy=ImportPolicy(weight=weight))
        assert graph.n_nodes == 30
        assert report.isolated_nodes == len(isolated) == nx.number_of_isolates(H)
        assert set(isolated) <= set(graph.node_ids.tolist())
        hashes.add(graph.content_hash())
    assert len(hashes) == 1


def test_canonical_layout(tmp_path):
    rows = [("b", "a", "2"), ("zeta", "Ärger", "1"), ("10", "9", "3"), ("a", "10", "4"),
            ("日本", "b", "5"), ("Ärger", "a", "6")]
    _write_csv(tmp_path / "g.csv", rows)
    graph, _ = read_network(tmp_path / "g.csv", policy=ImportPolicy(weight=2))
    ids = graph.node_ids.tolist()
    # Python's sorted() orders str by code point, the canonical order
    assert ids == sorted({x for r in rows for x in r[:2]})
    assert graph.edge_u.dtype == np.int64 and graph.edge_v.dtype == np.int64
    assert graph.weight.dtype == np.float64
    assert np.all(graph.edge_u < graph.edge_v)
    pairs = list(zip(graph.edge_u.tolist(), graph.edge_v.tolist()))
    assert pairs == sorted(set(pairs))


def test_ids_are_verbatim_strings(tmp_path):
    # field splitting reference: Python's csv module (RFC 4180 quoting)
    text = ('\ufeff007,7,1\n" padded ",x y,2\n"with,comma","say ""hi""",3\n'
            '1.0,1,4\nTRUE,null,5\n')
    (tmp_path / "g.csv").write_text(text, encoding="utf-8")
    graph, _ = read_network(tmp_path / "g.csv", policy=ImportPolicy(weight=2))
    expected_ids = {f for row in csv.reader(io.StringIO(text.lstrip("\ufeff"))) for f in row[:2]}
    assert set(graph.node_ids.tolist()) == expected_ids
    assert "007" in expected_ids and "7" in expected_ids and " padded " in expected_ids
    assert not any(x.startswith("\ufeff") for x in graph.node_ids.tolist())


def test_whitespace_and_crlf_and_gzip_read_the_same(tmp_path):
    plain = "a b 1\nb c 2\nc a 3\n"
    messy = "  a\t\tb   1  \r\n\r\nb c\t2\r\n\tc   a 3"
    (tmp_path / "plain.txt").write_text(plain)
    (tmp_path / "messy.txt").write_bytes(messy.encode())
    with gzip.open(tmp_path / "zipped.txt.gz", "wb") as out:
        out.write(plain.encode())
    policy = ImportPolicy(weight=2)
    hashes = {read_network(tmp_path / name, policy=policy)[0].content_hash()
              for name in ("plain.txt", "messy.txt", "zipped.txt.gz")}
    assert len(hashes) == 1
    # networkx.parse_edgelist splits on whitespace runs the same way
    H = nx.parse_edgelist(messy.splitlines(), nodetype=str, data=(("weight", float),))
    graph = read_network(tmp_path / "messy.txt", policy=policy)[0]
    assert _edge_dict(graph) == {tuple(sorted(e)): d["weight"] for *e, d in H.edges(data=True)}


@pytest.mark.parametrize("n_nodes, m", [(10, 50), (1 << 22, 1 << 20), (1 << 31, 3000), (7, 1 << 16)])
def test_stable_order_equals_numpy_stable_argsort(n_nodes, m):
    # the order of pair keys lo * n + hi < n**2, also where key * m overflows int64 (the two-digit
    # path); reference numpy.argsort(kind="stable") on keys with many ties
    from workspace.io.canonical import _stable_order

    rng = np.random.default_rng(m)
    key = rng.integers(0, n_nodes * n_nodes, m, dtype=np.int64)
    key[rng.integers(0, m, m // 3)] = key[rng.integers(0, m, m // 3)]
    assert np.array_equal(_stable_order(key, n_nodes * n_nodes), np.argsort(key, kind="stable"))


@pytest.mark.parametrize("rule", ["max", "sum", "first", "error"])
@pytest.mark.parametrize("n_nodes, m, repeats", [(1 << 22, 1 << 15, 0), (1 << 22, 1 << 15, 300),
                                                 (7, 400, 0), (7, 400, 50), (1 << 31, 2000, 40)])
def test_keys_only_merge_of_uniform_weights_equals_the_stable_merge(rule, n_nodes, m, repeats):
    # merge_duplicates(keys_only=True) sorts the keys in place when every weight is the same; the
    # reference is the same function on the stable order (numpy.argsort(kind="stable")
    # equivalent, test above): equal keys, equal weight bits (0.1: sums of it are inexact)
    from workspace.io.canonical import merge_duplicates

    rng = np.random.default_rng(m + repeats)
    key = rng.integers(0, n_nodes * n_nodes, m, dtype=np.int64)
    if repeats:
        key[rng.integers(0, m, repeats)] = key[rng.integers(0, m, repeats)]
    elif np.unique(key).size < m:                      # (7 nodes: 49 keys, repeats anyway)
        key = np.arange(m, dtype=np.int64)[::-1].copy()
    weight = np.full(m, 0.1)
    record = np.arange(m, dtype=np.int64) + 2

    def message(repeat, first, k):
        return ValueError(f"{repeat} {first} {k}")

    def merged(**kw):
        try:
            return merge_duplicates(key.copy(), weight.copy(), record.copy(), rule, message,
                                    n_nodes * n_nodes, **kw)
        except ValueError as exc:
            return str(exc)

    reference, fast = merged(), merged(keys_only=True)
    if isinstance(reference, str):
        assert fast == reference                  # the same record named
        return
    assert np.array_equal(fast[0], reference[0]) and fast[3] == reference[3]
    assert fast[1].dtype == reference[1].dtype and fast[1].tobytes() == reference[1].tobytes()
    assert fast[2] is None
    # weights that differ take the stable path: the same merge, only the records left out
    varied = weight * rng.integers(1, 4, m)
    a = merge_duplicates(key.copy(), varied.copy(), record.copy(), rule, message, n_nodes * n_nodes) \
        if rule != "error" or not repeats else None
    if a is not None:
        b = merge_duplicates(key.copy(), varied.copy(), record.copy(), rule, message, n_nodes * n_nodes,
                             keys_only=True)
        assert np.array_equal(a[0], b[0]) and a[1].tobytes() == b[1].tobytes() and a[3] == b[3]
