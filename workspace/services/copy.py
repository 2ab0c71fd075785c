"""Copying work from one store to another (SQLite <-> PostgreSQL, SQLite <-> SQLite).

What is copied, by scope:

- projects (all, or the named ones): every network with all its versions, every parameter set with
  all its versions, every finished run of those versions (communities and measures included), and
  the annotations of all of these;
- one network ``P/N``: its versions, its finished runs, the parameter-set versions those runs used
  (with the earlier versions of the same sets), and their annotations;
- one run's lineage: the run (and the runs it reruns), its version with the versions before it
  (following ``parent``), its parameter-set version with the earlier ones, and their annotations.

A copied version brings its node attribute table (columns and their arrays).
Records keep what they are: content hashes, arrays (copied as stored, chunked or not), messages,
import reports and policies, run records and provenance, ``created_at`` and ``created_by``.
Runs still ``running`` are not copied (their outcome is not known yet).

With projects and networks come their sweeps (the record, widened to what the source has now, and
its links to the copied runs; a sweep still ``running`` stays behind), their tracked parameter sets
and their updates (each set's new and previous run and the shown community labels, so that tables
and exports number communities alike in both stores). A warm-started run keeps a source that
rerun can rebuild: a source run is copied with it (a lineage copy follows warm sources as it
follows reruns) and its id in ``warm_from`` becomes the destination's; a cached embedding that is a
source is copied with it. Other cached embeddings are not copied (they are recomputed when needed).

Matching, so that copying twice adds nothing (ids differ between stores and are never compared):
projects, networks and parameter sets by name; a network version by its content hash (the n-th
version of a network with a given hash matches the n-th one on the destination); a parameter-set
version by its values hash; a run by its record (version, kind, method, label, parameters, k asked,
seed, repeats, status, start time, host, membership hash); an annotation by (target, action, text,
time, user); an array by its content hash.

Version numbers on the destination: a copied version that is not there yet gets the destination
network's next number. When the destination network is new, or holds the same history, the numbers
are therefore the source's; when it has versions of its own, copies come after them with new numbers
(listed in ``renumbered``), and each keeps its lineage: its parent is the destination's image of its
source parent. Parameter-set versions follow the same rule.

The whole copy is one write transaction on the destination, read from one snapshot of the source.
Before it commits, every array the copied records use is read back from the destination and
re-hashed, each chunk included (the check ``verify`` makes); a mismatch rolls everything back.
"""

from __future__ import annotations

import json
import os
from datetime import datetime, timezone
from typing import Any

from sqlalchemy import insert, select
from sqlalchemy.engine import make_url

from workspace.domain import VersionRef
from workspace.errors import NotFoundError, StoreDamaged, UsageError
from workspace.store import faults, repo
from workspace.store.db import Store, sqlite_file
from workspace.store.schema import (Annotation, Blob, BlobChunk, Embedding, Network, NetworkVersion, NodeTable,
                                    NodeTableColumn, ParamSet, ParamSetVersion, Project, Run, RunCommunity,
                                    RunMeasure, Sweep, SweepRun, TrackedSet, TrackedUpdate, TrackedUpdateRun)

_VERSION_BLOBS = ("node_offsets_blob", "node_bytes_blob", "edge_u_blob", "edge_v_blob", "weight_blob")
_NODE_TABLE_BLOBS = ("values_blob", "present_blob", "dictionary_offsets_blob", "dictionary_bytes_blob")
_RUN_BLOBS = ("membership_blob", "stability_blob", "eigenvalues_blob")
_RUN_KEY = ("kind", "method", "label", "params_json", "k_requested", "seed", "repeats", "status", "host",
            "membership_hash")
# a sweep is one exploration (matched by these); extending it widens the rest, which a copy brings along
_SWEEP_KEY = ("method", "params_json", "vary_name", "seed", "perturb", "host")
_SWEEP_GROWS = ("ks_json", "vary_values_json", "seeds", "status", "error", "finished_at")


def _utc(dt: datetime | None) -> datetime | None:
    """A stored time as an aware UTC datetime (SQLite hands back naive UTC values, PostgreSQL aware ones)."""
    if dt is None:
        return None
    return dt.replace(tzinfo=timezone.utc) if dt.tzinfo is None else dt.astimezone(timezone.utc)


def _stamp(dt: datetime | None) -> str | None:
    dt = _utc(dt)
    return None if dt is None else dt.isoformat(timespec="microseconds")


def _columns(row, *, skip=("id",)) -> dict[str, Any]:
    """A row's column values (times as aware UTC), without its own id."""
    out = {}
    for col in row.__table__.columns:
        if col.key in skip:
            continue
        value = getattr(row, col.key)
        out[col.key] = _utc(value) if isinstance(value, datetime) else value
    return out


def same_store(a: Store, b: Store) -> bool:
    """True when both name one database (the same SQLite file, or the same server database)."""
    pa, pb = sqlite_file(a.url), sqlite_file(b.url)
    if pa is not None or pb is not None:
        if pa is None or pb is None:
            return False
        try:
            return os.path.samefile(pa, pb)
        except OSError:
            return os.path.abspath(pa) == os.path.abspath(pb)
    ua, ub = make_url(a.url), make_url(b.url)
    return (ua.host or "", ua.port or 5432, ua.database) == (ub.host or "", ub.port or 5432, ub.database)


class _SourceSession:
    """The source's read session, whose faults name the source store (the copy runs inside the
    destination's write, whose own mapping would otherwise name the destination)."""

    def __init__(self, session, name: str) -> None:
        self._session, self._name = session, name

    def __getattr__(self, attr):
        value = getattr(self._session, attr)
        if not callable(value):
            return value

        def call(*args, **kwargs):
            with faults.translating(self._name):
                return value(*args, **kwargs)
        return call

    def stream(self, rows):
        """Iterate a streamed result, its faults named as the source's."""
        it = iter(rows)
        while True:
            with faults.translating(self._name):
                try:
                    row = next(it)
                except StopIteration:
                    return
            yield row


class _Copier:
    """One copy: source session ``s`` (a read snapshot), destination session ``d`` (the write)."""

    def __init__(self, s, d) -> None:
        self.s, self.d = s, d
        self.added = dict.fromkeys(("projects", "networks", "versions", "node_tables", "param_sets",
                                    "param_set_versions", "runs", "sweeps", "tracked_sets", "updates",
                                    "embeddings", "annotations", "arrays", "chunks"), 0)
        self.added["bytes"] = 0
        self.matched = dict.fromkeys(("projects", "networks", "versions", "param_sets", "param_set_versions",
                                      "runs", "sweeps", "tracked_sets", "updates", "embeddings", "annotations",
                                      "arrays"), 0)
        self.projects: dict[int, int] = {}
        self.networks: dict[int, int] = {}
        self.version_ids: dict[int, int] = {}
        self.param_sets: dict[int, int] = {}
        self.psvs: dict[int, int] = {}
        self.runs: dict[int, int] = {}
        self.blobs: set[str] = set()       # present on the destination (checked or copied)
        self.used_blobs: set[str] = set()  # every array the copied records use
        self.renumbered: list[dict[str, Any]] = []
        self.skipped_running: list[int] = []
        self.skipped_running_sweeps: list[int] = []
        self.skipped_running_updates: list[int] = []

    def _insert(self, model, values: dict[str, Any]) -> int:
        return self.d.execute(insert(model).values(**values).returning(model.id)).scalar_one()

    # --- arrays ----------------------------------------------------------------------------
    def blob(self, h: str | None) -> None:
        if h is None:
            return
        self.used_blobs.add(h)
        if h in self.blobs:
            return
        self.blobs.add(h)
        if self.d.scalar(select(Blob.hash).where(Blob.hash == h)) is not None:
            self.matched["arrays"] += 1
            return
        row = self.s.execute(select(Blob).where(Blob.hash == h)).scalar_one()
        self.d.execute(insert(Blob).values(hash=row.hash, codec=row.codec, dtype=row.dtype, length=row.length,
                                           raw_size=row.raw_size, data=row.data, chunks=row.chunks))
        self.added["arrays"] += 1
        self.added["bytes"] += len(row.data)
        self.s.expunge(row)
        for chunk in self.s.stream(repo.iter_chunks(self.s, h)):  # one chunk in memory at a time
            self.d.execute(insert(BlobChunk).values(blob_hash=h, seq=chunk.seq, raw_size=chunk.raw_size,
                                                    hash=chunk.hash, data=chunk.data))
            self.added["chunks"] += 1
            self.added["bytes"] += len(chunk.data)

    # --- projects, networks, versions ----------------------------------------------------
    def project(self, p: Project) -> int:
        if p.id not in self.projects:
            found = self.d.scalar(select(Project.id).where(Project.name == p.name))
            if found is None:
                found = self._insert(Project, _columns(p))
                self.added["projects"] += 1
            else:
                self.matched["projects"] += 1
            self.projects[p.id] = found
        return self.projects[p.id]

    def network(self, n: Network) -> int:
        if n.id not in self.networks:
            pid = self.project(self.s.get(Project, n.project_id))
            found = self.d.scalar(select(Network.id).where(Network.project_id == pid, Network.name == n.name))
            if found is None:
                found = self._insert(Network, {**_columns(n), "project_id": pid})
                self.added["networks"] += 1
            else:
                self.matched["networks"] += 1
            self.networks[n.id] = found
        return self.networks[n.id]

    def copy_versions(self, n: Network, wanted: set[int] | None = None) -> None:
        """Copy the versions of ``n`` (those in ``wanted``, else all) in number order."""
        nid = self.network(n)
        source = self.s.scalars(select(NetworkVersion).where(NetworkVersion.network_id == n.id)
                                .order_by(NetworkVersion.number)).all()
        dest = self.d.execute(select(NetworkVersion.id, NetworkVersion.number, NetworkVersion.content_hash)
                              .where(NetworkVersion.network_id == nid).order_by(NetworkVersion.number)).all()
        by_hash: dict[str, list[int]] = {}
        for row in dest:
            by_hash.setdefault(row.content_hash, []).append(row.id)
        used: dict[str, int] = {}
        top = dest[-1].number if dest else 0
        for v in source:
            occurrence = used.get(v.content_hash, 0)
            used[v.content_hash] = occurrence + 1
            if wanted is not None and v.id not in wanted:
                continue
            if v.id in self.version_ids:
                continue
            same = by_hash.get(v.content_hash, [])
            if occurrence < len(same):
                self.version_ids[v.id] = same[occurrence]
                self.matched["versions"] += 1
            else:
                for col in _VERSION_BLOBS:
                    self.blob(getattr(v, col))
                top += 1
                parent = self.version_ids.get(v.parent_id) if v.parent_id is not None else None
                self.version_ids[v.id] = self._insert(NetworkVersion, {**_columns(v), "network_id": nid,
                                                                    "number": top, "parent_id": parent})
                self.added["versions"] += 1
                self.node_table(v.id, self.version_ids[v.id])
                if top != v.number:
                    ref = f"{self.s.get(Project, n.project_id).name}/{n.name}"
                    self.renumbered.append({"network": ref, "source": v.number, "destination": top})
            for col in _VERSION_BLOBS:
                self.used_blobs.add(getattr(v, col))

    def node_table(self, source_version: int, dest_version: int) -> None:
        """Copy the node attribute table of a newly copied version (its columns and their arrays)."""
        t = self.s.scalar(select(NodeTable).where(NodeTable.version_id == source_version))
        if t is None:
            return
        tid = self._insert(NodeTable, {**_columns(t), "version_id": dest_version})
        for c in self.s.scalars(select(NodeTableColumn).where(NodeTableColumn.table_id == t.id)
                                .order_by(NodeTableColumn.position)).all():
            for col in _NODE_TABLE_BLOBS:
                self.blob(getattr(c, col))
            self.d.execute(insert(NodeTableColumn).values(**{**_columns(c, skip=()), "table_id": tid}))
        self.added["node_tables"] += 1

    # --- parameter sets ------------------------------------------------------------------
    def param_set(self, ps: ParamSet, up_to: int | None = None) -> None:
        """Copy the versions of ``ps`` (numbers up to ``up_to``, else all) in number order."""
        if ps.id not in self.param_sets:
            pid = self.project(self.s.get(Project, ps.project_id))
            found = self.d.scalar(select(ParamSet.id).where(ParamSet.project_id == pid, ParamSet.name == ps.name))
            if found is None:
                found = self._insert(ParamSet, {**_columns(ps), "project_id": pid})
                self.added["param_sets"] += 1
            else:
                self.matched["param_sets"] += 1
            self.param_sets[ps.id] = found
        dsid = self.param_sets[ps.id]
        q = select(ParamSetVersion).where(ParamSetVersion.param_set_id == ps.id).order_by(ParamSetVersion.number)
        if up_to is not None:
            q = q.where(ParamSetVersion.number <= up_to)
        dest = self.d.execute(select(ParamSetVersion.id, ParamSetVersion.number, ParamSetVersion.values_hash)
                              .where(ParamSetVersion.param_set_id == dsid).order_by(ParamSetVersion.number)).all()
        by_hash = {row.values_hash: row.id for row in dest}
        top = dest[-1].number if dest else 0
        for pv in self.s.scalars(q).all():
            if pv.id in self.psvs:
                continue
            if pv.values_hash in by_hash:
                self.psvs[pv.id] = by_hash[pv.values_hash]
                self.matched["param_set_versions"] += 1
                continue
            top += 1
            self.psvs[pv.id] = by_hash[pv.values_hash] = self._insert(
                ParamSetVersion, {**_columns(pv), "param_set_id": dsid, "number": top})
            self.added["param_set_versions"] += 1
            if top != pv.number:
                ref = f"{self.s.get(Project, ps.project_id).name}/{ps.name}"
                self.renumbered.append({"param_set": ref, "source": pv.number, "destination": top})

    # --- runs ------------------------------------------------------------------------------
    @staticmethod
    def _run_key(values) -> tuple:
        return tuple(getattr(values, k) for k in _RUN_KEY) + (_stamp(values.started_at),)

    def run(self, r: Run) -> None:
        if r.id in self.runs:
            return
        if r.status == "running":
            self.skipped_running.append(r.id)
            return
        vid = self.version_ids[r.version_id]
        existing = {self._run_key(row): row.id for row in
                    self.d.execute(select(Run).where(Run.version_id == vid)).scalars()}
        key = self._run_key(r)
        for col in _RUN_BLOBS:
            if getattr(r, col) is not None:
                self.used_blobs.add(getattr(r, col))
        if key in existing:
            self.runs[r.id] = existing[key]
            self.matched["runs"] += 1
            return
        for col in _RUN_BLOBS:
            self.blob(getattr(r, col))
        values = {**_columns(r), "version_id": vid,
                  "param_set_version_id": self.psvs.get(r.param_set_version_id),
                  "rerun_of": self.runs.get(r.rerun_of)}
        values.update(self._warm_fields(r))
        new_id = self._insert(Run, values)
        self.runs[r.id] = new_id
        self.added["runs"] += 1
        for c in self.s.scalars(select(RunCommunity).where(RunCommunity.run_id == r.id)).all():
            self.d.execute(insert(RunCommunity).values(**{**_columns(c, skip=()), "run_id": new_id}))
        for m in self.s.scalars(select(RunMeasure).where(RunMeasure.run_id == r.id)).all():
            self.d.execute(insert(RunMeasure).values(**{**_columns(m, skip=()), "run_id": new_id}))

    def _warm_fields(self, r: Run) -> dict[str, str]:
        """The run's provenance and diagnostics with its warm-start source named as on the destination:
        a copied source run by its new id; a cached embedding source copied along (same key)."""
        prov = json.loads(r.provenance_json or "{}")
        source = prov.get("warm_from")
        if not source:
            return {}
        kind, _, ident = source.partition(":")
        if kind == "embedding":
            self.embedding(ident)
            return {}
        if kind != "run" or int(ident) not in self.runs:
            return {}
        renamed = f"run:{self.runs[int(ident)]}"
        prov["warm_from"] = renamed
        out = {"provenance_json": json.dumps(prov)}
        diag = json.loads(r.diagnostics_json or "{}")
        if isinstance(diag.get("warm_start"), dict) and diag["warm_start"].get("source") == source:
            diag["warm_start"]["source"] = renamed
            out["diagnostics_json"] = json.dumps(diag)
        return out

    def embedding(self, key: str) -> None:
        """Copy a cached embedding (content-keyed, so the key is the same on both stores)."""
        if self.d.scalar(select(Embedding.key).where(Embedding.key == key)) is not None:
            self.matched["embeddings"] += 1
            return
        e = self.s.get(Embedding, key)
        if e is None or e.version_id not in self.version_ids:
            return   # pruned on the source, or of a version outside the copy: rerun says so
        for col in ("values_blob", "vectors_blob"):
            self.blob(getattr(e, col))
        self.d.execute(insert(Embedding).values(**{**_columns(e, skip=()),
                                                   "version_id": self.version_ids[e.version_id]}))
        self.added["embeddings"] += 1

    def _psv(self, source_psv: int | None) -> int | None:
        """The destination id of a parameter-set version, copying it (and the earlier ones) when needed."""
        if source_psv is None:
            return None
        if source_psv not in self.psvs:
            pv = self.s.get(ParamSetVersion, source_psv)
            self.param_set(self.s.get(ParamSet, pv.param_set_id), pv.number)
        return self.psvs[source_psv]

    # --- sweeps, tracked sets and updates -------------------------------------------------------
    def sweeps(self) -> None:
        """The sweeps of the copied versions: new ones inserted, matched ones widened to the source's
        k, values, seeds and outcome; links to every copied run of theirs."""
        ids = sorted(self.version_ids)
        for i in range(0, len(ids), 500):
            for sw in self.s.scalars(select(Sweep).where(Sweep.version_id.in_(ids[i:i + 500]))
                                     .order_by(Sweep.id)).all():
                if sw.status == "running":
                    self.skipped_running_sweeps.append(sw.id)
                    continue
                vid = self.version_ids[sw.version_id]
                key = tuple(getattr(sw, k) for k in _SWEEP_KEY) + (_stamp(sw.started_at),)
                found = next((d.id for d in self.d.scalars(select(Sweep).where(Sweep.version_id == vid)).all()
                              if tuple(getattr(d, k) for k in _SWEEP_KEY) + (_stamp(d.started_at),) == key), None)
                if found is None:
                    found = self._insert(Sweep, {**_columns(sw), "version_id": vid,
                                                 "param_set_version_id": self._psv(sw.param_set_version_id)})
                    self.added["sweeps"] += 1
                else:
                    self.d.execute(Sweep.__table__.update().where(Sweep.id == found)
                                   .values(**{k: getattr(sw, k) for k in _SWEEP_GROWS}))
                    self.matched["sweeps"] += 1
                have = set(self.d.scalars(select(SweepRun.run_id).where(SweepRun.sweep_id == found)).all())
                for link in self.s.scalars(select(SweepRun).where(SweepRun.sweep_id == sw.id)
                                           .order_by(SweepRun.run_id)).all():
                    run = self.runs.get(link.run_id)
                    if run is not None and run not in have:
                        self.d.execute(insert(SweepRun).values(**{**_columns(link, skip=()), "sweep_id": found,
                                                                  "run_id": run}))

    def tracking(self, network_ids: list[int]) -> None:
        """Tracked sets and updates of the copied networks (updates of copied versions only)."""
        for nid in network_ids:
            dnid = self.networks[nid]
            for t in self.s.scalars(select(TrackedSet).where(TrackedSet.network_id == nid)
                                    .order_by(TrackedSet.id)).all():
                psv = self._psv(t.param_set_version_id)
                if self.d.scalar(select(TrackedSet.id).where(TrackedSet.network_id == dnid,
                                                             TrackedSet.param_set_version_id == psv)) is not None:
                    self.matched["tracked_sets"] += 1
                    continue
                self._insert(TrackedSet, {**_columns(t), "network_id": dnid, "param_set_version_id": psv})
                self.added["tracked_sets"] += 1
            have = {(u.version_id, u.trigger, _stamp(u.started_at), u.host) for u in
                    self.d.scalars(select(TrackedUpdate).where(TrackedUpdate.network_id == dnid)).all()}
            for u in self.s.scalars(select(TrackedUpdate).where(TrackedUpdate.network_id == nid)
                                    .order_by(TrackedUpdate.id)).all():
                if u.version_id not in self.version_ids:
                    continue
                if u.status == "running":
                    self.skipped_running_updates.append(u.id)
                    continue
                vid = self.version_ids[u.version_id]
                if (vid, u.trigger, _stamp(u.started_at), u.host) in have:
                    self.matched["updates"] += 1
                    continue
                uid = self._insert(TrackedUpdate, {**_columns(u), "network_id": dnid, "version_id": vid,
                                                   "previous_version_id": self.version_ids.get(u.previous_version_id)})
                self.added["updates"] += 1
                for row in self.s.scalars(select(TrackedUpdateRun).where(TrackedUpdateRun.update_id == u.id)
                                          .order_by(TrackedUpdateRun.position)).all():
                    labels = json.loads(row.labels_json) if row.labels_json else None
                    if labels is not None:
                        labels["aligned_to"] = self.runs.get(labels.get("aligned_to"))
                        if labels["aligned_to"] is None:
                            labels = None   # the run it was aligned to stayed behind
                    self.d.execute(insert(TrackedUpdateRun).values(**{
                        **_columns(row, skip=()), "update_id": uid,
                        "param_set_version_id": self._psv(row.param_set_version_id),
                        "run_id": self.runs.get(row.run_id), "previous_run_id": self.runs.get(row.previous_run_id),
                        "labels_json": None if labels is None else json.dumps(labels)}))

    # --- annotations -------------------------------------------------------------------------
    def annotations(self) -> None:
        targets = ((Annotation.run_id, self.runs), (Annotation.version_id, self.version_ids),
                   (Annotation.param_set_version_id, self.psvs))
        for column, mapping in targets:
            ids = sorted(mapping)
            for i in range(0, len(ids), 500):
                batch = ids[i:i + 500]
                rows = self.s.scalars(select(Annotation).where(column.in_(batch)).order_by(Annotation.id)).all()
                if not rows:
                    continue
                dest_ids = sorted({mapping[getattr(a, column.key)] for a in rows})
                have = {(getattr(a, column.key), a.action, a.text, _stamp(a.created_at), a.created_by)
                        for a in self.d.scalars(select(Annotation).where(column.in_(dest_ids))).all()}
                for a in rows:
                    target = mapping[getattr(a, column.key)]
                    key = (target, a.action, a.text, _stamp(a.created_at), a.created_by)
                    if key in have:
                        self.matched["annotations"] += 1
                        continue
                    have.add(key)
                    values = {**_columns(a), "run_id": None, "version_id": None, "param_set_version_id": None}
                    values[column.key] = target
                    self.d.execute(insert(Annotation).values(**values))
                    self.added["annotations"] += 1


def _scope_runs(s, version_ids: list[int]) -> list[Run]:
    runs: list[Run] = []
    for i in range(0, len(version_ids), 500):
        runs += s.scalars(select(Run).where(Run.version_id.in_(version_ids[i:i + 500]))).all()
    return sorted(runs, key=lambda r: r.id)


def _copy_runs(c: _Copier, runs: list[Run]) -> None:
    """Parameter sets the runs used (their versions up to the one used), then the runs in id order."""
    needed: dict[int, int] = {}
    for r in runs:
        if r.param_set_version_id is not None and r.param_set_version_id not in c.psvs:
            pv = c.s.get(ParamSetVersion, r.param_set_version_id)
            needed[pv.param_set_id] = max(needed.get(pv.param_set_id, 0), pv.number)
    for ps_id, up_to in sorted(needed.items()):
        c.param_set(c.s.get(ParamSet, ps_id), up_to)
    for r in runs:
        c.run(r)


def _lineage(s, run_id: int) -> tuple[list[Run], dict[int, set[int]]]:
    """The run, the runs it reruns and the runs it was warm-started from (transitively; oldest first),
    and per network the versions they need with all their ancestors."""
    runs: list[Run] = []
    seen: set[int] = set()
    if s.get(Run, run_id) is None:
        raise NotFoundError(f"no run {run_id} in the source store")
    todo = [run_id]
    while todo:
        current = s.get(Run, todo.pop())
        if current is None or current.id in seen:
            continue
        seen.add(current.id)
        runs.append(current)
        if current.rerun_of is not None:
            todo.append(current.rerun_of)
        kind, _, ident = (json.loads(current.provenance_json or "{}").get("warm_from") or "").partition(":")
        if kind == "run" and ident.isdigit():
            todo.append(int(ident))   # its warm-start source: rerun rebuilds the start block from it
    wanted: dict[int, set[int]] = {}
    for r in runs:
        v = s.get(NetworkVersion, r.version_id)
        while v is not None and v.id not in wanted.get(v.network_id, set()):
            wanted.setdefault(v.network_id, set()).add(v.id)
            v = s.get(NetworkVersion, v.parent_id) if v.parent_id is not None else None
    return sorted(runs, key=lambda r: r.id), wanted


def copy_work(source: Store, dest: Store, *, projects: list[str] | None = None, network: str | None = None,
              run: int | None = None) -> dict[str, Any]:
    """Copy projects (all when none are named), one network ``P/N``, or one run's lineage from ``source``
    to ``dest``; see the module docstring for what is copied, how records are matched and numbered.

    Returns a summary: counts ``added`` and ``matched`` (already there) per kind, ``run_ids`` (source
    run id -> destination run id), ``renumbered`` versions, ``skipped_running`` run ids and ``verified``
    (arrays and chunks re-hashed on the destination before commit). Raises :class:`UsageError` for two
    scopes at once or source = destination, :class:`NotFoundError` for a missing project, network or
    run, :class:`StoreDamaged` (nothing written) when an array arrives not matching its hash; faults of
    either store leave through their ``read()``/``write()`` mapping (a destination the role may not
    write: :class:`StoreReadOnly`, exit 11).
    """
    if sum(x is not None for x in (projects, network, run)) > 1:
        raise UsageError("copy one scope at a time: projects, --network or --run")
    if same_store(source, dest):
        raise UsageError(f"source and destination are the same store ({dest.name})")
    if network is not None:
        ref = VersionRef.parse(network)
        if ref.version is not None:
            raise UsageError(f"--network takes PROJECT/NETWORK without @version, not {network!r}")
    with source.read() as s:
        # resolve the scope first: a name that is not there fails before the destination is locked
        if run is not None:
            lineage, wanted = _lineage(s, run)
            scope: dict[str, Any] = {"run": run}
        elif network is not None:
            net = repo.find_network(s, ref.project, ref.network)
            if net is None:
                from workspace.services.networks import network_not_found

                raise network_not_found(s, ref.project, ref.network)
            scope = {"network": f"{ref.project}/{ref.network}"}
        else:
            names = projects or [p.name for p in s.scalars(select(Project).order_by(Project.name)).all()]
            found = []
            for name in names:
                p = repo.find_project(s, name)
                if p is None:
                    from workspace.services.networks import project_not_found

                    raise project_not_found(s, name)
                found.append(p)
            scope = {"projects": [p.name for p in found]}
        src = _SourceSession(s, source.name)
        with dest.write() as d:
            c = _Copier(src, d)
            if run is not None:
                for net_id, ids in sorted(wanted.items()):
                    c.copy_versions(src.get(Network, net_id), ids)
                _copy_runs(c, lineage)
            elif network is not None:
                c.copy_versions(net)
                _copy_runs(c, _scope_runs(src, sorted(c.version_ids)))
                c.sweeps()
                c.tracking([net.id])
            else:
                for p in found:
                    c.project(p)
                    for n in src.scalars(select(Network).where(Network.project_id == p.id)
                                         .order_by(Network.name)).all():
                        c.copy_versions(n)
                    for ps in src.scalars(select(ParamSet).where(ParamSet.project_id == p.id)
                                          .order_by(ParamSet.name)).all():
                        c.param_set(ps)
                _copy_runs(c, _scope_runs(src, sorted(c.version_ids)))
                c.sweeps()
                c.tracking(sorted(c.networks))
            c.annotations()
            verified = _verify_arrival(d, c.used_blobs, source.name)
    return {"source": source.name, "destination": dest.name, "scope": scope, "added": c.added,
            "matched": c.matched, "run_ids": {str(k): v for k, v in sorted(c.runs.items())},
            "renumbered": c.renumbered, "skipped_running": c.skipped_running,
            "skipped_running_sweeps": c.skipped_running_sweeps,
            "skipped_running_updates": c.skipped_running_updates, "verified": verified}


def _verify_arrival(d, hashes: set[str], source_name: str) -> dict[str, Any]:
    """Re-hash, on the destination and before commit, every array the copied records use."""
    from workspace.services.verify import check_blobs

    checked, chunks, findings = check_blobs(d, hashes)
    if findings:
        first = findings[0]
        raise StoreDamaged(f"copy stopped, nothing written: {len(findings)} array(s) do not match their hash "
                           f"after the copy (first: {first['blob'][:12]}, {first.get('detail', 'missing')}); "
                           f"run `cutbook verify` on {source_name}")
    return {"ok": True, "arrays": checked, "chunks": chunks}
