"""Notes and tags on runs, network versions and parameter-set versions.

The records they describe never change: an annotation is a row of its own in
``annotations``, and rows are only ever inserted. A note is added; a tag is put
on (``tag``) or taken off (``untag``) by a new row, so the whole history stays
readable. The current tags of a target are the replay of its rows in id order;
its current notes are all its notes, oldest first.

Targets: a run id (``14``), a network version ``P/N[@V]`` (latest when ``@V``
is left out) or, with ``params=True``, a parameter-set version ``P/NAME[@V]``.
"""

from __future__ import annotations

import re
from typing import Any, Iterable

from sqlalchemy import select

from workspace.domain import VersionRef
from workspace.errors import NotFoundError, UsageError
from workspace.store import repo
from workspace.store.db import Store
from workspace.store.schema import Annotation, Network, NetworkVersion, ParamSet, ParamSetVersion, Project, Run

MAX_NOTE_CHARS = 4000
MAX_TAG_CHARS = 64
_TAG = re.compile(r"^[^\s,]+$")
_COLUMNS = {"run": "run_id", "version": "version_id", "params": "param_set_version_id"}


def _resolve(s, target: str | int, params: bool) -> tuple[str, int, str]:
    """(kind, row id, display ref) of an annotation target. Raises NotFoundError / UsageError."""
    text = str(target).strip()
    if params:
        from workspace.services.params import find_params

        project, name, psv = find_params(s, text)
        return "params", psv.id, f"{project}/{name}@{psv.number}"
    if text.isdigit():
        run = s.get(Run, int(text))
        if run is None:
            raise NotFoundError(f"no run {text}")
        return "run", run.id, f"run {run.id}"
    if "/" not in text:
        raise UsageError(f"not a run id or a network reference: {text!r} (a parameter set needs --params)")
    from workspace.services.networks import resolve_version

    ref = VersionRef.parse(text)
    try:
        v = resolve_version(s, ref)
    except NotFoundError:
        ps = s.scalar(select(ParamSet.id).join(Project, Project.id == ParamSet.project_id)
                      .where(Project.name == ref.project, ParamSet.name == ref.network))
        if ps is not None:
            raise NotFoundError(f"{ref.project}/{ref.network} is a parameter set, not a network: add --params"
                                ) from None
        raise
    return "version", v.id, f"{ref.project}/{ref.network}@{v.number}"


def _rows(s, kind: str, row_id: int) -> list[Annotation]:
    col = getattr(Annotation, _COLUMNS[kind])
    return list(s.scalars(select(Annotation).where(col == row_id).order_by(Annotation.id)))


def _current(rows: Iterable[Annotation]) -> tuple[list[str], list[dict[str, Any]]]:
    tags: dict[str, None] = {}
    notes: list[dict[str, Any]] = []
    for a in rows:
        if a.action == "tag":
            tags[a.text] = None
        elif a.action == "untag":
            tags.pop(a.text, None)
        else:
            notes.append({"note": a.text, "added": _iso(a.created_at)})
    return sorted(tags), notes


def _event(a: Annotation) -> dict[str, Any]:
    return {"id": a.id, "action": a.action, "text": a.text, "at": _iso(a.created_at)}


def _iso(t) -> str:
    """UTC time as the other listings print it (:func:`workspace.services.iso_time`)."""
    from workspace.services import iso_time

    return iso_time(t)


def _state(s, kind: str, row_id: int, ref: str, added: list[Annotation] | None = None) -> dict[str, Any]:
    rows = _rows(s, kind, row_id)
    tags, notes = _current(rows)
    out = {"target": ref, "kind": kind, "tags": tags, "notes": notes, "history": [_event(a) for a in rows]}
    if added is not None:
        out["added"] = [_event(a) for a in added]
    return out


def _check_tags(tags: Iterable[str]) -> list[str]:
    out = []
    for t in tags:
        t = t.strip()
        if not t or not _TAG.match(t) or len(t) > MAX_TAG_CHARS:
            raise UsageError(f"a tag is one word of up to {MAX_TAG_CHARS} characters without blanks or commas, "
                             f"got {t!r}")
        if t not in out:
            out.append(t)
    if not out:
        raise UsageError("give at least one tag")
    return out


def _insert(s, kind: str, row_id: int, action: str, text: str) -> Annotation:
    a = Annotation(action=action, text=text, created_at=repo.utcnow(), **{_COLUMNS[kind]: row_id})
    s.add(a)
    s.flush()
    return a


def add_note(store: Store, target: str | int, note: str, *, params: bool = False) -> dict[str, Any]:
    """Add a note to the target; returns its current tags, notes and full history (``added``: the new row)."""
    note = (note or "").strip()
    if not note:
        raise UsageError("the note is empty")
    if len(note) > MAX_NOTE_CHARS:
        raise UsageError(f"a note holds at most {MAX_NOTE_CHARS} characters, got {len(note)}")
    with store.write() as s:
        kind, row_id, ref = _resolve(s, target, params)
        added = [_insert(s, kind, row_id, "note", note)]
        return _state(s, kind, row_id, ref, added)


def tag(store: Store, target: str | int, tags: Iterable[str], *, params: bool = False) -> dict[str, Any]:
    """Put tags on the target; a tag it already carries adds no row (``added`` lists the rows written)."""
    wanted = _check_tags(tags)
    with store.write() as s:
        kind, row_id, ref = _resolve(s, target, params)
        have, _ = _current(_rows(s, kind, row_id))
        added = [_insert(s, kind, row_id, "tag", t) for t in wanted if t not in have]
        return _state(s, kind, row_id, ref, added)


def untag(store: Store, target: str | int, tags: Iterable[str], *, params: bool = False) -> dict[str, Any]:
    """Take tags off the target (one ``untag`` row each). A tag it does not carry is NotFoundError, nothing written."""
    wanted = _check_tags(tags)
    with store.write() as s:
        kind, row_id, ref = _resolve(s, target, params)
        have, _ = _current(_rows(s, kind, row_id))
        missing = [t for t in wanted if t not in have]
        if missing:
            raise NotFoundError(f"{ref} has no tag {', '.join(missing)} (its tags: {', '.join(have) or 'none'})")
        added = [_insert(s, kind, row_id, "untag", t) for t in wanted]
        return _state(s, kind, row_id, ref, added)


def annotations_of(store: Store, target: str | int, *, params: bool = False) -> dict[str, Any]:
    """Current tags and notes of a target, with every annotation event in order."""
    with store.read() as s:
        kind, row_id, ref = _resolve(s, target, params)
        return _state(s, kind, row_id, ref)


def current_for(s, kind: str, ids: Iterable[int]) -> dict[int, dict[str, Any]]:
    """``{row id: {"tags": [...], "notes": [...]}}`` for many targets of one kind, in one query (for listings)."""
    ids = list(ids)
    if not ids:
        return {}
    col = getattr(Annotation, _COLUMNS[kind])
    by_id: dict[int, list[Annotation]] = {}
    for chunk in range(0, len(ids), 900):  # stay under SQLite's bound-parameter limit
        for a in s.scalars(select(Annotation).where(col.in_(ids[chunk:chunk + 900])).order_by(Annotation.id)):
            by_id.setdefault(getattr(a, _COLUMNS[kind]), []).append(a)
    out = {}
    for row_id, rows in by_id.items():
        tags, notes = _current(rows)
        out[row_id] = {"tags": tags, "notes": notes}
    return out


def find_tagged(store: Store, tag_name: str) -> list[dict[str, Any]]:
    """Every target that currently carries ``tag_name``: ``[{"kind", "target"}]``, runs first."""
    with store.read() as s:
        rows = s.scalars(select(Annotation).where(Annotation.text == tag_name,
                                                  Annotation.action.in_(("tag", "untag")))
                         .order_by(Annotation.id)).all()
        live: dict[tuple[str, int], bool] = {}
        for a in rows:
            for kind, col in _COLUMNS.items():
                if getattr(a, col) is not None:
                    live[(kind, getattr(a, col))] = a.action == "tag"
        out = []
        for (kind, row_id), on in sorted(live.items(), key=lambda kv: (list(_COLUMNS).index(kv[0][0]), kv[0][1])):
            if not on:
                continue
            if kind == "run":
                ref = f"run {row_id}"
            elif kind == "version":
                v, n, p = s.execute(select(NetworkVersion.number, Network.name, Project.name)
                                    .join(Network, Network.id == NetworkVersion.network_id)
                                    .join(Project, Project.id == Network.project_id)
                                    .where(NetworkVersion.id == row_id)).one()
                ref = f"{p}/{n}@{v}"
            else:
                v, n, p = s.execute(select(ParamSetVersion.number, ParamSet.name, Project.name)
                                    .join(ParamSet, ParamSet.id == ParamSetVersion.param_set_id)
                                    .join(Project, Project.id == ParamSet.project_id)
                                    .where(ParamSetVersion.id == row_id)).one()
                ref = f"{p}/{n}@{v}"
            out.append({"kind": kind, "target": ref, **({"run": row_id} if kind == "run" else {})})
        return out
