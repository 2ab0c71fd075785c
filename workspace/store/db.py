"""Engine, connection pragmas, transactions and migrate-on-open.

Writers use :meth:`Store.write`; readers use :meth:`Store.read`. One writer at a
time on both back ends, so a writer that reads "the latest version" and adds the
next one can never collide with another:

- SQLite: ``BEGIN IMMEDIATE`` takes the database's write lock at the start, so two
  writers queue on the busy timeout instead of failing half way.
- PostgreSQL: every write transaction (and every migration) first takes one
  transaction-level advisory lock, ``pg_advisory_xact_lock(WRITE_LOCK_KEY)``, under
  ``SET LOCAL lock_timeout`` = the busy timeout; the server releases it at commit,
  rollback or when the client dies (PostgreSQL documentation, "Explicit Locking:
  Advisory Locks" and "Advisory Lock Functions"). Writes run at READ COMMITTED, so
  each statement after the lock sees every earlier writer's commit; reads run at
  REPEATABLE READ, one snapshot per read transaction as SQLite gives.
 Opening a store upgrades it to the newest schema (after a
backup copy when it already holds data) and refuses a store newer than the
code.
"""

from __future__ import annotations

import os
import sqlite3
from contextlib import contextmanager
from datetime import datetime, timezone
from pathlib import Path
from typing import TYPE_CHECKING, Iterator

if TYPE_CHECKING:
    from sqlalchemy.engine import Engine
    from sqlalchemy.orm import Session

# SQLAlchemy loads inside the functions that use it, so the path and file helpers here
# (resolve_store_url, inspect_sqlite_file, HEAD_REVISION...) serve the sqlite3 read path of the
# quick listings (workspace.services.quickread) without it.

from workspace.errors import CutbookError, StoreError, UsageError
from workspace.store import faults

BUSY_TIMEOUT_MS = 60_000
# pg_advisory_xact_lock key of a store's write section (any fixed 64-bit value: advisory locks are
# per database, so two stores on one server never share it). int.from_bytes(b"cutbook!", "big") >> 1.
WRITE_LOCK_KEY = int.from_bytes(b"cutbook!", "big") >> 1
# The newest migration's revision id. Checking a store against it needs no Alembic import, which
# keeps every command's start-up short; tests/store checks it equals Alembic's own head.
HEAD_REVISION = "0009"
ENV_STORE = "CUTBOOK_STORE"
ENV_USER = "CUTBOOK_USER"
MAX_USER_LENGTH = 200  # the created_by columns are String(200)


def resolve_user(user: str | None = None) -> str:
    """Who is making records: ``user`` (``--user``), else ``$CUTBOOK_USER``, else the OS account.

    A name only: never a password (a ``name:secret`` value is refused). Raises
    :class:`UsageError` for an empty name, one with control characters or a colon, or one longer
    than 200 characters.
    """
    import getpass

    value = user if user is not None else os.environ.get(ENV_USER) or None
    source = "--user" if user is not None else f"${ENV_USER}"
    if value is None:
        try:
            value = getpass.getuser()
        except Exception:  # noqa: BLE001 - no account name (a container without passwd entry): say so
            value = f"uid-{os.getuid()}" if hasattr(os, "getuid") else "unknown"
        source = "the OS account"
    value = value.strip()
    if not value or len(value) > MAX_USER_LENGTH or ":" in value or any(ord(c) < 32 or ord(c) == 127
                                                                        for c in value):
        raise UsageError(f"{source}: a user name must be 1 to {MAX_USER_LENGTH} printable characters without "
                         "':' (a name, never a password)")
    return value


def default_store_path() -> Path:
    import platformdirs

    return Path(platformdirs.user_data_dir("cutbook", appauthor=False)) / "cutbook.sqlite"


def default_demo_path() -> Path:
    """Where ``cutbook demo`` builds its own store when no store is named."""
    return default_store_path().with_name("demo.sqlite")


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


def sqlite_file(url: str) -> Path | None:
    """The file of an SQLite store URL (None for in-memory or server databases)."""
    from sqlalchemy.engine import make_url

    parsed = make_url(url)
    db = parsed.database
    if parsed.get_backend_name() != "sqlite" or not db or db == ":memory:" or db.startswith("file:"):
        return None
    return Path(db)


def display_name(url: str) -> str:
    """How messages name a store: its file path, or its URL without the password."""
    path = sqlite_file(url)
    if path is not None:
        return os.fspath(path)
    try:
        from sqlalchemy.engine import make_url

        return make_url(url).render_as_string(hide_password=True)
    except Exception:  # noqa: BLE001 - a URL SQLAlchemy cannot parse is named as given, password masked
        return faults.redact(url)


SQLITE_MAGIC = b"SQLite format 3\x00"


def inspect_sqlite_file(path: Path) -> str:
    """``"absent"``, ``"empty"`` (0 bytes) or ``"present"``, from the file's first 100 bytes, without SQLite.

    Raises the matching fault for a folder, an unreadable file, a file that is
    not an SQLite database, or one cut short: its header's page count times its
    page size (SQLite "Database File Format", section 1.3: offsets 16, 28, 24, 92)
    is larger than the file.
    """
    if path.is_dir():
        raise faults.not_a_store(path, "it is a folder")
    try:
        with open(path, "rb") as fh:
            # the size first, then the bytes: a store another process is creating grows between the
            # two, and its first write is the header page, so a file seen with some size already
            # shows its header. (Read first, a 0-byte read and then a 16 KiB size looked like a file
            # that is not SQLite: a new store opened by several processes at once was refused.)
            size = os.fstat(fh.fileno()).st_size
            head = fh.read(100)
    except (FileNotFoundError, NotADirectoryError):
        return "absent"
    except PermissionError:
        raise faults.permission_denied(os.fspath(path)) from None
    except OSError as exc:
        err = faults.translate(exc, path=path)
        if err is None:
            raise
        raise err from None
    if size == 0:
        return "empty"
    if not head.startswith(SQLITE_MAGIC):
        raise faults.not_a_store(os.fspath(path))
    if len(head) < 100:
        raise faults.damaged(os.fspath(path), f"the file is cut short: {size} bytes, less than its header",
                             verify=False)
    page_size = int.from_bytes(head[16:18], "big")
    page_size = 65536 if page_size == 1 else page_size
    pages = int.from_bytes(head[28:32], "big")
    if (pages and head[24:28] == head[92:96] and size < pages * page_size
            and not _writer_may_be_active(path)):
        raise faults.damaged(os.fspath(path), f"the file is cut short: {size} of its {pages * page_size} bytes",
                             verify=False)
    return "present"


def _writer_may_be_active(path: Path) -> bool:
    """A ``-wal`` or ``-journal`` file beside the store: another process may be writing.

    The header's page count and the file size are read without SQLite's locks, so while a
    writer extends the file or a checkpoint copies pages back, the two can disagree for a
    moment. Then the size test proves nothing and SQLite (under its locks) has the last word:
    a store that really is cut short still fails there, as "damaged", through the fault mapping.
    """
    return any(Path(f"{path}{suffix}").exists() for suffix in ("-wal", "-journal"))


def migrations_dir() -> Path:
    """The Alembic folder: ``workspace/migrations`` in a wheel, ``./migrations`` in a checkout."""
    package = Path(__file__).resolve().parent.parent
    for candidate in (package / "migrations", package.parent / "migrations"):
        if (candidate / "env.py").is_file():
            return candidate
    raise StoreError(f"schema migrations not found next to {package}; the installation is incomplete")


def _make_engine(url: str, *, foreign_keys: bool = True, access: str = "rw") -> Engine:
    """An engine on ``url``. SQLite ``access``: ``rw`` (WAL), ``ro`` (``?mode=ro``) or ``immutable``.

    ``ro`` still takes SQLite's locks and reads the write-ahead log, so it needs a
    ``-shm`` file it may use; ``immutable`` (``?immutable=1``) takes no locks and
    reads only the main file: for read-only media, where nobody can be writing.
    Neither mode ever creates the file or its folder.
    """
    from sqlalchemy import create_engine, event
    from sqlalchemy.engine import make_url

    parsed = make_url(url)
    is_sqlite = parsed.get_backend_name() == "sqlite"
    kwargs: dict = {}
    timeout = faults.busy_timeout_s()
    if is_sqlite:
        kwargs["connect_args"] = {"timeout": timeout}
        db = parsed.database
        if access != "rw" and db and db != ":memory:":
            from urllib.parse import quote

            uri = "file:" + quote(os.path.abspath(db)) + ("?mode=ro" if access == "ro" else "?immutable=1")

            def _connect():
                return sqlite3.connect(uri, uri=True, timeout=timeout, check_same_thread=False)

            kwargs = {"creator": _connect}
    if parsed.get_backend_name() == "postgresql":
        kwargs["connect_args"] = {"connect_timeout": max(1, int(min(timeout, 30)))}
        kwargs["pool_pre_ping"] = True
    engine = create_engine(url, **kwargs)
    if parsed.get_backend_name() == "postgresql":
        @event.listens_for(engine, "begin")
        def _on_begin_pg(conn):
            if conn.get_execution_options().get("cutbook_write", False):
                # lock_timeout 0 would mean "wait forever": the shortest wait is 1 ms
                conn.exec_driver_sql(f"SET LOCAL lock_timeout = {max(1, int(timeout * 1000))}")
                conn.exec_driver_sql(f"SELECT pg_advisory_xact_lock({WRITE_LOCK_KEY})")
    if is_sqlite:
        @event.listens_for(engine, "connect")
        def _on_connect(dbapi_conn, _record):  # pragma: no cover - exercised by every test
            dbapi_conn.isolation_level = None  # we emit BEGIN ourselves (see _on_begin)
            cur = dbapi_conn.cursor()
            cur.execute(f"PRAGMA busy_timeout={int(timeout * 1000)}")
            cur.execute(f"PRAGMA foreign_keys={'ON' if foreign_keys else 'OFF'}")
            if access == "rw":
                # WAL is a setting kept in the file: made once, for a new store. An existing file keeps
                # its mode, so opening someone else's database (refused later) does not change it.
                if cur.execute("PRAGMA page_count").fetchone()[0] == 0:
                    _switch_to_wal(cur, timeout)
                cur.execute("PRAGMA synchronous=NORMAL")
            else:
                cur.execute("PRAGMA query_only=ON")
            cur.close()

        @event.listens_for(engine, "begin")
        def _on_begin(conn):
            write = conn.get_execution_options().get("cutbook_write", False)
            conn.exec_driver_sql("BEGIN IMMEDIATE" if write else "BEGIN")
    return engine


#: Page size of a new SQLite store. The arrays are large blobs: a store of 4 KiB pages wrote a
#: 2M-edge import's 23 MB of blobs as ~5,600 pages into the log and again into the file at the
#: checkpoint; 16 KiB pages took that write from 120-165 ms to 80-120 ms (1M nodes: 125-145 ->
#: ~100 ms) while an empty store grows only from 0.26 to 1.0 MB (the demo: 0.54 -> 1.2 MB; 64 KiB
#: pages: 4.0 MB). Existing stores keep the page size they were made with.
SQLITE_PAGE_SIZE = 16384


def _switch_to_wal(cur, timeout: float) -> None:
    """``PRAGMA page_size`` (:data:`SQLITE_PAGE_SIZE`) and ``journal_mode=WAL`` on a new, empty
    SQLite file, retried while another process makes the same switch at the same moment.

    Two processes creating one store at once both see an empty file; SQLite answers the second
    switch with "database is locked" (the mode change does not wait in the busy handler) or,
    while the other connection creates the ``-wal``/``-shm`` files, with "disk I/O error". Each
    attempt re-reads the file: once the other process has made it a WAL file (or written pages),
    there is nothing left to do. Bounded by the busy timeout (at least 20 attempts).
    """
    import time

    deadline = time.monotonic() + max(timeout, 1.0)
    attempt = 0
    while True:
        try:
            if cur.execute("PRAGMA page_count").fetchone()[0] != 0 or \
                    str(cur.execute("PRAGMA journal_mode").fetchone()[0]).lower() == "wal":
                return
            # the page size is fixed when the first page is written (and cannot change in WAL
            # mode): set it first
            cur.execute(f"PRAGMA page_size={SQLITE_PAGE_SIZE}")
            cur.execute("PRAGMA journal_mode=WAL")
            return
        except sqlite3.OperationalError as exc:
            text = str(exc).lower()
            attempt += 1
            if not ("locked" in text or "busy" in text or "disk i/o error" in text) or \
                    (time.monotonic() > deadline and attempt >= 20):
                raise
            time.sleep(min(0.01 * attempt, 0.1))


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
    from sqlalchemy import inspect, text

    if not inspect(conn).has_table("alembic_version"):
        return None
    rows = conn.execute(text("SELECT version_num FROM alembic_version")).all()
    if len(rows) > 1:
        raise StoreError(f"the store records {len(rows)} schema revisions; it is not a cutbook store")
    return rows[0][0] if rows else None


class Store:
    """An open store: an engine plus transaction helpers (``services.store.open_workspace`` makes one).

    Every database fault inside :meth:`read` and :meth:`write` leaves as one of
    the errors of :mod:`workspace.store.faults` (no SQL text). A store opened
    read-only (``readonly`` gives the reason) refuses :meth:`write` before
    touching the database.
    """

    def __init__(self, url: str, engine: Engine, *, readonly: str | None = None, user: str | None = None) -> None:
        self.url = url
        self.user = user
        self.engine = engine
        self.readonly = readonly
        from sqlalchemy import event
        from sqlalchemy.orm import sessionmaker

        self.name = display_name(url)
        self._write_engine = engine.execution_options(cutbook_write=True)
        read_engine = engine
        if engine.dialect.name == "postgresql":
            read_engine = engine.execution_options(isolation_level="REPEATABLE READ")
        self._read_sessions = sessionmaker(bind=read_engine, expire_on_commit=False)
        self._write_sessions = sessionmaker(bind=self._write_engine, expire_on_commit=False)
        if user is not None:
            @event.listens_for(self._write_sessions, "before_flush")
            def _record_user(session, _context, _instances):
                # every record a person creates says who: any new row with a created_by column left empty
                for obj in session.new:
                    if hasattr(obj, "created_by") and obj.created_by is None:
                        obj.created_by = user

    @property
    def is_sqlite(self) -> bool:
        return self.engine.dialect.name == "sqlite"

    @property
    def sqlite_path(self) -> Path | None:
        return sqlite_file(self.url)

    def refusal(self) -> CutbookError:
        """The error a write gets on this read-only store."""
        if self.readonly == faults.FULL_DISK:
            return faults.no_space(self.name)
        return faults.read_only(self.name, detail=self.readonly)

    @contextmanager
    def read(self) -> Iterator[Session]:
        with faults.translating(self.name):
            with self._read_sessions() as session:
                with session.begin():
                    yield session

    @contextmanager
    def write(self, *, needed: int | None = None) -> Iterator[Session]:
        """One short write transaction; commits on success, rolls back on any error.

        ``needed``: about how many bytes the transaction adds (named in a 'no space' message).
        """
        if self.readonly is not None:
            raise self.refusal()
        free = faults.disk_free(self.sqlite_path) if self.is_sqlite else None
        with faults.translating(self.name, writing=True, needed=needed, free=free):
            with self._write_sessions() as session:
                with session.begin():
                    yield session

    def checkpoint(self) -> bool:
        """SQLite: copy the write-ahead log into the main file and truncate it (frees its disk space).
        Best effort: returns False when it could not (busy, no room, read-only, not SQLite)."""
        if not self.is_sqlite or self.readonly is not None:
            return False
        try:
            raw = self.engine.raw_connection()
            try:
                busy, _, _ = raw.driver_connection.execute("PRAGMA wal_checkpoint(TRUNCATE)").fetchone()
            finally:
                raw.close()
            return busy == 0
        except Exception:  # noqa: BLE001 - best effort by contract
            return False

    def dispose(self) -> None:
        self.engine.dispose()

    def __enter__(self) -> "Store":
        return self

    def __exit__(self, *exc) -> None:
        self.dispose()


def _has_data(conn) -> bool:
    from sqlalchemy import inspect, text

    names = set(inspect(conn).get_table_names())
    return "projects" in names and conn.execute(text("SELECT 1 FROM projects LIMIT 1")).first() is not None


def _backup_sqlite(path: Path, revision: str | None) -> Path:
    """Copy the store next to itself (SQLite's online backup); a copy that fails is removed."""
    stamp = datetime.now(timezone.utc).strftime("%Y%m%dT%H%M%SZ")
    target = path.with_name(f"{path.name}.backup-{revision or 'empty'}-{stamp}")
    try:
        src = sqlite3.connect(str(path), timeout=faults.busy_timeout_s())
        try:
            dst = sqlite3.connect(str(target))
            try:
                src.backup(dst)
            finally:
                dst.close()
        finally:
            src.close()
    except BaseException as exc:
        target.unlink(missing_ok=True)
        for suffix in ("-journal", "-wal", "-shm"):
            Path(f"{target}{suffix}").unlink(missing_ok=True)
        if not isinstance(exc, Exception):
            raise
        err = faults.translate(exc, path=target, writing=True)
        if isinstance(err, faults.NoSpace):
            err = faults.no_space(os.fspath(target), needed=path.stat().st_size,
                                  what="copying the store before its schema upgrade failed; the store was not "
                                       "changed and the partial copy was removed")
        if err is None:
            raise
        raise err from exc
    return target


def migrate(url: str, *, target: str = "head", backup: bool = True) -> Path | None:
    """Upgrade the store at ``url`` to ``target`` under a write lock.

    Foreign keys are off while migrating (batch table rebuilds would otherwise
    cascade-delete child rows); ``PRAGMA foreign_key_check`` runs before commit
    and any violation aborts the upgrade. Returns the backup path, if one was made;
    an upgrade that fails (no space, say) rolls back and removes its backup copy.
    """
    from alembic import command
    from alembic.script import ScriptDirectory

    script = ScriptDirectory.from_config(_alembic_config())
    known = {rev.revision for rev in script.walk_revisions()}
    engine = _make_engine(url, foreign_keys=False)
    backup_path = None
    try:
        with faults.translating(display_name(url), writing=True):
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
                        db = sqlite_file(url)
                        if db is not None:
                            backup_path = _backup_sqlite(db, current)
                    command.upgrade(_alembic_config(conn), target)
                    if engine.dialect.name == "sqlite":
                        bad = conn.exec_driver_sql("PRAGMA foreign_key_check").fetchall()
                        if bad:
                            raise StoreError(f"migration left {len(bad)} broken references; upgrade rolled back")
        return backup_path
    except BaseException:
        if backup_path is not None:
            backup_path.unlink(missing_ok=True)
        raise
    finally:
        engine.dispose()
