"""Integrity check of a whole store: every blob re-hashed, SQLite integrity and references."""

from __future__ import annotations

from typing import Any

from sqlalchemy import select, text

from workspace.store.blobs import array_hash, decode_array
from workspace.store.db import Store
from workspace.store.schema import Blob, Embedding, Network, NetworkVersion, Project, Run

_VERSION_BLOBS = ("node_offsets_blob", "node_bytes_blob", "edge_u_blob", "edge_v_blob", "weight_blob")
_RUN_BLOBS = ("membership_blob", "stability_blob", "eigenvalues_blob")


def _owners(s) -> dict[str, list[str]]:
    owners: dict[str, list[str]] = {}
    q = (select(NetworkVersion, Network.name, Project.name)
         .join(Network, Network.id == NetworkVersion.network_id).join(Project, Project.id == Network.project_id))
    for v, net, proj in s.execute(q).all():
        for col in _VERSION_BLOBS:
            owners.setdefault(getattr(v, col), []).append(f"version {proj}/{net}@{v.number} ({col[:-5]})")
    for emb in s.scalars(select(Embedding)).all():
        for col in ("values_blob", "vectors_blob"):
            owners.setdefault(getattr(emb, col), []).append(f"embedding {emb.key[:12]} ({col[:-5]})")
    from workspace.store.schema import NodeTable, NodeTableColumn  # node attribute tables (0008)

    q = (select(NodeTableColumn, NodeTable.version_id).join(NodeTable, NodeTable.id == NodeTableColumn.table_id))
    for col_row, version_id in s.execute(q).all():
        for col in ("values_blob", "present_blob", "dictionary_offsets_blob", "dictionary_bytes_blob"):
            h = getattr(col_row, col)
            if h:
                owners.setdefault(h, []).append(f"node table of version id {version_id}, "
                                                f"column {col_row.name!r} ({col[:-5]})")
    for run in s.scalars(select(Run)).all():
        for col in _RUN_BLOBS:
            h = getattr(run, col)
            if h:
                owners.setdefault(h, []).append(f"run {run.id} ({col[:-5]})")
    return owners


def verify_store(store: Store) -> dict[str, Any]:
    """Recompute every blob's hash; run PRAGMA integrity_check and foreign_key_check.

    Returns ``{"ok": bool, "blobs_checked": int, "findings": [...]}``; each
    finding names what it concerns (the version or run a bad blob belongs to).
    """
    findings: list[dict[str, Any]] = []
    checked = 0
    with store.read() as s:
        if store.is_sqlite:
            rows = [r[0] for r in s.execute(text("PRAGMA integrity_check")).all()]
            if rows != ["ok"]:
                findings.append({"kind": "integrity_check", "detail": "; ".join(rows[:20])})
            bad = s.execute(text("PRAGMA foreign_key_check")).all()
            for row in bad[:50]:
                findings.append({"kind": "foreign_key", "detail": f"table {row[0]} row {row[1]} -> {row[2]}"})
        owners = _owners(s)
        for b in s.execute(select(Blob.hash, Blob.codec, Blob.data, Blob.raw_size)).yield_per(64):
            checked += 1
            try:
                arr = decode_array(b.codec, b.data, b.raw_size)
                ok = array_hash(arr) == b.hash
                detail = "content does not match its hash"
            except Exception as exc:  # corrupt compression or header: report, keep checking
                ok, detail = False, f"cannot be decoded ({type(exc).__name__}: {exc})"
            if not ok:
                findings.append({"kind": "blob", "blob": b.hash, "detail": detail,
                                 "belongs_to": owners.get(b.hash, ["(no owner)"])})
        for emb in s.scalars(select(Embedding)).all():  # cached embeddings: shapes agree with their arrays
            lengths = dict(s.execute(select(Blob.hash, Blob.length)
                                     .where(Blob.hash.in_([emb.values_blob, emb.vectors_blob]))).all())
            if emb.vectors_blob in lengths and lengths[emb.vectors_blob] != emb.n_rows * emb.n_vectors or \
                    emb.values_blob in lengths and lengths[emb.values_blob] < emb.n_vectors:
                findings.append({"kind": "embedding", "blob": emb.vectors_blob,
                                 "detail": f"arrays do not hold {emb.n_rows} x {emb.n_vectors} values",
                                 "belongs_to": [f"embedding {emb.key[:12]}"]})
        for h, who in owners.items():
            if s.get(Blob, h) is None:
                findings.append({"kind": "missing_blob", "blob": h, "belongs_to": who})
    return {"ok": not findings, "blobs_checked": checked, "findings": findings, "store": store.url}
