"""Copying work between stores (workspace/services/copy.py): SQLite -> PostgreSQL -> SQLite keeps
every hash; copying twice adds nothing; a failing copy leaves the destination as it was; the
destination's numbering rule; one run's lineage.

Outside references: the arrays' hashes are recomputed with hashlib.sha256 (FIPS 180-4, 2015) over the
documented layout, the copied network is compared with networkx.karate_club_graph (Zachary 1977: 34
members, 78 ties), and the copied partition with the source's by sklearn.metrics.adjusted_rand_score.
"""

from __future__ import annotations

import hashlib
import sqlite3
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
from sklearn.metrics import adjusted_rand_score

from tests_support import dump_any, write_edges
from workspace.domain import ImportPolicy

REPO = Path(__file__).resolve().parents[2]
KARATE = REPO / "tests" / "data" / "karate.csv"


def _open(where, user=None):
    from workspace.services.store import open_workspace

    return open_workspace(str(where), user=user)


def _karate_minus_one(tmp_path: Path) -> Path:
    rows = [line.split(",") for line in KARATE.read_text().splitlines()[1:]]
    return write_edges(tmp_path / "karate_v2.csv", rows[1:])  # the first tie (1-2) gone


def _build_source(path: Path, tmp_path: Path) -> None:
    """Two versions of the karate network, a parameter set, three runs (one a rerun), notes and tags,
    a second network, made by two users."""
    from workspace.services import annotations, params, runs
    from workspace.services.networks import import_network

    weight = ImportPolicy(weight="weight")
    with _open(path, user="ana") as st:
        import_network(st, KARATE, project="club", network="karate", policy=weight, message="survey")
        params.save_params(st, "club/two", method="njw", k=2)
        first = runs.launch(st, runs.prepare_run(st, "club/karate@1", params_ref="club/two"))["run"]
        annotations.add_note(st, first, "the classic split")
        annotations.tag(st, "club/karate@1", ["baseline"])
    with _open(path, user="ben") as st:
        import_network(st, _karate_minus_one(tmp_path), project="club", network="karate", policy=weight)
        runs.launch(st, runs.prepare_run(st, "club/karate@2", method="njw", k=3))
        runs.rerun(st, first)
        import_network(st, KARATE, project="other", network="k", policy=weight)


def _summary(where) -> dict:
    """What must survive a copy, by natural keys (never ids)."""
    from sqlalchemy import select

    from workspace.store.schema import Annotation, Blob, Network, NetworkVersion, Project, Run

    with _open(where) as st, st.read() as s:
        versions = sorted((p, n, v.number, v.content_hash, v.message, v.created_by, v.report_json,
                           v.policy_json, v.edge_u_blob, v.weight_blob)
                          for v, n, p in s.execute(select(NetworkVersion, Network.name, Project.name)
                                                   .join(Network, Network.id == NetworkVersion.network_id)
                                                   .join(Project, Project.id == Network.project_id)).all())
        runs = sorted((r.method, r.status, r.membership_hash, r.membership_blob, r.created_by, r.provenance_json,
                       r.quality_json, r.host, r.seed, r.rerun_of is not None, r.param_set_version_id is not None)
                      for r in s.scalars(select(Run)).all())
        notes = sorted((a.action, a.text, a.created_by) for a in s.scalars(select(Annotation)).all())
        blobs = sorted(s.scalars(select(Blob.hash)).all())
    return {"versions": versions, "runs": runs, "notes": notes, "blobs": blobs}


def _hash_by_hand(arr: np.ndarray) -> str:
    """sha256 over b"<dtype>:<length>\\0" + little-endian bytes (the layout documented in store/blobs.py)."""
    a = np.ascontiguousarray(arr, dtype=arr.dtype.newbyteorder("<"))
    return hashlib.sha256(f"{a.dtype.str}:{len(a)}\0".encode() + a.tobytes()).hexdigest()


def _edges(g) -> set:
    ids = [str(x) for x in g.node_ids]
    return {frozenset((ids[u], ids[v])) for u, v in zip(g.edge_u, g.edge_v)}


@pytest.mark.postgres
@pytest.mark.slow
def test_sqlite_to_postgres_to_sqlite_keeps_every_hash(tmp_path, pg_url):
    from workspace.services import runs
    from workspace.services.copy import copy_work
    from workspace.services.networks import load_graph
    from workspace.store import repo
    from workspace.store.schema import Blob

    a, c = tmp_path / "a.sqlite", tmp_path / "c.sqlite"
    _build_source(a, tmp_path)
    with _open(a) as src, _open(pg_url) as pg:
        res = copy_work(src, pg)
    assert res["added"]["runs"] == 3 and res["added"]["versions"] == 3 and res["added"]["annotations"] == 2
    assert res["verified"]["ok"] and res["verified"]["arrays"] == len(_summary(a)["blobs"])
    with _open(pg_url) as pg, _open(c) as dst:
        copy_work(pg, dst)
    assert _summary(a) == _summary(pg_url) == _summary(c)

    with _open(c) as st:
        _, g = load_graph(st, "club/karate@1")
        with st.read() as s:  # every array's hash, recomputed by hand from what the copy holds
            for h in s.scalars(__import__("sqlalchemy").select(Blob.hash)).all():
                assert _hash_by_hand(repo.get_array(s, h)) == h
    # networkx.karate_club_graph: Zachary (1977), 34 members and 78 ties; names there are 0-based
    ref = {frozenset((str(u + 1), str(v + 1))) for u, v in nx.karate_club_graph().edges()}
    assert _edges(g) == ref
    with _open(a) as s1, _open(c) as s3:
        for run_id in (1, 2, 3):
            ids1, m1, _ = runs.load_membership(s1, run_id)
            ids3, m3, _ = runs.load_membership(s3, int(res["run_ids"][str(run_id)]))
            assert list(ids1) == list(ids3)
            assert adjusted_rand_score(m1, m3) == 1.0  # sklearn.metrics.adjusted_rand_score


def test_copying_twice_adds_nothing(tmp_path):
    from workspace.services.copy import copy_work

    a, b = tmp_path / "a.sqlite", tmp_path / "b.sqlite"
    _build_source(a, tmp_path)
    with _open(a) as src, _open(b) as dst:
        first = copy_work(src, dst)
    before = dump_any(str(b))
    with _open(a) as src, _open(b) as dst:
        second = copy_work(src, dst)
        network = copy_work(src, dst, network="club/karate")
        lineage = copy_work(src, dst, run=3)
    assert dump_any(str(b)) == before
    for res in (second, network, lineage):
        assert all(v == 0 for v in res["added"].values()), res["added"]
    assert second["matched"]["runs"] == first["added"]["runs"] == 3
    assert second["run_ids"] == first["run_ids"]
    # who made what travels with the records (ana imported v1, ben v2)
    assert [row[5] for row in _summary(b)["versions"] if row[1] == "karate"] == ["ana", "ben"]


def test_a_failing_copy_leaves_the_destination_as_it_was(tmp_path):
    """An array damaged in the source (one flipped byte) is caught on arrival: nothing is written."""
    from workspace.errors import StoreDamaged
    from workspace.services.copy import copy_work

    a, b = tmp_path / "a.sqlite", tmp_path / "b.sqlite"
    _build_source(a, tmp_path)
    with _open(a) as src, _open(b) as dst:
        copy_work(src, dst, network="other/k")
    before = dump_any(str(b))
    there = {row[0] for row in sqlite3.connect(b).execute("SELECT hash FROM blobs")}
    con = sqlite3.connect(a)
    h, data = next(row for row in con.execute("SELECT hash, data FROM blobs ORDER BY length(data) DESC")
                   if row[0] not in there)  # an array the copy must bring
    flipped = bytearray(data)
    flipped[len(flipped) // 2] ^= 0xFF
    con.execute("UPDATE blobs SET data = ? WHERE hash = ?", (bytes(flipped), h))
    con.commit()
    con.close()
    with _open(a) as src, _open(b) as dst:
        with pytest.raises(StoreDamaged) as err:
            copy_work(src, dst)
    assert "nothing written" in str(err.value) and err.value.exit_code == 13
    assert dump_any(str(b)) == before


def test_versions_on_a_destination_with_its_own_history_come_after_it(tmp_path):
    """The numbering rule: matched versions keep their number; new ones follow the destination's latest."""
    from workspace.services.copy import copy_work
    from workspace.services.networks import import_network, list_versions

    a, b = tmp_path / "a.sqlite", tmp_path / "b.sqlite"
    _build_source(a, tmp_path)
    with _open(b, user="cai") as dst:  # the destination's own version 1: karate without its first tie
        import_network(dst, _karate_minus_one(tmp_path), project="club", network="karate",
                       policy=ImportPolicy(weight="weight"))
    with _open(a) as src, _open(b) as dst:
        res = copy_work(src, dst, network="club/karate")
        rows = list_versions(dst, "club/karate")
    # source v1 (full karate) is new there -> v2; source v2 (minus one tie) has the same content as the
    # destination's v1 -> matched, not added
    assert res["added"]["versions"] == 1 and res["matched"]["versions"] == 1
    assert res["renumbered"] == [{"network": "club/karate", "source": 1, "destination": 2}]
    assert [(r["version"], r["by"]) for r in rows] == [(1, "cai"), (2, "ana")]


def test_one_runs_lineage(tmp_path):
    from workspace.services.copy import copy_work
    from workspace.services.networks import list_networks

    a, b = tmp_path / "a.sqlite", tmp_path / "b.sqlite"
    _build_source(a, tmp_path)
    with _open(a) as src, _open(b) as dst:
        res = copy_work(src, dst, run=3)  # run 3 reruns run 1 (karate@1, parameter set club/two@1)
        nets = list_networks(dst)
    assert [(n["project"], n["network"]) for n in nets] == [("club", "karate")]
    assert res["added"]["runs"] == 2 and res["added"]["versions"] == 1 and res["added"]["param_set_versions"] == 1
    s = _summary(b)
    assert [r[10] for r in s["runs"]] == [True, True] and sorted(r[9] for r in s["runs"]) == [False, True]


def test_bad_scopes_are_refused_and_change_nothing(tmp_path):
    from workspace.errors import NotFoundError, UsageError
    from workspace.services.copy import copy_work

    a, b = tmp_path / "a.sqlite", tmp_path / "b.sqlite"
    _build_source(a, tmp_path)
    _open(b).dispose()
    before = dump_any(str(b))
    with _open(a) as src, _open(b) as dst:
        with pytest.raises(NotFoundError, match="no network club/karat"):
            copy_work(src, dst, network="club/karat")
        with pytest.raises(NotFoundError, match="no run 99"):
            copy_work(src, dst, run=99)
        with pytest.raises(UsageError, match="same store"):
            copy_work(src, src)
    assert dump_any(str(b)) == before


def test_chunked_arrays_travel_as_chunks_and_are_checked_on_arrival(tmp_path, monkeypatch):
    from sqlalchemy import func, select

    from workspace.services.copy import copy_work
    from workspace.services.verify import verify_store
    from workspace.store.schema import BlobChunk

    a, b = tmp_path / "a.sqlite", tmp_path / "b.sqlite"
    monkeypatch.setenv("CUTBOOK_BLOB_CHUNK_BYTES", "48")
    _build_source(a, tmp_path)
    monkeypatch.delenv("CUTBOOK_BLOB_CHUNK_BYTES")

    def chunks(where):
        with _open(where) as st, st.read() as s:
            return s.scalar(select(func.count()).select_from(BlobChunk))

    with _open(a) as src, _open(b) as dst:
        res = copy_work(src, dst)
        report = verify_store(dst)
    assert chunks(a) > 20 and res["added"]["chunks"] == chunks(a) == chunks(b)
    assert res["verified"]["chunks"] == chunks(a) and report["ok"] and report["chunks_checked"] == chunks(b)
    assert _summary(a) == _summary(b)


def test_node_tables_travel_with_their_versions(tmp_path):
    # a node table on version 2 (attribute-only version) travels with it; the values read on the
    # destination equal the source's and the file's own (common practice: a copy reproduces its source)
    from workspace.services.copy import copy_work
    from workspace.services.networks import import_network
    from workspace.services.nodes import add_node_table, node_values

    a, b = tmp_path / "a.sqlite", tmp_path / "b.sqlite"
    table = tmp_path / "members.csv"
    table.write_text("node,side,age\n" + "".join(f"{i},{'north' if i % 3 else 'south'},{20 + i}\n"
                                                for i in range(1, 35)), encoding="utf-8")
    with _open(a) as st:
        import_network(st, KARATE, project="club", network="karate", policy=ImportPolicy(weight="weight"))
        add_node_table(st, "club/karate", table)
        want = {attr: node_values(st, "club/karate@2", attr)["nodes"] for attr in ("side", "age")}
    with _open(a) as src, _open(b) as dst:
        first = copy_work(src, dst)
    assert first["added"]["node_tables"] == 1 and first["verified"]["ok"]
    with _open(b) as st:
        got = {attr: node_values(st, "club/karate@2", attr)["nodes"] for attr in ("side", "age")}
    assert got == want
    assert dict(want["side"])["3"] == "south" and dict(want["age"])["34"] == 54
    before = dump_any(str(b))
    with _open(a) as src, _open(b) as dst:
        again = copy_work(src, dst)
    assert dump_any(str(b)) == before and again["added"]["node_tables"] == 0


# --- sweeps, tracked sets, updates and warm starts travel too ------------------------------------------

@pytest.fixture(scope="module")
def demo_store(tmp_path_factory) -> Path:
    """The demo store: a sweep with a cached embedding, a tracked set, an update after the July import
    whose run is warm-started from that embedding."""
    from workspace.demo.build import build_demo

    path = tmp_path_factory.mktemp("copy-demo") / "demo.sqlite"
    with _open(path) as st:
        build_demo(st)
    return path


def _without_ids(doc):
    """A service document with run and sweep ids taken out (they differ between stores)."""
    if isinstance(doc, dict):
        return {k: _without_ids(v) for k, v in doc.items()
                if k not in ("run", "sweep", "update", "previous_run", "run_a", "run_b", "aligned_to", "id")}
    if isinstance(doc, list):
        return [_without_ids(v) for v in doc]
    return doc


def _copy_demo_and_compare(demo_store: Path, dest: str) -> dict:
    from workspace.services import runs, sweeps, tracking
    from workspace.services.copy import copy_work

    with _open(demo_store) as src, _open(dest) as dst:
        res = copy_work(src, dst)
        assert res["added"]["sweeps"] == 1 and res["added"]["tracked_sets"] == 1 and res["added"]["updates"] == 1
        ids = {int(k): v for k, v in res["run_ids"].items()}
        # the sweep: same measures per k and the same recommendation, its links to the copied runs
        (sw_src,), (sw_dst,) = sweeps.list_sweeps(src), sweeps.list_sweeps(dst)
        shown_src, shown_dst = sweeps.show_sweep(src, sw_src["sweep"]), sweeps.show_sweep(dst, sw_dst["sweep"])
        assert _without_ids(shown_dst) == _without_ids(shown_src)
        assert sorted(ids[p["run"]] for p in shown_src["points"]) == sorted(p["run"] for p in shown_dst["points"])
        # the tracked set and the update's change report, with the new run's shown labels
        assert (_without_ids(tracking.list_tracked(dst, "velmora-bikes/stations"))
                == _without_ids(tracking.list_tracked(src, "velmora-bikes/stations")))
        up_src = tracking.change_report(src, tracking.latest_update_id(src))
        up_dst = tracking.change_report(dst, tracking.latest_update_id(dst))
        assert up_src["sets"][0]["diff"]["ari"] is not None
        assert _without_ids(up_dst) == _without_ids(up_src)
        new_src = up_src["sets"][0]["run"]
        assert up_dst["sets"][0]["run"] == ids[new_src]
        assert up_dst["sets"][0]["previous_run"] == ids[up_src["sets"][0]["previous_run"]]
        shown_a, shown_b = runs.show_run(src, new_src), runs.show_run(dst, ids[new_src])
        assert [c["shown"] for c in shown_b["communities"]] == [c["shown"] for c in shown_a["communities"]]
        assert shown_b["shown_labels"]["aligned_to"] == ids[shown_a["shown_labels"]["aligned_to"]]
        # the warm-started run names a source the destination has, and reruns bit for bit there
        warm = runs.show_run(dst, ids[new_src])["provenance"]["warm_from"]
        assert warm == runs.show_run(src, new_src)["provenance"]["warm_from"]  # an embedding: same key
        assert runs.rerun(dst, ids[new_src])["identical"] is True
    return res


def test_sweeps_tracking_and_warm_sources_travel(demo_store, tmp_path):
    from workspace.services.copy import copy_work

    dest = tmp_path / "team.sqlite"
    _copy_demo_and_compare(demo_store, str(dest))
    before = dump_any(str(dest))
    with _open(demo_store) as src, _open(dest) as dst:
        again = copy_work(src, dst)
    assert all(v == 0 for v in again["added"].values()), again["added"]
    assert again["matched"]["sweeps"] == 1 and again["matched"]["updates"] == 1
    # the rerun made on the destination above is the only difference a second copy must not undo
    assert dump_any(str(dest)) == before


@pytest.mark.postgres
@pytest.mark.slow
def test_sweeps_tracking_and_warm_sources_travel_to_postgres(demo_store, pg_url):
    _copy_demo_and_compare(demo_store, pg_url)


def test_a_lineage_copy_brings_the_warm_start_source_run(tmp_path):
    """A run warm-started from an earlier run: copying its lineage copies the source run, and the copy's
    ``warm_from`` names the source by its destination id, so rerun there rebuilds the same start block."""
    from workspace.services import runs
    from workspace.services.copy import copy_work
    from workspace.services.networks import import_network

    a, b = tmp_path / "a.sqlite", tmp_path / "b.sqlite"
    # a 1200-node planted partition (networkx.planted_partition_graph, seeded), large enough for the
    # iterative solver that uses the start block, and a second version with a few ties removed
    G = nx.planted_partition_graph(4, 300, 0.05, 0.002, seed=3)
    edges = sorted(G.edges())
    v1 = write_edges(tmp_path / "v1.csv", [(f"n{u}", f"n{v}") for u, v in edges], header="source,target")
    v2 = write_edges(tmp_path / "v2.csv", [(f"n{u}", f"n{v}") for i, (u, v) in enumerate(edges) if i % 50],
                     header="source,target")
    with _open(a) as st:
        import_network(st, v1, project="p", network="g")
        first = runs.launch(st, runs.prepare_run(st, "p/g@1", method="njw", k=4))["run"]
        import_network(st, v2, project="p", network="g")
        runs.launch(st, runs.prepare_run(st, "p/g@2", method="njw", k=4))   # a cold run in between
        warm = runs.launch(st, runs.prepare_run(st, "p/g@2", method="njw", k=4, warm=str(first)))["run"]
        assert runs.show_run(st, warm)["provenance"]["warm_from"] == f"run:{first}"
    with _open(a) as src, _open(b) as dst:
        res = copy_work(src, dst, run=warm)
        assert res["added"]["runs"] == 2 and res["added"]["versions"] == 2
        moved = {int(k): v for k, v in res["run_ids"].items()}
        shown = runs.show_run(dst, moved[warm])
        assert shown["provenance"]["warm_from"] == f"run:{moved[first]}"
        assert shown["diagnostics"]["warm_start"]["source"] == f"run:{moved[first]}"
        again = runs.rerun(dst, moved[warm])
        assert again["identical"] is True
        _, m_src, _ = runs.load_membership(src, warm)
        _, m_dst, _ = runs.load_membership(dst, again["run"])
        assert adjusted_rand_score(m_src, m_dst) == 1.0   # sklearn.metrics.adjusted_rand_score
