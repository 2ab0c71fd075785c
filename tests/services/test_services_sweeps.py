"""Sweeps through the service layer: recorded runs, embedding cache and reuse, rerun identity, extend,
cancel, verify, prune, diff. Outside references: networkx (karate club, modularity), scikit-learn
(adjusted_rand_score), the planted-partition threshold of Decelle et al. (2011)."""

from __future__ import annotations

import sqlite3

import networkx as nx
import pytest
from sklearn.metrics import adjusted_rand_score

from graphs import import_adjacency, import_karate, node_names, truth_by_node_ids
from workspace.errors import Cancelled, NotFoundError, ParameterError, UsageError
from workspace.services import runs, sweeps
from workspace.services.verify import verify_store
from workspace.spectral.generators import planted_partition


@pytest.fixture
def karate(store, tmp_path):
    G, names = import_karate(store, tmp_path)  # Zachary (1977), networkx karate_club_graph
    return G, names


@pytest.fixture
def planted(store, tmp_path):
    A, truth = planted_partition(600, 3, 40, 2, seed=1)    # far above the Decelle et al. (2011) threshold
    names = node_names(600)
    import_adjacency(store, A, tmp_path, project="lab", network="sbm", names=names)
    return truth, names


def test_karate_sweep_modularity_equals_networkx_on_every_run(store, karate):
    G, names = karate
    spec = sweeps.prepare_sweep(store, "club/karate", method="njw", ks="2..6", seeds=3)
    out = sweeps.sweep(store, spec)
    assert out["status"] == "done" and out["tasks"]["done"] == 15 and len(out["points"]) == 5
    # every stored run, perturbed repeats included: modularity on the version's graph equals
    # networkx.community.modularity (Newman & Girvan 2004) of that membership
    for point in out["points"]:
        assert len(point["runs"]) == 3
        for run_id in point["runs"]:
            ids, labels, _ = runs.load_membership(store, run_id)
            shown = runs.show_run(store, run_id)
            comms = [{int(x[1:]) for x in ids[labels == c].tolist()} for c in range(labels.max() + 1)]
            assert shown["quality"]["modularity"] == pytest.approx(
                nx.community.modularity(G, comms, weight="weight"), abs=1e-12)
        assert point["modularity"] == runs.show_run(store, point["run"])["quality"]["modularity"]
        assert point["ari_mean"] is not None and point["vi_mean"] is not None


def test_planted_sweep_recommends_planted_k_with_reasons_and_splits(store, planted):
    truth, names = planted
    spec = sweeps.prepare_sweep(store, "lab/sbm", method="njw", ks="2..6", seeds=4)
    out = sweeps.sweep(store, spec)
    assert out["recommended_k"] == 3
    rec = out["recommendations"][0]
    assert rec["candidates"][0]["k"] == 3 and any("eigengap" in r for r in rec["candidates"][0]["reasons"])
    p3 = next(p for p in out["points"] if p["k"] == 3)
    assert p3["ari_mean"] >= 0.95 and p3["stable"] is True
    ids, labels, _ = runs.load_membership(store, p3["run"])
    assert adjusted_rand_score(truth_by_node_ids(truth, names, ids), labels) > 0.99   # sklearn.metrics
    assert [(s["from_k"], s["to_k"]) for s in out["splits"]] == [(2, 3), (3, 4), (4, 5), (5, 6)]
    assert any(row["kind"] == "split" for row in out["splits"][0]["communities"])


def test_embedding_cached_once_reused_and_recorded_in_provenance(store, planted):
    spec = sweeps.prepare_sweep(store, "lab/sbm", method="njw", ks="2,3,5")
    out = sweeps.sweep(store, spec)
    cache = sweeps.embedding_cache(store)
    assert cache["count"] == 1 and cache["embeddings"][0]["n_vectors"] == 5
    key = cache["embeddings"][0]["key"]
    provs = [runs.show_run(store, p["run"])["provenance"] for p in out["points"]]
    assert all(p["embedding"]["key"] == key and p["sweep"] == out["sweep"] for p in provs)
    assert provs[0]["embedding"]["reused_from_cache"] is False
    # a second sweep on the same version and operator reuses it (shi-malik shares njw's operator)
    out2 = sweeps.sweep(store, sweeps.prepare_sweep(store, "lab/sbm", method="shi-malik", ks="2..5"))
    assert sweeps.embedding_cache(store)["count"] == 1
    assert runs.show_run(store, out2["points"][0]["run"])["provenance"]["embedding"]["reused_from_cache"] is True
    # the cached embedding gives the same membership as a run solved from scratch (ARI = 1, same seed)
    scratch = runs.launch(store, runs.prepare_run(store, "lab/sbm", method="njw", k=3))
    p3 = next(p for p in out["points"] if p["k"] == 3)
    _, a, _ = runs.load_membership(store, scratch["run"])
    _, b, _ = runs.load_membership(store, p3["run"])
    assert adjusted_rand_score(a, b) == 1.0


def test_rerun_of_a_sweep_run_is_bit_identical_with_and_without_the_cache(store, planted):
    out = sweeps.sweep(store, sweeps.prepare_sweep(store, "lab/sbm", method="regularized", ks="2..4", seeds=2))
    for point in out["points"]:
        for run_id in point["runs"]:               # repeat 0 (cached embedding) and repeat 1 (perturbed)
            again = runs.rerun(store, run_id)
            assert again["identical"] is True, (point["k"], run_id)
    assert sweeps.prune_embeddings(store)["removed"] == 1
    assert sweeps.embedding_cache(store)["count"] == 0
    again = runs.rerun(store, out["points"][1]["run"])
    assert again["identical"] is True and again["provenance"]["embedding"]["reused_from_cache"] is False
    assert verify_store(store)["ok"]


def test_extend_adds_k_and_seeds_without_recomputing(store, planted):
    out = sweeps.sweep(store, sweeps.prepare_sweep(store, "lab/sbm", method="njw", ks="2..3"))
    first_runs = {p["k"]: p["run"] for p in out["points"]}
    ext = sweeps.extend_sweep(store, out["sweep"], ks="4,5", seeds=2)
    assert ext["ks"] == [2, 3, 4, 5] and ext["seeds"] == 2 and ext["tasks"]["done"] == 8
    assert {p["k"]: p["run"] for p in ext["points"] if p["k"] in first_runs} == first_runs
    assert all(p["ari_mean"] is not None for p in ext["points"])
    with pytest.raises(ParameterError):
        sweeps.extend_sweep(store, out["sweep"], seeds=1)


def test_cancel_keeps_finished_runs_and_marks_the_sweep(store, planted):
    spec = sweeps.prepare_sweep(store, "lab/sbm", method="njw", ks="2..7")
    seen = []

    def progress(ev):
        seen.append(dict(ev))

    def cancel():
        return sum(1 for ev in seen if ev["stage"] == "stored") >= 2

    with pytest.raises(Cancelled):
        sweeps.sweep(store, spec, progress=progress, cancel=cancel)
    listed = sweeps.list_sweeps(store)[0]
    t = listed["tasks"]
    # the finished runs are kept; what was computing when the stop came is recorded as cancelled or done
    assert listed["status"] == "cancelled" and 2 <= t["done"] < 6 and t["running"] == 0
    assert t["done"] + t["cancelled"] == len(runs.list_runs(store))
    assert all(ev["total"] == 6 and ev["elapsed_s"] >= 0 for ev in seen)
    assert [ev["done"] for ev in seen if ev["stage"] == "stored"][:2] == [1, 2]
    resumed = sweeps.extend_sweep(store, listed["sweep"])
    assert resumed["status"] == "done" and resumed["tasks"]["done"] == 6


def test_vary_a_parameter_and_diff_two_sweeps(store, planted):
    a = sweeps.sweep(store, sweeps.prepare_sweep(store, "lab/sbm", method="regularized", ks="2..4",
                                                  vary="tau=0.5,5"))
    assert a["vary"] == {"name": "tau", "values": [0.5, 5.0]} and len(a["points"]) == 6
    assert len(a["recommendations"]) == 2 and a["recommended_k"] is None
    assert sweeps.embedding_cache(store)["count"] == 2          # one operator per tau
    b = sweeps.sweep(store, sweeps.prepare_sweep(store, "lab/sbm", method="louvain", vary="resolution=0.5,1,2",
                                                  seeds=2))
    assert [p["value"] for p in b["points"]] == [0.5, 1.0, 2.0] and all(p["k"] is None for p in b["points"])
    c = sweeps.sweep(store, sweeps.prepare_sweep(store, "lab/sbm", method="njw", ks="3..4"))
    d = sweeps.diff_sweeps(store, c["sweep"], sweeps.sweep(store, sweeps.prepare_sweep(
        store, "lab/sbm", method="shi-malik", ks="2..3"))["sweep"])
    assert [r["k"] for r in d["points"]] == [3] and d["only_in_a"] == [{"k": 4, "value": None}]
    assert d["points"][0]["membership_ari"] == pytest.approx(1.0)


def test_bad_requests_record_nothing(store, planted, store_path):
    before = sqlite3.connect(store_path).execute("SELECT count(*) FROM sweeps").fetchone()[0]
    for kwargs, err in [(dict(method="njw"), UsageError), (dict(method="njw", ks="1..3"), ParameterError),
                        (dict(method="louvain", ks="2..3"), UsageError),
                        (dict(method="njw", ks="2..3", vary="bogus=1,2"), ParameterError),
                        (dict(method="regularized", ks="2..3", vary="tau=-5"), ParameterError),
                        (dict(method="njw", ks="2..3", perturb=0.5), ParameterError)]:
        with pytest.raises(err):
            sweeps.prepare_sweep(store, "lab/sbm", **kwargs)
    with pytest.raises(NotFoundError):
        sweeps.show_sweep(store, 99)
    assert sqlite3.connect(store_path).execute("SELECT count(*) FROM sweeps").fetchone()[0] == before == 0


def test_delete_keeps_runs_and_verify_catches_a_damaged_embedding(store, planted, store_path):
    out = sweeps.sweep(store, sweeps.prepare_sweep(store, "lab/sbm", method="njw", ks="2..3"))
    key = sweeps.embedding_cache(store)["embeddings"][0]["key"]
    res = sweeps.delete_sweep(store, out["sweep"])
    assert res["runs_kept"] == 2 and sweeps.list_sweeps(store) == []
    assert runs.show_run(store, out["points"][0]["run"])["status"] == "done"
    con = sqlite3.connect(store_path)
    vec = con.execute("SELECT vectors_blob FROM embeddings WHERE key = ?", (key,)).fetchone()[0]
    con.execute("UPDATE blobs SET data = ? WHERE hash = ?", (b"garbage", vec))
    con.commit()
    con.close()
    found = verify_store(store)
    assert not found["ok"]
    assert any(f.get("blob") == vec and any("embedding" in w for w in f["belongs_to"]) for f in found["findings"])


def test_verify_checks_embedding_shapes(store, planted, store_path):
    sweeps.sweep(store, sweeps.prepare_sweep(store, "lab/sbm", method="njw", ks="2..3"))
    assert verify_store(store)["ok"]
    con = sqlite3.connect(store_path)
    con.execute("UPDATE embeddings SET n_vectors = n_vectors + 1")   # a record that no longer fits its arrays
    con.commit()
    con.close()
    found = verify_store(store)
    assert not found["ok"] and [f["kind"] for f in found["findings"]] == ["embedding"]


def test_bethe_sweep_counts_negative_eigenvalues(store, planted):
    # Saade, Krzakala & Zdeborová (2014): on a planted partition above the threshold (Decelle et al. 2011)
    # H(r) at the default r has as many negative eigenvalues as there are groups
    out = sweeps.sweep(store, sweeps.prepare_sweep(store, "lab/sbm", method="bethe", ks="2..5", seeds=3))
    p3 = next(p for p in out["points"] if p["k"] == 3)
    assert p3["negative_eigenvalues"] == 3 and out["recommended_k"] == 3
    reasons = out["recommendations"][0]["candidates"][0]["reasons"]
    assert "the Bethe Hessian has exactly 3 negative eigenvalues" in reasons


def test_parallel_assignment_gives_the_same_runs(store, planted):
    one = sweeps.sweep(store, sweeps.prepare_sweep(store, "lab/sbm", method="njw", ks="2..6", seeds=2), workers=1)
    two = sweeps.sweep(store, sweeps.prepare_sweep(store, "lab/sbm", method="njw", ks="2..6", seeds=2), workers=3)
    hashes = lambda out: [runs.show_run(store, r)["membership_hash"] for p in out["points"] for r in p["runs"]]  # noqa
    assert hashes(one) == hashes(two)     # each run is computed alone, whatever runs beside it


def test_no_eigengap_where_it_means_nothing(store, planted):
    # recursive bisection: its eigenvalues are those of the first split only (von Luxburg 2007, Sec. 8.3
    # reads the gap off one operator's spectrum), so no eigengap is reported and the reasons say so
    out = sweeps.sweep(store, sweeps.prepare_sweep(store, "lab/sbm", method="recursive", ks="2..4"))
    assert all(p["eigengap"] is None for p in out["points"])
    assert "eigengap not available" in " ".join(out["recommendations"][0]["candidates"][0]["reasons"])


def test_sweeps_and_runs_listed_by_project_network_and_version(store, karate, planted, tmp_path):
    # the same narrowing (services.runs.narrowed_to) for both listings: a project, a network, a
    # version, a version with nothing on it (none such: narrowing finds nothing rather than failing), and
    # a project with nothing in it
    first = sweeps.sweep(store, sweeps.prepare_sweep(store, "club/karate", method="njw", ks="2..3"))["sweep"]
    second = sweeps.sweep(store, sweeps.prepare_sweep(store, "lab/sbm", method="njw", ks="2..3"))["sweep"]
    A, _ = planted_partition(50, 2, 10, 1, seed=2)
    import_adjacency(store, A, tmp_path, project="empty-handed", network="g", names=node_names(50))
    expect = {None: [second, first], "club": [first], "club/karate": [first], "club/karate@1": [first],
              "club/karate@2": [], "lab/sbm@1": [second], "empty-handed": [], "empty-handed/g": []}
    for ref, ids in expect.items():
        assert [row["sweep"] for row in sweeps.list_sweeps(store, ref)] == ids, ref
        listed = runs.list_runs(store, ref)
        assert len(listed) == 2 * len(ids), ref
        parts = (ref or "").replace("@", "/").split("/")
        assert all(row["ref"].replace("@", "/").split("/")[:len(parts)] == parts for row in listed if ref), ref
