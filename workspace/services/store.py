"""Opening a workspace store (front ends call this, never workspace.store directly).

Opening decides, before SQLite touches anything, what the path holds: nothing
(a new store, made only when ``create``), a file that is not a store or is cut
short (refused, the file untouched), or a store. A store that cannot be
written (read-only medium, read-only file or folder) opens for reading, with
every write refused by the read-only message; so does a store whose disk is so
full that SQLite cannot even set up its shared-memory file for reading.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Callable

from workspace.errors import CutbookError, NoSpace, StoreBusy, StoreError, StoreMissing, StoreReadOnly
from workspace.store import faults
from workspace.store.db import (ENV_STORE, ENV_USER, HEAD_REVISION, resolve_user, Store, _current_revision, _make_engine,  # noqa: F401
                                default_demo_path, default_store_path, display_name, inspect_sqlite_file, migrate,
                                resolve_store_url, sqlite_file)
from workspace.store.faults import translate as translate_fault  # noqa: F401 - the CLI's top level uses it


def open_workspace(store: str | os.PathLike | None = None, *,
                   notify: Callable[[str], None] | None = None, create: bool = True, create_dirs: bool = True,
                   require_write: bool = False, user: str | None = None) -> Store:
    """Open the store, upgrading its schema first when needed.

    Parameters
    ----------
    store : path, SQLAlchemy URL or None
        None: ``$CUTBOOK_STORE``, else the default store in the user data folder.
    notify : callable or None
        Receives one-line notes (the backup copy an upgrade made; runs marked interrupted).
    create : bool, default True
        May make a new, empty store when none exists there (commands that only read pass False
        and get :class:`StoreMissing` instead).
    create_dirs : bool, default True
        With ``create``: may also make the store's missing folders.
    require_write : bool, default False
        Refuse at once (:class:`StoreReadOnly`, :class:`NoSpace`) when the store cannot be
        written, instead of opening it for reading.

    user : str or None
        Who makes the records written through this store (``--user``); None: ``$CUTBOOK_USER``, else
        the OS account. Every new project, network, version, parameter set, run and annotation
        records it in ``created_by``.

    A store that already holds data is copied before an upgrade; later revisions also mark
    runs whose process has vanished as interrupted here.
    """
    who = resolve_user(user)
    url = resolve_store_url(store)
    path = sqlite_file(url)
    if path is None:
        return _finish_open(url, _probe_server(url), notify=notify, create=create, readonly=None, user=who)
    name = os.fspath(path)
    state = inspect_sqlite_file(path)
    if state == "absent":
        if not path.parent.is_dir():
            if not (create and create_dirs):
                raise faults.missing(name)
            with faults.translating(name, writing=True, os_errors=True):
                path.parent.mkdir(parents=True, exist_ok=True)
        elif not create:
            raise faults.missing(name)
    elif state == "empty" and not create:
        raise StoreMissing("the file is empty: no store here yet; nothing was created — check the path", path=name)
    if not _writable(path):
        if state != "present" or require_write:
            raise faults.read_only(name)
        return _open_read_only(url, path, notify=notify, reason=faults.read_only_reason(path), user=who)
    engine = _make_engine(url)
    try:
        current, tables = _probe(engine, name)
    except NoSpace:
        engine.dispose()
        _remove_leftovers(path, new=state == "absent")
        if require_write or state != "present":
            raise
        return _open_read_only(url, path, notify=notify, reason=faults.FULL_DISK, user=who)
    except BaseException:
        engine.dispose()
        _remove_leftovers(path, new=state == "absent")
        raise
    try:
        return _finish_open(url, (current, tables), notify=notify, create=create, readonly=None, engine=engine,
                            user=who)
    except BaseException:
        engine.dispose()
        _remove_leftovers(path, new=state == "absent")
        raise


def _writable(path: Path) -> bool:
    folder = path.parent
    if path.exists() and not os.access(path, os.W_OK):
        return False
    return os.access(folder, os.W_OK | os.X_OK)


def _probe(engine, name: str) -> tuple[str | None, bool]:
    """(schema revision or None, whether the database has any table), read with plain SQL."""
    from sqlalchemy import inspect

    with faults.translating(name):
        with engine.connect() as conn:
            current = _current_revision(conn)
            tables = bool(inspect(conn).get_table_names()) if current is None else True
            if current is None and tables:
                # another client's first migration may have committed between the two reads (each
                # statement sees the latest commit on a server): read the revision again before
                # calling the database foreign
                current = _current_revision(conn)
            conn.rollback()
    return current, tables


def _probe_server(url: str):
    engine = _make_engine(url)
    try:
        return (*_probe(engine, display_name(url)), engine)
    except BaseException:
        engine.dispose()
        raise


def _finish_open(url: str, probed, *, notify, create: bool, readonly: str | None, engine=None,
                 user: str | None = None) -> Store:
    if engine is None:
        current, tables, engine = probed
    else:
        current, tables = probed
    name = display_name(url)
    if current is None and tables:
        raise faults.not_a_store(name, ("an SQLite database" if sqlite_file(url) is not None else "a database")
                                 + " without cutbook's tables")
    if current is None and not create:
        raise StoreMissing("the database is empty: no store here yet; nothing was created — check the path",
                           path=name)
    if current != HEAD_REVISION:
        if readonly == faults.FULL_DISK:
            raise faults.no_space(name, what=f"its schema (revision {current}) needs an upgrade to {HEAD_REVISION} "
                                             "before this cutbook can read it, and the upgrade has no room; nothing "
                                             "was changed")
        if readonly is not None:
            raise faults.read_only(name, detail=f"{readonly}, and its schema (revision {current}) needs an upgrade "
                                                f"to {HEAD_REVISION} before this cutbook can read it")
        backup = migrate(url)
        if backup is not None and notify:
            notify(f"cutbook: store upgraded to the current schema; previous copy kept at {backup}")
    opened = Store(url, engine, readonly=readonly, user=user)
    if readonly is None:
        from workspace.services.liveness import mark_interrupted

        try:
            gone = mark_interrupted(opened)
        except (NoSpace, StoreReadOnly, StoreBusy):  # housekeeping only: the next open tries again
            gone = []
        if gone and notify:
            notify(f"cutbook: marked {len(gone)} run(s) interrupted (their process is gone): "
                   + ", ".join(map(str, gone)))
    return opened


def _open_read_only(url: str, path: Path, *, notify, reason: str, user: str | None = None) -> Store:
    """Open for reading only.

    A ``-wal`` or ``-shm`` beside the file means a writer may be connected (or left work in the log):
    ``?mode=ro`` then takes SQLite's locks and reads the log. Without them no writer is connected
    (a WAL-mode writer always has both), and ``?immutable=1`` reads the main file alone with no
    ``-shm`` at all — the only way on a read-only medium (SQLite "URI filenames": mode, immutable).
    If ``mode=ro`` cannot use the ``-shm`` here, the main file is read alone, with a note when the
    log holds work that is then not shown.
    """
    name = os.fspath(path)
    wal, shm = Path(f"{path}-wal"), Path(f"{path}-shm")
    attempts = ["ro", "immutable"] if wal.exists() or shm.exists() else ["immutable"]
    last: CutbookError | None = None
    for access in attempts:
        engine = _make_engine(url, access=access)
        try:
            probed = _probe(engine, name)
        except StoreError as exc:
            engine.dispose()
            last = exc
            if access == "ro":  # the -shm file cannot be used here: read the main file alone
                continue
            raise
        if access == "immutable" and len(attempts) > 1 and notify and wal.exists() and wal.stat().st_size > 0:
            notify(f"cutbook: {name}: its write-ahead log cannot be read here ({reason}); showing the store as of "
                   "its last checkpoint")
        try:
            return _finish_open(url, probed, notify=notify, create=False, readonly=reason, engine=engine, user=user)
        except BaseException:
            engine.dispose()
            raise
    assert last is not None
    raise last


def _remove_leftovers(path: Path, *, new: bool) -> None:
    """After a failed open: the stub side files, and the store file itself if this open made it empty."""
    _remove_empty_side_files(path)
    if new:
        try:
            if path.stat().st_size == 0:
                path.unlink()
        except OSError:
            pass


def _remove_empty_side_files(path: Path) -> None:
    """Drop the empty ``-wal``/``-shm`` files a failed open leaves.

    A store in use maps its wal-index from ``-shm`` in 32 KiB regions (SQLite
    "Write-Ahead Logging", wal-index format), so a ``-shm`` shorter than one
    region with an empty ``-wal`` is a stub that a full disk cut short; anything
    else is left alone.
    """
    shm, wal = Path(f"{path}-shm"), Path(f"{path}-wal")
    try:
        if wal.exists() and wal.stat().st_size > 0:
            return
        if shm.exists() and shm.stat().st_size >= 32768:
            return
        wal.unlink(missing_ok=True)
        shm.unlink(missing_ok=True)
    except OSError:
        pass
