"""Integrity check of a whole store: every blob (and every chunk of a chunked one) re-hashed, SQLite
integrity and references."""

from __future__ import annotations

from typing import Any

from sqlalchemy import select, text

import hashlib

from workspace.store.blobs import array_hash, chunk_header, decode_array, decompress_chunk_into
from workspace.store.db import Store
from workspace.store.repo import iter_chunks
from workspace.store.schema import Blob, Embedding, Network, NetworkVersion, Project, Run

_BLOB_COLUMNS = (Blob.hash, Blob.codec, Blob.data, Blob.raw_size, Blob.dtype, Blob.length, Blob.chunks)

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


def _check_chunked(s, b) -> tuple[int, list[str]]:
    """Every chunk of a chunked array: its own sha256, its place, then the array's hash over all of them.

    Streams one chunk at a time (memory: one chunk). Returns (chunks read, problems)."""
    problems: list[str] = []
    whole = hashlib.sha256(chunk_header(b.dtype, b.length))
    seen = total = 0
    for row in iter_chunks(s, b.hash):
        if row.seq != seen:
            problems.append(f"chunk {seen} is missing")
            seen = row.seq
        piece = bytearray(row.raw_size)
        try:
            decompress_chunk_into(row.data, memoryview(piece))
        except Exception as exc:  # corrupt compression: report, keep checking
            problems.append(f"chunk {row.seq} cannot be decoded ({type(exc).__name__}: {exc})")
        else:
            if hashlib.sha256(piece).hexdigest() != row.hash:
                problems.append(f"chunk {row.seq} does not match its hash")
        whole.update(piece)
        total += row.raw_size
        seen += 1
    if seen != b.chunks:
        problems.append(f"{seen} chunks stored, {b.chunks} expected")
    if total != b.raw_size:
        problems.append(f"chunks hold {total} bytes, {b.raw_size} expected")
    if not problems and whole.hexdigest() != b.hash:
        problems.append("content does not match its hash")
    return seen, problems


def check_blobs(s, hashes=None) -> tuple[int, int, list[dict[str, Any]]]:
    """Re-hash stored arrays (all, or those in ``hashes``) in session ``s``.

    Returns (blobs checked, chunks checked, findings without owners); each finding names the blob.
    An array in ``hashes`` that is not stored is a ``missing_blob`` finding.
    """
    findings: list[dict[str, Any]] = []
    checked = chunks = 0
    q = select(*_BLOB_COLUMNS)
    wanted = None if hashes is None else sorted(set(hashes))
    batches = [None] if wanted is None else [wanted[i:i + 500] for i in range(0, len(wanted), 500)]
    found: set[str] = set()
    for batch in batches:
        query = q if batch is None else q.where(Blob.hash.in_(batch))
        for b in s.execute(query, execution_options={"yield_per": 1}):
            checked += 1
            found.add(b.hash)
            if b.chunks:
                n, problems = _check_chunked(s, b)
                chunks += n
                findings += [{"kind": "blob", "blob": b.hash, "detail": p} for p in problems]
                continue
            try:
                ok = array_hash(decode_array(b.codec, b.data, b.raw_size)) == b.hash
                detail = "content does not match its hash"
            except Exception as exc:  # corrupt compression or header: report, keep checking
                ok, detail = False, f"cannot be decoded ({type(exc).__name__}: {exc})"
            if not ok:
                findings.append({"kind": "blob", "blob": b.hash, "detail": detail})
    for h in (wanted or []):
        if h not in found:
            findings.append({"kind": "missing_blob", "blob": h})
    return checked, chunks, findings


def verify_store(store: Store) -> dict[str, Any]:
    """Recompute every blob's hash (each chunk's, for a chunked array); run PRAGMA integrity_check and
    foreign_key_check.

    Returns ``{"ok": bool, "blobs_checked": int, "chunks_checked": int, "findings": [...]}``; each
    finding names what it concerns (the version or run a bad blob belongs to).
    """
    findings: list[dict[str, Any]] = []
    with store.read() as s:
        if store.is_sqlite:
            rows = [r[0] for r in s.execute(text("PRAGMA integrity_check")).all()]
            if rows != ["ok"]:
                findings.append({"kind": "integrity_check", "detail": "; ".join(rows[:20])})
            bad = s.execute(text("PRAGMA foreign_key_check")).all()
            for row in bad[:50]:
                findings.append({"kind": "foreign_key", "detail": f"table {row[0]} row {row[1]} -> {row[2]}"})
        owners = _owners(s)
        checked, chunks, bad_blobs = check_blobs(s)
        for f in bad_blobs:
            findings.append({**f, "belongs_to": owners.get(f["blob"], ["(no owner)"])})
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
    return {"ok": not findings, "blobs_checked": checked, "chunks_checked": chunks, "findings": findings,
            "store": store.name}
