"""The everyday listings through the standard library's sqlite3: quick start-up.

``cutbook projects``, ``cutbook runs`` and ``cutbook show RUN`` do a few milliseconds of work,
but loading SQLAlchemy and mapping the ORM takes several times that before the first query.
On an SQLite store that needs nothing done on open, these listings are answered here with
``sqlite3`` alone:

- the same checks as :func:`workspace.services.store.open_workspace` come first: the file is an
  SQLite database that is not cut short (:func:`workspace.store.db.inspect_sqlite_file`) and can
  be written (so a read-only store keeps its own opening rules), its schema revision is exactly
  :data:`workspace.store.db.HEAD_REVISION` (a store to upgrade, or one newer than this code, is
  left to the full path), and no run of this host is ``running`` (marking vanished runs
  interrupted is a write: the full path does it);
- one read transaction per listing, ``PRAGMA query_only`` on, every database fault through
  :func:`workspace.store.faults.translating`.

Anything else - a server URL, a listing form not served here (scope, status, text filter or
another sort for ``runs``; ``--labels`` for ``show``) - opens the full store and calls the
service it always called (:mod:`workspace.services.networks`, :mod:`~workspace.services.browse`,
:mod:`~workspace.services.runs`), so there is still one service layer and one answer:
``tests/services/test_services_quickread.py`` compares both paths on the demo store.
"""

from __future__ import annotations

import json
import os
import sqlite3
from contextlib import contextmanager
from datetime import datetime
from pathlib import Path
from typing import Any, Callable, Iterator

from workspace.errors import CutbookError, NotFoundError
from workspace.store import faults
from workspace.store.db import HEAD_REVISION, inspect_sqlite_file, resolve_store_url, resolve_user

#: the scalar quality measures a ledger row carries (also the ledger's measure sort keys)
LEDGER_MEASURES = ("modularity", "conductance", "normalized_cut", "ratio_cut", "coverage", "cut")
_IN_CHUNK = 900  # stay under SQLite's bound-parameter limit

_RUN_COLUMNS = ("r.id, r.kind, r.method, r.label, r.status, p.name, n.name, v.number, r.k, r.k_requested, "
                "r.seed, r.repeats, r.membership_hash, r.started_at, r.finished_at, r.created_by, r.host")
_RUN_JOINS = ("FROM runs r JOIN network_versions v ON v.id = r.version_id "
              "JOIN networks n ON n.id = v.network_id JOIN projects p ON p.id = n.project_id")


class QuickStore:
    """An SQLite store open through ``sqlite3`` for reading (see the module notes).

    :meth:`full` opens the same store the usual way (SQLAlchemy) for what is not served here.
    """

    def __init__(self, con: sqlite3.Connection, path: Path, *, explicit: str | None,
                 notify: Callable[[str], None] | None, user: str | None) -> None:
        self.con = con
        self.path = path
        self.name = os.fspath(path)
        self._explicit = explicit
        self._notify = notify
        self._user = user
        self._full = None

    @contextmanager
    def read(self) -> Iterator[sqlite3.Connection]:
        """One read transaction (a consistent snapshot); faults leave as cutbook errors."""
        with faults.translating(self.name):
            self.con.execute("BEGIN")
            try:
                yield self.con
            finally:
                self.con.execute("ROLLBACK")

    def full(self):
        """The full :class:`~workspace.store.db.Store` on the same file (opened once, on demand)."""
        if self._full is None:
            from workspace.services.store import open_workspace

            self._full = open_workspace(self._explicit, notify=self._notify, create=False, create_dirs=False,
                                        user=self._user)
        return self._full

    def dispose(self) -> None:
        self.con.close()
        if self._full is not None:
            self._full.dispose()


def open_quick(explicit: str | None, *, notify: Callable[[str], None] | None = None,
               user: str | None = None) -> QuickStore | None:
    """A :class:`QuickStore` when the store named by ``explicit`` (``--store``/env value, None: the
    default place) can be read here, else None (the caller opens it the usual way, which also
    reports whatever is wrong with it)."""
    from workspace.services.store import _writable

    if explicit is not None and "://" in explicit:
        return None
    resolve_user(user)  # a bad --user is refused here exactly as on the full path
    path = Path(resolve_store_url(explicit)[len("sqlite:///"):])
    try:
        if inspect_sqlite_file(path) != "present" or not _writable(path):
            return None
    except CutbookError:
        return None
    timeout = faults.busy_timeout_s()
    try:
        con = sqlite3.connect(os.fspath(path), timeout=timeout, isolation_level=None, check_same_thread=False)
    except sqlite3.Error:
        return None
    try:
        con.execute(f"PRAGMA busy_timeout={int(timeout * 1000)}")
        con.execute("PRAGMA query_only=ON")
        con.execute("BEGIN")
        try:
            has_version = con.execute("SELECT 1 FROM sqlite_master WHERE type = 'table' "
                                      "AND name = 'alembic_version'").fetchone()
            revisions = [r[0] for r in con.execute("SELECT version_num FROM alembic_version")] if has_version else []
            running = (revisions == [HEAD_REVISION]
                       and con.execute("SELECT 1 FROM runs WHERE status = 'running' LIMIT 1").fetchone())
        finally:
            con.execute("ROLLBACK")
        if revisions != [HEAD_REVISION] or running:
            con.close()
            return None
    except sqlite3.Error:
        con.close()
        return None
    return QuickStore(con, path, explicit=explicit, notify=notify, user=user)


def _iso(value: str | None) -> str | None:
    """A stored time as the listings print it: ``YYYY-MM-DDTHH:MM:SS`` (SQLite keeps no zone)."""
    return None if value is None else _time(value).isoformat(timespec="seconds")


def _time(value: str) -> datetime:
    return datetime.fromisoformat(value).replace(tzinfo=None)


def _row_dict(r) -> dict[str, Any]:
    """The keys of ``workspace.services.runs._run_row_dict`` from a ``_RUN_COLUMNS`` row."""
    (run_id, kind, method, label, status, project, network, number, k, k_requested, seed, repeats,
     membership_hash, started_at, finished_at, created_by, host) = r[:17]
    return {"run": run_id, "kind": kind, "method": method, "label": label, "status": status,
            "network": f"{project}/{network}", "version": number, "ref": f"{project}/{network}@{number}",
            "k": k, "k_requested": k_requested, "seed": seed, "repeats": repeats,
            "membership_hash": membership_hash, "created": _iso(started_at), "finished": _iso(finished_at),
            "by": created_by, "host": host}


def _run_annotations(con: sqlite3.Connection, run_ids: list[int]) -> dict[int, dict[str, Any]]:
    """``{run id: {"tags", "notes"}}``: the replay of each run's annotation rows in id order
    (as :func:`workspace.services.annotations.current_for`)."""
    rows: dict[int, list] = {}
    for start in range(0, len(run_ids), _IN_CHUNK):
        chunk = run_ids[start:start + _IN_CHUNK]
        marks = ",".join("?" * len(chunk))
        for run_id, action, text, created_at in con.execute(
                f"SELECT run_id, action, text, created_at FROM annotations WHERE run_id IN ({marks}) "
                "ORDER BY id", chunk):
            rows.setdefault(run_id, []).append((action, text, created_at))
    out = {}
    for run_id, events in rows.items():
        tags: dict[str, None] = {}
        notes = []
        for action, text, created_at in events:
            if action == "tag":
                tags[text] = None
            elif action == "untag":
                tags.pop(text, None)
            else:
                notes.append({"note": text, "added": _iso(created_at)})
        out[run_id] = {"tags": sorted(tags), "notes": notes}
    return out


def list_projects(store) -> list[dict[str, Any]]:
    """As :func:`workspace.services.networks.list_projects`."""
    if not isinstance(store, QuickStore):
        from workspace.services.networks import list_projects as full

        return full(store)
    with store.read() as con:
        rows = con.execute("SELECT p.name, COUNT(n.id), p.created_at FROM projects p "
                           "LEFT OUTER JOIN networks n ON p.id = n.project_id GROUP BY p.id ORDER BY p.name").fetchall()
    return [{"project": name, "networks": count, "created": _iso(created)} for name, count, created in rows]


def is_empty(store) -> bool:
    """No project in the store."""
    return not list_projects(store)


def ledger_runs(store, scope: str | None = None, *, status: str | None = None, text: str | None = None,
                sort: str = "run", descending: bool | None = None, limit: int | None = None,
                offset: int = 0) -> list[dict[str, Any]]:
    """As :func:`workspace.services.browse.ledger_runs`; the plain listing (whole store, newest
    run first, optionally one page) is read here, every other form by the full service."""
    if not isinstance(store, QuickStore) or scope or status or text or sort != "run" or descending is False:
        from workspace.services import browse

        return browse.ledger_runs(store.full() if isinstance(store, QuickStore) else store, scope, status=status,
                                  text=text, sort=sort, descending=descending, limit=limit, offset=offset)
    with store.read() as con:
        rows = con.execute(
            f"SELECT {_RUN_COLUMNS}, r.quality_json, ps.name, psv.number {_RUN_JOINS} "
            "LEFT OUTER JOIN param_set_versions psv ON psv.id = r.param_set_version_id "
            "LEFT OUTER JOIN param_sets ps ON ps.id = psv.param_set_id "
            "ORDER BY r.id DESC LIMIT ? OFFSET ?", (-1 if limit is None else limit, offset)).fetchall()
        annotations = _run_annotations(con, [r[0] for r in rows])
    out = []
    for r in rows:
        row = _row_dict(r)
        quality_json, ps_name, ps_number = r[17:]
        project = r[5]
        row["param_set"] = f"{project}/{ps_name}@{ps_number}" if ps_name else None
        try:
            quality = json.loads(quality_json or "{}")
        except ValueError:
            quality = {}
        row["quality"] = {m: float(quality[m]) for m in LEDGER_MEASURES
                          if isinstance(quality.get(m), (int, float)) and not isinstance(quality.get(m), bool)}
        row["tags"] = annotations.get(row["run"], {}).get("tags", [])
        out.append(row)
    return out


def check_scope(store, scope: str) -> None:
    """As :func:`workspace.services.browse.check_scope` (always the full service)."""
    from workspace.services import browse

    browse.check_scope(store.full() if isinstance(store, QuickStore) else store, scope)


def show_run(store, run_id: int, *, include_labels: bool = False) -> dict[str, Any]:
    """As :func:`workspace.services.runs.show_run`; without ``include_labels`` read here."""
    if not isinstance(store, QuickStore) or include_labels:
        from workspace.services import runs

        return runs.show_run(store.full() if isinstance(store, QuickStore) else store, run_id,
                             include_labels=include_labels)
    from workspace.store.blobs import decode_values

    with store.read() as con:
        r = con.execute(f"SELECT {_RUN_COLUMNS}, r.param_set_version_id, r.eigenvalues_blob, r.params_json, "
                        "r.rerun_of, r.error, r.quality_json, r.diagnostics_json, r.warnings_json, "
                        f"r.provenance_json, r.pid {_RUN_JOINS} WHERE r.id = ?", (run_id,)).fetchone()
        if r is None:
            raise NotFoundError(f"no run {run_id}")
        out = _row_dict(r)
        (psv_id, eig_blob, params_json, rerun_of, error, quality_json, diagnostics_json, warnings_json,
         provenance_json, pid) = r[17:]
        psv_ref = None
        if psv_id is not None:
            ps_name, ps_number = con.execute(
                "SELECT ps.name, psv.number FROM param_set_versions psv JOIN param_sets ps "
                "ON ps.id = psv.param_set_id WHERE psv.id = ?", (psv_id,)).fetchone()
            psv_ref = f"{r[5]}/{ps_name}@{ps_number}"
        eig = []
        if eig_blob:
            codec, data, raw_size = con.execute("SELECT codec, data, raw_size FROM blobs WHERE hash = ?",
                                                (eig_blob,)).fetchone()
            if codec == "zstd-chunks":  # an array stored in pieces: the full services read it
                from workspace.services import runs

                return runs.show_run(store.full(), run_id)
            eig = decode_values(codec, data, raw_size)
        comms = con.execute("SELECT community, size, volume, cut, conductance, stability FROM run_communities "
                            "WHERE run_id = ? ORDER BY community", (run_id,)).fetchall()
        annotations = _run_annotations(con, [run_id])
        # a tracked run's labels as people see them (services.tracking.shown_map)
        labels = con.execute("SELECT labels_json FROM tracked_update_runs WHERE run_id = ? AND labels_json IS NOT NULL "
                             "ORDER BY update_id DESC LIMIT 1", (run_id,)).fetchone()
    out.update({
        "params": json.loads(params_json), "param_set": psv_ref, "rerun_of": rerun_of,
        "error": error, "quality": json.loads(quality_json),
        "diagnostics": json.loads(diagnostics_json), "warnings": json.loads(warnings_json),
        "provenance": json.loads(provenance_json), "eigenvalues": eig,
        "communities": [{"community": c, "size": size, "volume": volume, "cut": cut, "conductance": cond,
                         "stability": stab} for c, size, volume, cut, cond, stab in comms],
        "host": out["host"], "pid": pid,
    })
    out.update(annotations.get(run_id, {"tags": [], "notes": []}))
    out["shown_labels"] = json.loads(labels[0]) if labels else None
    shown = out["shown_labels"]["map"] if out["shown_labels"] else None
    for row in out["communities"]:
        c = row["community"]
        row["shown"] = shown[c] if shown is not None and 0 <= c < len(shown) else c
    started, finished = r[13], r[14]
    if started and finished:
        out["wall_time_s"] = (_time(finished) - _time(started)).total_seconds()
    return out
