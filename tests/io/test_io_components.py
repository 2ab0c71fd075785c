"""Connected components of the import report (numpy hooking and pointer jumping).

References, outside the code under test: ``networkx.connected_components`` (networkx 3.x) gives
the node sets, so the expected label of a node is the smallest node of its set;
``scipy.sparse.csgraph.connected_components`` (scipy 1.x) gives the component count. Paths in
several node orders are the inputs that need the most rounds of min-label hooking (common
practice for label-propagation connectivity; Shiloach and Vishkin 1982).
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from workspace.io import canonical
from workspace.io.canonical import component_labels


def _expected(n: int, u: np.ndarray, v: np.ndarray) -> np.ndarray:
    G = nx.Graph()
    G.add_nodes_from(range(n))
    G.add_edges_from(zip(u.tolist(), v.tolist()))
    labels = np.empty(n, dtype=np.int64)
    for nodes in nx.connected_components(G):
        labels[list(nodes)] = min(nodes)
    return labels


def _scipy_count(n: int, u: np.ndarray, v: np.ndarray) -> int:
    A = sp.coo_array((np.ones(u.size), (u, v)), shape=(n, n)).tocsr()
    return connected_components(A, directed=False)[0]


def _path(order: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    a, b = order[:-1], order[1:]
    return np.minimum(a, b), np.maximum(a, b)


def _cases():
    rng = np.random.default_rng(2026)
    n = 3000
    yield "random sparse", n, rng.integers(0, n, 1500), rng.integers(0, n, 1500)
    yield "random dense", n, rng.integers(0, n, 20000), rng.integers(0, n, 20000)
    for name, order in [("path in order", np.arange(n)), ("path reversed", np.arange(n)[::-1]),
                        ("path shuffled", rng.permutation(n)),
                        ("path zigzag", np.argsort(np.r_[np.arange(0, n, 2), np.arange(1, n, 2)]))]:
        u, v = _path(order)
        yield name, n, u, v
    star = np.arange(1, n)
    yield "star on the largest node", n, star - 1, np.full(n - 1, n - 1)
    cliques = [(a, b) for c in range(0, 60, 6) for a in range(c, c + 6) for b in range(a + 1, c + 6)]
    u, v = np.array(cliques).T
    yield "cliques, isolated nodes", 100, u, v
    yield "self-loops only", 5, np.array([0, 3]), np.array([0, 3])
    yield "one node", 1, np.array([0]), np.array([0])


@pytest.mark.parametrize("name, n, u, v", list(_cases()), ids=lambda x: x if isinstance(x, str) else "")
def test_labels_are_the_smallest_node_of_each_networkx_component(name, n, u, v):
    labels = component_labels(n, np.asarray(u, np.int64), np.asarray(v, np.int64))
    assert np.array_equal(labels, _expected(n, u, v))
    assert np.unique(labels).size == _scipy_count(n, u, v)
    assert labels.dtype == np.int32


def test_the_bounded_rounds_hand_over_to_scipy(monkeypatch):
    rng = np.random.default_rng(3)
    n = 500
    u, v = _path(rng.permutation(n))
    u = np.r_[u[:200], u[300:]]  # two paths, shuffled
    v = np.r_[v[:200], v[300:]]
    monkeypatch.setattr(canonical, "_COMPONENT_ROUNDS", -4 * n.bit_length())  # no round at all
    labels = component_labels(n, u, v)
    assert np.array_equal(labels, _expected(n, u, v))


@pytest.mark.parametrize("duplicates,self_loops", [("sum", "keep"), ("error", "keep"), ("sum", "drop")])
def test_components_found_beside_the_merge_match_networkx(tmp_path, monkeypatch, duplicates, self_loops):
    # the report's components are found on a second thread while the pairs merge (forced here
    # by lowering the threshold): reference networkx.connected_components on the graph read by
    # networkx.parse_edgelist from the same lines, zero-weight records left out (they name their
    # nodes but join nothing); self-loops kept or dropped (a loop joins nothing; the lines of seed 5
    # hold one)
    from workspace.domain import ImportPolicy
    from workspace.errors import InputError
    from workspace.io import _common, read_network

    monkeypatch.setattr(canonical, "COMPONENTS_BESIDE_MERGE_MIN", 1)
    monkeypatch.setattr(_common.os, "sched_getaffinity", lambda pid: {0, 1}, raising=False)
    started = []
    original = canonical._components_beside
    monkeypatch.setattr(canonical, "_components_beside",
                        lambda n, u, v: started.append(original(n, u, v)) or started[-1])
    rng = np.random.default_rng(5)
    lines = []
    for _ in range(600):
        a, b = rng.integers(0, 400, 2)
        lines.append(f"n{a},n{b},{rng.choice([1, 2, 0])}")
    if duplicates == "sum":
        lines.append(lines[0])  # a duplicate record, merged
    path = tmp_path / "edges.csv"
    path.write_text("\n".join(lines) + "\n")
    policy = ImportPolicy(duplicates=duplicates, self_loops=self_loops, weight=2, header="no")
    kept = [line for line in lines if not line.endswith(",0")]
    reference = nx.parse_edgelist(kept, delimiter=",", nodetype=str, data=(("weight", float),))
    reference.add_nodes_from(x for line in lines for x in line.split(",")[:2])
    pairs = {frozenset(line.split(",")[:2]) for line in kept}
    if duplicates == "error" and len(pairs) < len(kept):
        with pytest.raises(InputError, match="duplicate edge"):
            read_network(str(path), format="csv", policy=policy)
        assert started and started[0] is not None
        return
    graph, report = read_network(str(path), format="csv", policy=policy)
    assert started and started[0] is not None  # the thread ran
    sizes = sorted((len(c) for c in nx.connected_components(reference)), reverse=True)
    assert report.components == len(sizes) and report.component_sizes == sizes[:50]
    isolated = sum(1 for x in reference if all(y == x for y in reference[x]))
    assert report.isolated_nodes == isolated
