"""Engine, connection pragmas, transactions and migrate-on-open.

Writers use :meth:`Store.write` (SQLite: ``BEGIN IMMEDIATE``, so two writers
queue on the busy timeout instead of failing half way); readers use
:meth:`Store.read`. Opening a store upgrades it to the newest schema (after a
backup copy when it already holds data) and refuses a store newer than the
code.
"""

from __future__ import annotations

import os
import shutil
import sqlite3
from contextlib import contextmanager
from datetime import datetime, timezone
from pathlib import Path
from typing import Iterator

from sqlalchemy import create_engine, event, inspect, text
from sqlalchemy.engine import Engine, make_url
from sqlalchemy.exc import OperationalError
from sqlalchemy.orm import Session, sessionmaker

from workspace.errors import ConflictError, StoreError

BUSY_TIMEOUT_MS = 60_000
# The newest migration's revision id. Checking a store against it needs no Alembic import, which
# keeps every command's start-up short; tests/store checks it equals Alembic's own head.
HEAD_REVISION = "0003"
ENV_STORE = "CUTBOOK_STORE"


def default_store_path() -> Path:
    import platformdirs

    return Path(platformdirs.user_data_dir("cutbook", appauthor=False)) / "cutbook.sqlite"


def resolve_store_url(store: str | os.PathLike | None = None) -> str:
    """``--store`` value, else ``$CUTBOOK_STORE``, else the user data directory.

    A value containing ``://`` is a SQLAlchemy URL; anything else is a path to
    an SQLite file.
    """
    value = os.fspath(store) if store is not None else os.environ.get(ENV_STORE) or None
    if value is None:
        value = os.fspath(default_store_path())
    if "://" in value:
        return value
    return "sqlite:///" + os.path.abspath(os.path.expanduser(value))


def migrations_dir() -> Path:
    """The Alembic folder: ``workspace/migrations`` in a wheel, ``./migrations`` in a checkout."""
    package = Path(__file__).resolve().parent.parent
    for candidate in (package / "migrations", package.parent / "migrations"):
        if (candidate / "env.py").is_file():
            return candidate
    raise StoreError(f"schema migrations not found next to {package}; the installation is incomplete")


def _make_engine(url: str, *, foreign_keys: bool = True) -> Engine:
    parsed = make_url(url)
    is_sqlite = parsed.get_backend_name() == "sqlite"
    kwargs = {}
    if is_sqlite:
        db = parsed.database
        if db and db != ":memory:":
            Path(db).parent.mkdir(parents=True, exist_ok=True)
        kwargs["connect_args"] = {"timeout": BUSY_TIMEOUT_MS / 1000}
    engine = create_engine(url, **kwargs)
    if is_sqlite:
        @event.listens_for(engine, "connect")
        def _on_connect(dbapi_conn, _record):  # pragma: no cover - exercised by every test
            dbapi_conn.isolation_level = None  # we emit BEGIN ourselves (see _on_begin)
            cur = dbapi_conn.cursor()
            cur.execute(f"PRAGMA busy_timeout={BUSY_TIMEOUT_MS}")
            cur.execute(f"PRAGMA foreign_keys={'ON' if foreign_keys else 'OFF'}")
            cur.execute("PRAGMA journal_mode=WAL")
            cur.execute("PRAGMA synchronous=NORMAL")
            cur.close()

        @event.listens_for(engine, "begin")
        def _on_begin(conn):
            write = conn.get_execution_options().get("cutbook_write", False)
            conn.exec_driver_sql("BEGIN IMMEDIATE" if write else "BEGIN")
    return engine


def _alembic_config(connection=None):
    from alembic.config import Config

    cfg = Config()
    cfg.set_main_option("script_location", str(migrations_dir()))
    if connection is not None:
        cfg.attributes["connection"] = connection
    return cfg


def head_revision() -> str:
    from alembic.script import ScriptDirectory

    heads = ScriptDirectory.from_config(_alembic_config()).get_heads()
    if len(heads) != 1:
        raise StoreError(f"schema migrations have {len(heads)} heads; expected one")
    return heads[0]


def _current_revision(conn) -> str | None:
    """The store's schema revision (None for a new, empty store), read with plain SQL."""
    if not inspect(conn).has_table("alembic_version"):
        return None
    rows = conn.execute(text("SELECT version_num FROM alembic_version")).all()
    if len(rows) > 1:
        raise StoreError(f"the store records {len(rows)} schema revisions; it is not a cutbook store")
    return rows[0][0] if rows else None


class Store:
    """An open store: an engine plus transaction helpers (``services.store.open_workspace`` makes one)."""

    def __init__(self, url: str, engine: Engine) -> None:
        self.url = url
        self.engine = engine
        self._write_engine = engine.execution_options(cutbook_write=True)
        self._read_sessions = sessionmaker(bind=engine, expire_on_commit=False)
        self._write_sessions = sessionmaker(bind=self._write_engine, expire_on_commit=False)

    @property
    def is_sqlite(self) -> bool:
        return self.engine.dialect.name == "sqlite"

    @property
    def sqlite_path(self) -> Path | None:
        db = self.engine.url.database
        return Path(db) if self.is_sqlite and db and db != ":memory:" else None

    @contextmanager
    def read(self) -> Iterator[Session]:
        with self._read_sessions() as session:
            with session.begin():
                yield session

    @contextmanager
    def write(self) -> Iterator[Session]:
        """One short write transaction; commits on success, rolls back on any error."""
        with self._write_sessions() as session:
            try:
                with session.begin():
                    yield session
            except OperationalError as exc:
                if "locked" in str(exc).lower() or "busy" in str(exc).lower():
                    raise ConflictError(f"the store is locked by another writer ({exc.orig})") from exc
                raise

    def dispose(self) -> None:
        self.engine.dispose()

    def __enter__(self) -> "Store":
        return self

    def __exit__(self, *exc) -> None:
        self.dispose()


def _has_data(conn) -> bool:
    names = set(inspect(conn).get_table_names())
    return "projects" in names and conn.execute(text("SELECT 1 FROM projects LIMIT 1")).first() is not None


def _backup_sqlite(path: Path, revision: str | None) -> Path:
    stamp = datetime.now(timezone.utc).strftime("%Y%m%dT%H%M%SZ")
    target = path.with_name(f"{path.name}.backup-{revision or 'empty'}-{stamp}")
    src = sqlite3.connect(str(path), timeout=BUSY_TIMEOUT_MS / 1000)
    dst = sqlite3.connect(str(target))
    try:
        src.backup(dst)
    finally:
        dst.close()
        src.close()
    return target


def migrate(url: str, *, target: str = "head", backup: bool = True) -> Path | None:
    """Upgrade the store at ``url`` to ``target`` under a write lock.

    Foreign keys are off while migrating (batch table rebuilds would otherwise
    cascade-delete child rows); ``PRAGMA foreign_key_check`` runs before commit
    and any violation aborts the upgrade. Returns the backup path, if one was made.
    """
    from alembic import command
    from alembic.script import ScriptDirectory

    script = ScriptDirectory.from_config(_alembic_config())
    known = {rev.revision for rev in script.walk_revisions()}
    engine = _make_engine(url, foreign_keys=False)
    backup_path = None
    try:
        with engine.execution_options(cutbook_write=True).connect() as conn:
            with conn.begin():
                current = _current_revision(conn)
                if current is not None and current not in known:
                    raise StoreError(
                        f"this store has schema revision {current}, newer than this cutbook knows; "
                        "upgrade cutbook to open it (the store was not touched)")
                wanted = script.get_revision(target).revision if target != "head" else script.get_current_head()
                if current == wanted:
                    return None
                if backup and engine.dialect.name == "sqlite" and _has_data(conn):
                    db = engine.url.database
                    if db and db != ":memory:":
                        backup_path = _backup_sqlite(Path(db), current)
                command.upgrade(_alembic_config(conn), target)
                if engine.dialect.name == "sqlite":
                    bad = conn.exec_driver_sql("PRAGMA foreign_key_check").fetchall()
                    if bad:
                        raise StoreError(f"migration left {len(bad)} broken references; upgrade rolled back")
        return backup_path
    except OperationalError as exc:
        if "locked" in str(exc).lower():
            raise ConflictError(f"the store is locked by another process ({exc.orig})") from exc
        raise
    finally:
        engine.dispose()
