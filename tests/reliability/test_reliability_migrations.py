"""Migration safety: a store built at every earlier schema revision, with data in it,
upgrades to head on open with every row kept, a backup made, and references intact.

The revisions are walked with Alembic's ScriptDirectory from base to head; each store is
brought to its revision with ``workspace.store.db.migrate(url, target=REV)`` and filled
with plain SQL. Which rows go in depends only on the tables and columns that revision
has (read with PRAGMA table_info), so a new revision is covered without editing this
file unless it adds a required column the rows below do not know.
"""

from __future__ import annotations

import json
import sqlite3
from pathlib import Path

import numpy as np
import pytest

from workspace.store.db import head_revision, migrate, migrations_dir, resolve_store_url


def _script():
    from alembic.config import Config
    from alembic.script import ScriptDirectory

    cfg = Config()
    cfg.set_main_option("script_location", str(migrations_dir()))
    return ScriptDirectory.from_config(cfg)


def _revisions_base_to_head() -> list[str]:
    revs = [r.revision for r in _script().walk_revisions("base", "heads")]
    return list(reversed(revs))


CHAIN = _revisions_base_to_head()
EARLIER = CHAIN[:-1]


def test_there_is_a_chain_to_walk():
    chain = _revisions_base_to_head()
    assert chain[-1] == head_revision()
    assert len(chain) >= 2, "only one revision: nothing to upgrade from yet"


def _blob(arr) -> dict:
    """A blob row built with numpy + zstandard directly (the documented codec: np.save without
    pickle, zstd-compressed; hash = sha256 over '<dtype>:<length>\\0' + little-endian bytes)."""
    import hashlib
    import io

    import zstandard

    a = np.ascontiguousarray(arr, dtype=np.asarray(arr).dtype.newbyteorder("<"))
    buf = io.BytesIO()
    np.save(buf, a, allow_pickle=False)
    raw = buf.getvalue()
    h = hashlib.sha256(f"{a.dtype.str}:{a.shape[0]}\0".encode())
    h.update(a.tobytes())
    return {"hash": h.hexdigest(), "codec": "npy+zstd", "dtype": a.dtype.str, "length": int(a.shape[0]),
            "raw_size": len(raw), "data": zstandard.ZstdCompressor(level=3).compress(raw)}


def _node_blobs(ids: list[str]) -> tuple[dict, dict]:
    data = "".join(ids).encode()
    offsets = np.cumsum([0] + [len(i.encode()) for i in ids]).astype(np.int64)
    return _blob(offsets), _blob(np.frombuffer(data, dtype=np.uint8).copy())


def _rows_for(tables: dict[str, list[str]]) -> dict[str, list[dict]]:
    """Representative rows for the tables this revision has."""
    t = "2026-03-01 10:00:00.000000"
    rows: dict[str, list[dict]] = {name: [] for name in tables}
    off1, bytes1 = _node_blobs(["a", "b", "c"])
    off2, bytes2 = _node_blobs(["a", "b", "c", "d"])
    u1, v1, w1 = _blob(np.array([0, 1], np.int64)), _blob(np.array([1, 2], np.int64)), _blob(np.array([1.0, 2.0]))
    u2, v2, w2 = (_blob(np.array([0, 1, 2], np.int64)), _blob(np.array([1, 2, 3], np.int64)),
                  _blob(np.array([1.0, 2.0, 0.5])))
    membership, eig = _blob(np.array([0, 0, 1, 1], np.int8)), _blob(np.array([0.0, 0.2, 1.1]))
    rows["blobs"] = [off1, bytes1, u1, v1, w1, off2, bytes2, u2, v2, w2, membership, eig]
    rows["projects"] = [{"id": 1, "name": "harbour", "created_at": t}, {"id": 2, "name": "valley", "created_at": t}]
    rows["networks"] = [{"id": 1, "project_id": 1, "name": "ferries", "created_at": t},
                        {"id": 2, "project_id": 1, "name": "roads", "created_at": t},
                        {"id": 3, "project_id": 2, "name": "rivers", "created_at": t}]

    def version(id_, net, number, parent, nodes, edges, total, blobs):
        off, byt, u, v, w = blobs
        return {"id": id_, "network_id": net, "number": number, "parent_id": parent,
                "content_hash": f"{id_:064x}", "n_nodes": nodes, "n_edges": edges, "total_weight": total,
                "message": f"version {number}", "source_name": "ferries.csv", "source_format": "csv",
                "policy_json": json.dumps({"duplicates": "max"}), "report_json": json.dumps({"nodes": nodes}),
                "node_offsets_blob": off["hash"], "node_bytes_blob": byt["hash"], "edge_u_blob": u["hash"],
                "edge_v_blob": v["hash"], "weight_blob": w["hash"], "created_at": t}

    rows["network_versions"] = [version(1, 1, 1, None, 3, 2, 3.0, (off1, bytes1, u1, v1, w1)),
                                version(2, 1, 2, 1, 4, 3, 3.5, (off2, bytes2, u2, v2, w2)),
                                version(3, 3, 1, None, 3, 2, 3.0, (off1, bytes1, u1, v1, w1))]
    if "param_sets" in tables:
        rows["param_sets"] = [{"id": 1, "project_id": 1, "name": "two", "created_at": t}]
        rows["param_set_versions"] = [
            {"id": 1, "param_set_id": 1, "number": 1, "method": "njw", "k": "2", "values_json": "{}",
             "values_hash": "a" * 64, "created_at": t},
            {"id": 2, "param_set_id": 1, "number": 2, "method": "njw", "k": "3", "values_json": "{}",
             "values_hash": "b" * 64, "created_at": t}]
    if "runs" in tables:
        def run(id_, status, **kw):
            row = {"id": id_, "version_id": 2, "param_set_version_id": 1, "rerun_of": None, "kind": "computed",
                   "method": "njw", "label": "", "params_json": "{}", "k_requested": "2", "seed": 0,
                   "repeats": 1, "status": status, "error": None, "started_at": t, "finished_at": t,
                   "host": "another-host", "pid": 4242, "process_token": None, "k": None,
                   "membership_blob": None, "membership_hash": None, "stability_blob": None,
                   "eigenvalues_blob": None, "quality_json": "{}", "diagnostics_json": "{}",
                   "warnings_json": "[]", "provenance_json": "{}"}
            row.update(kw)
            return row

        rows["runs"] = [
            run(1, "done", k=2, membership_blob=membership["hash"], membership_hash="c" * 64,
                eigenvalues_blob=eig["hash"], quality_json=json.dumps({"modularity": 0.25})),
            run(2, "done", kind="attached", method="attached", label="survey", seed=None, k=2,
                param_set_version_id=None, k_requested=None, membership_blob=membership["hash"],
                membership_hash="c" * 64),
            run(3, "done", rerun_of=1, k=2, membership_blob=membership["hash"], membership_hash="c" * 64),
            run(4, "failed", error="solver did not converge"),
            run(5, "running", finished_at=None),  # another host's: left alone on open
        ]
    if "run_communities" in tables:
        rows["run_communities"] = [{"run_id": 1, "community": 0, "size": 2, "volume": 2.0, "cut": 1.0,
                                    "conductance": 0.5, "stability": None},
                                   {"run_id": 1, "community": 1, "size": 2, "volume": 3.0, "cut": 1.0,
                                    "conductance": 0.33, "stability": None}]
    if "run_measures" in tables:
        rows["run_measures"] = [{"run_id": 1, "name": "modularity", "value": 0.25}]
    return rows


def _columns(con) -> dict[str, list[str]]:
    names = [r[0] for r in con.execute("SELECT name FROM sqlite_master WHERE type='table' "
                                       "AND name NOT LIKE 'sqlite_%' AND name != 'alembic_version'")]
    return {n: [r[1] for r in con.execute(f'PRAGMA table_info("{n}")')] for n in names}


def _dump(path: Path, columns: dict[str, list[str]]) -> dict[str, list[tuple]]:
    con = sqlite3.connect(path)
    try:
        return {t: con.execute(f'SELECT {", ".join(cols)} FROM "{t}" ORDER BY {", ".join(cols[:2])}').fetchall()
                for t, cols in columns.items()}
    finally:
        con.close()


@pytest.mark.parametrize("revision", CHAIN, ids=[f"{r}{' (head)' if r == CHAIN[-1] else ''}" for r in CHAIN])
def test_store_at_earlier_revision_upgrades_with_every_row_kept(tmp_path, revision):
    """Every earlier revision; the head itself as a control (opened as is: no upgrade, no backup)."""
    from workspace.services.store import open_workspace

    path = tmp_path / "store.sqlite"
    migrate(resolve_store_url(path), target=revision, backup=False)
    con = sqlite3.connect(path)
    assert con.execute("SELECT version_num FROM alembic_version").fetchone()[0] == revision
    columns = _columns(con)
    rows = _rows_for(columns)
    con.execute("PRAGMA foreign_keys = ON")
    with con:
        for table in ("blobs", "projects", "networks", "network_versions", "param_sets", "param_set_versions",
                      "runs", "run_communities", "run_measures"):
            for row in rows.get(table, []) if table in columns else []:
                unknown = set(row) - set(columns[table])
                row = {k: v for k, v in row.items() if k not in unknown}
                con.execute(f'INSERT INTO "{table}" ({", ".join(row)}) VALUES ({", ".join("?" * len(row))})',
                            list(row.values()))
    assert con.execute("PRAGMA foreign_key_check").fetchall() == []
    con.close()
    kept_columns = {t: cols for t, cols in columns.items() if rows.get(t)}
    before = _dump(path, kept_columns)
    assert sum(len(v) for v in before.values()) >= 20

    notes: list[str] = []
    open_workspace(path, notify=notes.append).dispose()

    con = sqlite3.connect(path)
    try:
        assert con.execute("SELECT version_num FROM alembic_version").fetchone()[0] == head_revision()
        assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        assert con.execute("PRAGMA foreign_key_check").fetchall() == []
    finally:
        con.close()
    assert _dump(path, kept_columns) == before  # every row, every column it had, unchanged
    if revision == head_revision():
        assert list(tmp_path.glob("store.sqlite.backup-*")) == [] and notes == []
    else:
        backups = list(tmp_path.glob(f"store.sqlite.backup-{revision}-*"))
        assert len(backups) == 1 and any(str(backups[0]) in n for n in notes), (backups, notes)
        assert _dump(backups[0], kept_columns) == before

    # the upgraded store is usable: arrays verify, versions and runs read back
    from workspace.services.networks import load_graph, show_version
    from workspace.services.verify import verify_store

    with open_workspace(path) as store:
        doc = verify_store(store)
        assert doc["ok"] is True, doc["findings"]
        assert doc["blobs_checked"] == len({r["hash"] for r in rows["blobs"]})
        info = show_version(store, "harbour/ferries@2")
        assert info["parent"] == "harbour/ferries@1" and info["changes_from_parent"]["nodes_added"] == 1
        _, graph = load_graph(store, "valley/rivers@1")
        assert graph.node_ids.tolist() == ["a", "b", "c"] and graph.weight.tolist() == [1.0, 2.0]
        if "runs" in columns:
            from workspace.services.runs import list_runs

            statuses = {r["run"]: r["status"] for r in list_runs(store)}
            assert statuses == {1: "done", 2: "done", 3: "done", 4: "failed", 5: "running"}
