"""Warm starts through the service layer: where the start comes from, provenance, rerun identity,
a source that is gone, the CLI option and `show RUN`.

Outside references: networkx (planted_partition_graph, double_edge_swap), scikit-learn
(adjusted_rand_score).
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from sklearn.metrics import adjusted_rand_score

from graphs import import_adjacency
from workspace.errors import NotFoundError, UsageError
from workspace.services import delete, runs, sweeps, warmstart


def _graphs():
    """Version 1: a planted partition (networkx planted_partition_graph, 4 groups of 300); version 2:
    ~1% of the edges swapped (networkx double_edge_swap), node 3 removed, two new nodes."""
    G = nx.planted_partition_graph(4, 300, 0.08, 0.004, seed=11)
    H = G.copy()
    nx.double_edge_swap(H, nswap=G.number_of_edges() // 200, max_tries=10**5, seed=11)
    H.remove_node(3)
    H.add_edges_from([(5000, 0), (5000, 1), (5000, 2), (5001, 5000), (5001, 4), (5001, 6)])
    return G, H


def _adjacency(G):
    nodes = sorted(G)
    return nx.to_scipy_sparse_array(G, nodelist=nodes, format="csr", dtype=float), [f"n{i:05d}" for i in nodes]


@pytest.fixture
def two_versions(store, tmp_path):
    G, H = _graphs()
    A1, names1 = _adjacency(G)
    A2, names2 = _adjacency(H)
    (tmp_path / "v1").mkdir()
    (tmp_path / "v2").mkdir()
    import_adjacency(store, A1, tmp_path / "v1", project="lab", network="net", names=names1)
    import_adjacency(store, A2, tmp_path / "v2", project="lab", network="net", names=names2)
    return G, H


def _labels(store, run_id):
    return runs.load_membership(store, run_id)[1]


def test_auto_warm_start_from_the_previous_run_agrees_with_cold_and_reruns_identically(store, two_versions):
    first = runs.launch(store, runs.prepare_run(store, "lab/net@1", method="njw", k=4))
    assert runs.prepare_run(store, "lab/net@1", method="njw", k=4, warm="auto").warm_from is None  # no earlier one
    spec = runs.prepare_run(store, "lab/net@2", method="njw", k=4, warm="auto")
    assert spec.warm_from == f"run:{first['run']}"
    warm = runs.launch(store, spec)
    cold = runs.launch(store, runs.prepare_run(store, "lab/net@2", method="njw", k=4))
    shown = runs.show_run(store, warm["run"])
    assert shown["provenance"]["warm_from"] == f"run:{first['run']}"
    info = shown["diagnostics"]["warm_start"]
    assert info["used"] is True and info["from_version"] == "lab/net@1"
    assert info["new_nodes"] == 2 and info["dropped_nodes"] == 1 and info["mapped_nodes"] == 1200 - 1
    assert "warm_start" not in runs.show_run(store, cold["run"])["diagnostics"]
    # same seed, same version: the same communities (scikit-learn adjusted_rand_score >= 0.999)
    assert adjusted_rand_score(_labels(store, cold["run"]), _labels(store, warm["run"])) >= 0.999
    # rerun rebuilds the same start block from the recorded source: bit-identical membership
    again = runs.rerun(store, warm["run"])
    assert again["identical"] is True and again["membership_hash"] == warm["membership_hash"]
    assert runs.show_run(store, again["run"])["diagnostics"]["warm_start"]["block_sha256"] == info["block_sha256"]


def test_auto_warm_start_ignores_execution_only_parameters(store, two_versions):
    """A run of the previous version that differs only in threads or the time limit is the warm start
    (they change how a run is computed, not its result); one that differs in a result parameter is not."""
    first = runs.launch(store, runs.prepare_run(store, "lab/net@1", method="njw", k=4,
                                                sets={"threads": 1, "time_limit_s": 600}))
    spec = runs.prepare_run(store, "lab/net@2", method="njw", k=4, warm="auto")
    assert spec.params["threads"] == 0 and spec.warm_from == f"run:{first['run']}"
    other = runs.prepare_run(store, "lab/net@2", method="njw", k=4, warm="auto", sets={"eig_tol": 1e-8})
    assert other.warm_from is None


def test_rerun_says_clearly_when_the_warm_source_is_gone(store, two_versions):
    first = runs.launch(store, runs.prepare_run(store, "lab/net@1", method="njw", k=4))
    warm = runs.launch(store, runs.prepare_run(store, "lab/net@2", method="njw", k=4, warm=str(first["run"])))
    delete.delete_runs(store, [first["run"]])
    before = runs.count_runs(store)
    with pytest.raises(NotFoundError, match=rf"warm-started from run:{first['run']}.*no longer in the store"):
        runs.rerun(store, warm["run"])
    assert runs.count_runs(store) == before      # nothing recorded


def test_auto_prefers_a_cached_embedding_of_the_previous_version(store, two_versions):
    G, H = two_versions
    sweeps.sweep(store, sweeps.prepare_sweep(store, "lab/net@1", method="njw", ks="2..5"))
    cache = sweeps.embedding_cache(store)["embeddings"]
    assert len(cache) == 1
    spec = runs.prepare_run(store, "lab/net@2", method="njw", k=4, warm="auto")
    assert spec.warm_from == f"embedding:{cache[0]['key']}"
    warm = runs.launch(store, spec)
    info = runs.show_run(store, warm["run"])["diagnostics"]["warm_start"]
    assert info["used"] is True and info["columns"] == 5
    cold = runs.launch(store, runs.prepare_run(store, "lab/net@2", method="njw", k=4))
    assert adjusted_rand_score(_labels(store, cold["run"]), _labels(store, warm["run"])) >= 0.999
    # the planted groups of networkx planted_partition_graph (nodes 300g..300g+299 form group g)
    ids = runs.load_membership(store, warm["run"])[0]
    truth = [int(x[1:]) // 300 for x in ids.tolist()]
    assert adjusted_rand_score(truth, _labels(store, warm["run"])) >= 0.98
    assert runs.rerun(store, warm["run"])["identical"] is True
    sweeps.prune_embeddings(store)
    with pytest.raises(NotFoundError, match="no longer in the store"):
        runs.rerun(store, warm["run"])


def test_warm_start_block_maps_nodes_by_id(store, two_versions):
    first = runs.launch(store, runs.prepare_run(store, "lab/net@1", method="njw", k=4))
    spec = runs.prepare_run(store, "lab/net@2", method="njw", k=4, warm=str(first["run"]))
    with store.read() as s:
        from workspace.store import repo
        from workspace.store.schema import NetworkVersion

        graph = repo.load_graph(s, s.get(NetworkVersion, spec.version_id))
    block, info = warmstart.start_block(store, spec.warm_from, graph, spec)
    old_ids, old_labels, _ = runs.load_membership(store, first["run"])
    label_of = dict(zip(old_ids.tolist(), old_labels.tolist()))
    A = graph.adjacency()
    d = np.asarray(A.sum(axis=1)).ravel()
    for i, node in enumerate(graph.node_ids.tolist()):
        if node in label_of:   # one non-zero entry, sqrt(degree), in the column of its old community
            nz = np.flatnonzero(block[i])
            assert nz.shape[0] == 1 and block[i, nz[0]] == pytest.approx(np.sqrt(d[i]))
        else:                  # a new node: seeded noise in every column
            assert node in ("n05000", "n05001") and np.all(block[i] != 0)
    again, _ = warmstart.start_block(store, spec.warm_from, graph, spec)
    assert np.array_equal(block, again)


def test_warm_start_block_from_packed_ids_equals_the_decoded_one(store, two_versions):
    """A run loads its version with the node ids packed (runs._load_version_graph): the start block,
    mapped by compare.align_nodes from the stored bytes, is the one of the decoded ids bit for bit."""
    first = runs.launch(store, runs.prepare_run(store, "lab/net@1", method="njw", k=4))
    spec = runs.prepare_run(store, "lab/net@2", method="njw", k=4, warm=str(first["run"]))
    packed = runs._load_version_graph(store, spec.version_id)
    with store.read() as s:
        from workspace.store import repo
        from workspace.store.schema import NetworkVersion

        decoded = repo.load_graph(s, s.get(NetworkVersion, spec.version_id))
    assert not isinstance(packed.node_ids, np.ndarray) and isinstance(decoded.node_ids, np.ndarray)
    a, info_a = warmstart.start_block(store, spec.warm_from, packed, spec)
    b, info_b = warmstart.start_block(store, spec.warm_from, decoded, spec)
    assert np.array_equal(a, b) and info_a == info_b and info_a["new_nodes"] == 2


def test_degrees_of_an_unweighted_graph_count_edge_ends_like_the_adjacency():
    """GraphData.degrees: for an undirected graph of unit weights the counted edge ends equal the
    adjacency's row sums plus its diagonal (self-loops twice) bit for bit; other graphs take the
    adjacency (scipy) itself."""
    from workspace.domain import GraphData

    rng = np.random.default_rng(3)
    u = rng.integers(0, 40, 200)
    v = rng.integers(0, 40, 200)
    pairs = sorted({(min(a, b), max(a, b)) for a, b in zip(u.tolist(), v.tolist())})   # loops among them
    eu = np.array([p[0] for p in pairs], dtype=np.int64)
    ev = np.array([p[1] for p in pairs], dtype=np.int64)
    assert np.any(eu == ev)
    ids = np.array([f"v{i:02d}" for i in range(45)])            # five isolated nodes
    for weight in (np.ones(eu.shape[0]), rng.uniform(0.1, 2.0, eu.shape[0])):
        g = GraphData(ids, eu, ev, weight)
        A = g.adjacency()
        reference = np.asarray(A.sum(axis=1)).ravel() + A.diagonal()     # scipy.sparse row sums
        assert np.array_equal(g.degrees(), reference)


def test_warm_requests_are_checked(store, two_versions):
    bethe = runs.launch(store, runs.prepare_run(store, "lab/net@1", method="bethe", k=4))
    with pytest.raises(UsageError, match="operator"):
        runs.prepare_run(store, "lab/net@2", method="njw", k=4, warm=str(bethe["run"]))
    with pytest.raises(UsageError, match="auto, off or a run id"):
        runs.prepare_run(store, "lab/net@2", method="njw", k=4, warm="sometimes")
    with pytest.raises(UsageError, match="njw"):
        runs.prepare_run(store, "lab/net@2", method="fiedler", warm=str(bethe["run"]))
    with pytest.raises(NotFoundError):
        runs.prepare_run(store, "lab/net@2", method="njw", k=4, warm="999")
    # a method without an operator to warm-start, or repeats: auto quietly means a cold run
    assert runs.prepare_run(store, "lab/net@2", method="fiedler", warm="auto").warm_from is None
    assert runs.prepare_run(store, "lab/net@2", method="bethe", k=4, repeats=3, warm="auto").warm_from is None
    # njw and shi-malik share the operator: a shi-malik run of the same parameters is not "auto" (other
    # method) but can be given explicitly
    sm = runs.launch(store, runs.prepare_run(store, "lab/net@1", method="shi-malik", k=4))
    assert runs.prepare_run(store, "lab/net@2", method="njw", k=4, warm=str(sm["run"])).warm_from == f"run:{sm['run']}"


def test_cli_run_warm_and_show(cli, store, two_versions):
    res = cli("run", "lab/net@1", "--method", "njw", "--k", "4", "--json")
    assert res.code == 0
    res = cli("run", "lab/net@2", "--method", "njw", "--k", "4", "--warm", "auto", "--json")
    assert res.code == 0
    run_id = res.json["run"]
    assert res.json["provenance"]["warm_from"] == "run:1"
    shown = cli("show", str(run_id))
    assert shown.code == 0
    line = [ln for ln in shown.out.splitlines() if "warm start" in ln]
    assert line and "run:1 (lab/net@1), used" in line[0]
    bad = cli("run", "lab/net@2", "--method", "njw", "--k", "4", "--warm", "later")
    assert bad.code != 0 and "auto, off or a run id" in bad.err
    assert cli("rerun", str(run_id)).code == 0
