"""Machine faults -> one clear line each: the one mapping from database and OS errors to cutbook errors.

The store layer (``Store.read``/``Store.write``, opening, migrating, backups)
wraps its work in :func:`translating`; the CLI's top level calls
:func:`translate` once more for anything that escaped elsewhere (an output
file on a full disk, say). Nothing else in the package catches
``sqlite3``/SQLAlchemy/``OSError`` faults to reword them.

Each message says what happened, to which file, and what to do, and never
carries SQL text or parameters. Classes and exit codes (see
:mod:`workspace.errors`):

=====================================  =====================================  ====
fault                                  SQLite result / errno / SQLSTATE       code
=====================================  =====================================  ====
store busy beyond the wait             SQLITE_BUSY*, SQLITE_LOCKED*           4
no store at that path                  SQLITE_CANTOPEN (folder missing),      10
                                       ENOENT
store read-only                        SQLITE_READONLY*, EROFS; PostgreSQL    11
                                       25006 read_only_sql_transaction and
                                       42501 insufficient_privilege on write
no space left                          SQLITE_FULL, SQLITE_IOERR_WRITE /      12
                                       _SHMSIZE / _FSYNC / _TRUNCATE,
                                       ENOSPC, EDQUOT, EFBIG
not a cutbook store / damaged          SQLITE_NOTADB, SQLITE_CORRUPT*,        13
                                       SQLITE_IOERR_SHORT_READ; a database
                                       without cutbook's tables (at open)
permission denied                      SQLITE_PERM, SQLITE_AUTH, EACCES,      14
                                       EPERM; PostgreSQL 28000/28P01 (login
                                       refused), 42501 on read
another writer got there first         PostgreSQL 23505 unique_violation,     4
                                       40001 serialization_failure (on write)
no such database on the server         PostgreSQL 3D000                       10
server unreachable / connection lost   PostgreSQL class 08, 57P01-57P03,      1
                                       a connection refused before login
=====================================  =====================================  ====

On PostgreSQL one writer at a time holds the store's advisory lock
(:mod:`workspace.store.db`), so 23505/40001 on a cutbook write means a client
outside cutbook changed the same rows; the message says to run the command again.
Passwords never appear in a message: :func:`redact` masks ``user:password@`` and
``password=...`` in anything that quotes a connection string.

Result codes: SQLite "Result and Error Codes" (sqlite.org/rescode.html); SQLSTATE
classes: PostgreSQL documentation, Appendix A "PostgreSQL Error Codes"; errno
names: POSIX.1-2017 <errno.h>.
"""

from __future__ import annotations

import errno
import os
import shutil
from contextlib import contextmanager
from pathlib import Path
from typing import Iterator

from workspace.errors import redact  # noqa: F401 - re-exported: the store layer's messages use it
from workspace.errors import (ConflictError, CutbookError, NoSpace, PermissionDenied, StoreBusy, StoreDamaged, StoreError,
                              StoreMissing, StoreReadOnly)

ENV_BUSY_TIMEOUT = "CUTBOOK_BUSY_TIMEOUT"
DEFAULT_BUSY_TIMEOUT_S = 60.0

FULL_DISK = "its disk is full"  # Store.readonly reason when a full disk forced a read-only open
_WRITE_IOERRS = {"SQLITE_IOERR_WRITE", "SQLITE_IOERR_SHMSIZE", "SQLITE_IOERR_FSYNC", "SQLITE_IOERR_DIR_FSYNC",
                 "SQLITE_IOERR_TRUNCATE", "SQLITE_IOERR_SHMMAP", "SQLITE_IOERR_SHMOPEN"}
_PG_READ_ONLY = {"25006", "42501"}


def busy_timeout_s() -> float:
    """How long a writer waits for another writer: ``$CUTBOOK_BUSY_TIMEOUT`` seconds, default 60."""
    raw = os.environ.get(ENV_BUSY_TIMEOUT)
    try:
        value = float(raw) if raw else DEFAULT_BUSY_TIMEOUT_S
    except ValueError:
        return DEFAULT_BUSY_TIMEOUT_S
    return value if value >= 0 else DEFAULT_BUSY_TIMEOUT_S


def _size(n: float) -> str:
    for unit in ("bytes", "kB", "MB", "GB", "TB"):
        if n < 1000 or unit == "TB":
            return f"{n:.0f} {unit}" if unit == "bytes" else f"{n:.1f} {unit}"
        n /= 1000.0
    return f"{n:.1f} TB"  # pragma: no cover


def _existing_dir(path: str | None) -> Path | None:
    if not path:
        return None
    p = Path(path)
    try:
        for candidate in (p if p.is_dir() else p.parent, *p.parents):
            if candidate.is_dir():
                return candidate
    except OSError:  # a folder on the way that may not be searched
        pass
    return None


def read_only_reason(path: str | os.PathLike) -> str:
    """Why a path cannot be written: read-only medium, read-only file, or read-only folder."""
    p = Path(path)
    folder = _existing_dir(os.fspath(p))
    try:
        if folder is not None and os.statvfs(folder).f_flag & os.ST_RDONLY:
            return "it is on a read-only medium"
    except OSError:
        pass
    if p.exists() and not os.access(p, os.W_OK):
        return "the file is read-only"
    if folder is not None and not os.access(folder, os.W_OK):
        return "its folder is read-only"
    return "the database refuses writes"


def disk_free(path: str | os.PathLike | None) -> int | None:
    """Free bytes on the device holding ``path`` (or its nearest existing folder); None if unknown."""
    folder = _existing_dir(os.fspath(path) if path is not None else None)
    if folder is None:
        return None
    try:
        return shutil.disk_usage(folder).free
    except OSError:
        return None


def no_space(path: str | None, *, needed: int | None = None, free: int | None = None,
             what: str = "nothing was written") -> NoSpace:
    """The 'no space left' error for ``path``, with the free space (``free``: measured before the
    write, else now) and the file-size limit if one applies."""
    if free is None:
        free = disk_free(path)
    limit = None
    try:
        import resource

        soft = resource.getrlimit(resource.RLIMIT_FSIZE)[0]
        limit = None if soft == resource.RLIM_INFINITY else soft
    except (ImportError, OSError, ValueError):
        pass
    need = f"; the write needed about {_size(needed)}" if needed else ""
    if limit is not None and (free is None or free > 1 << 20):
        cause = f"the file-size limit of this process ({_size(limit)}, see `ulimit -f`) was reached{need}"
        todo = "raise the limit and run the command again"
    else:
        cause = "no space left on its device" + (f" ({_size(free)} free{need})" if free is not None else need)
        todo = "free some space and run the command again"
    return NoSpace(f"{cause}; {what} — {todo}", path=path)


def read_only(path: str | None, *, detail: str | None = None) -> StoreReadOnly:
    reason = detail or (read_only_reason(path) if path else "the database refuses writes")
    return StoreReadOnly(f"the store is read-only ({reason}); nothing was written — reading commands still work; "
                         "copy the store to a writable place to change it", path=path)


def damaged(path: str | None, what: str, *, verify: bool = True) -> StoreDamaged:
    """A damaged store: point at the backup copies migrations leave next to it, and at `cutbook verify`
    when the store still opens (``verify=False`` for a file cut short, which does not)."""
    advice = "go back to a backup copy (schema upgrades leave STORE.backup-* next to the store)"
    if path:
        p = Path(path)
        try:
            backups = sorted(p.parent.glob(f"{p.name}.backup-*"), key=lambda b: b.stat().st_mtime)
        except OSError:
            backups = []
        if backups:
            advice = f"go back to its newest backup copy {backups[-1]}"
    if verify:
        advice += ", or run `cutbook verify` to see which records are affected"
    return StoreDamaged(f"the store is damaged ({what}); nothing was written — {advice}", path=path)


def not_a_store(path: str | None, what: str = "the file is not an SQLite database") -> StoreDamaged:
    return StoreDamaged(f"not a cutbook store ({what}) — check --store or $CUTBOOK_STORE", path=path)


def busy(path: str | None) -> StoreBusy:
    wait = busy_timeout_s()
    # SQLite also answers "busy" at once in a few cases (a mode switch, a lock it cannot wait for),
    # so the message states the rule, not a wait that may not have happened
    return StoreBusy(f"the store is busy: another process holds its lock (a writer waits for it up to {wait:g} s); "
                     f"nothing was written — try again when that process has finished (${ENV_BUSY_TIMEOUT} sets "
                     "the wait)", path=path)


def permission_denied(path: str | None, *, writing: bool | None = False) -> PermissionDenied:
    verb = "" if writing is None else " writing it" if writing else " reading it"
    return PermissionDenied(f"permission denied{verb} — check its owner and mode (and its folder's), or run as "
                            "a user who may", path=path)


def missing(path: str | None, *, store: bool = True) -> StoreMissing:
    """No store at ``path`` (``store=False``: a file to write whose folder is missing)."""
    folder = Path(path).parent if path else None
    blocker = next((p for p in ([folder, *folder.parents] if folder else []) if p.exists()), None)
    if blocker is not None and not blocker.is_dir():
        return StoreMissing(f"{blocker} is a file, not a folder; nothing was created — check the path", path=path)
    if not store:
        return StoreMissing(f"the folder {folder} does not exist; nothing was written — check the path (or create "
                            "the folder first)", path=path)
    if folder is not None and not folder.is_dir():
        return StoreMissing(f"the store's folder {folder} does not exist; nothing was created — check the path "
                            "(or create the folder first)", path=path)
    return StoreMissing("no store here; nothing was created — check the path (commands that write, such as "
                        "import, start a new store)", path=path)


def _sqlite_fault(name: str, message: str, path: str | None, writing: bool | None,
                  needed: int | None, free: int | None = None) -> CutbookError | None:
    if name.startswith(("SQLITE_BUSY", "SQLITE_LOCKED")):
        return busy(path)
    if name == "SQLITE_FULL" or name in _WRITE_IOERRS:
        return no_space(path, needed=needed, free=free)
    if name.startswith("SQLITE_READONLY"):
        return read_only(path)
    if name == "SQLITE_NOTADB":
        return not_a_store(path)
    if name.startswith("SQLITE_CORRUPT") or name == "SQLITE_IOERR_SHORT_READ":
        return damaged(path, "the database file is malformed or cut short")
    if name in ("SQLITE_PERM", "SQLITE_AUTH"):
        return permission_denied(path, writing=writing)
    if name.startswith("SQLITE_CANTOPEN"):
        if path:
            folder = Path(path).parent
            if not folder.is_dir():
                return missing(path)
            if not os.access(folder, os.X_OK) or (Path(path).exists() and not os.access(path, os.R_OK)):
                return permission_denied(path)
            if not os.access(folder, os.W_OK) or (Path(path).exists() and not os.access(path, os.W_OK)):
                return read_only(path)
        return StoreError("the store cannot be opened (the database could not open its file or its "
                          "write-ahead log) — check the path, its folder and free space", path=path)
    if name.startswith("SQLITE_IOERR"):
        return StoreError(f"{'writing' if writing else 'reading'} the store failed (a device input/output "
                          "error); check the disk, then run `cutbook verify`", path=path)
    if name == "SQLITE_NOMEM":
        return StoreError("the database ran out of memory", path=path)
    return None


def translate(exc: BaseException, *, path: str | os.PathLike | None = None, writing: bool | None = False,
              os_errors: bool = True, needed: int | None = None, free: int | None = None) -> CutbookError | None:
    """The cutbook error for a database or OS fault, or None when ``exc`` is not one.

    ``path`` names the store (OS errors name their own file when they carry one);
    ``writing`` tells whether the failed work was a write; ``needed`` is the size
    the write was about to add, when known.
    """
    if isinstance(exc, CutbookError):
        return exc
    path = os.fspath(path) if path is not None else None
    if isinstance(exc, OSError) and os_errors:
        where = exc.filename if exc.filename is not None else path
        where = os.fspath(where) if where is not None else None
        code = exc.errno
        if code in (errno.ENOSPC, errno.EDQUOT, errno.EFBIG):
            return no_space(where, needed=needed, free=free)
        if code == errno.EROFS:
            return StoreReadOnly("cannot write here: it is on a read-only medium; nothing was written — choose a "
                                 "writable place", path=where)
        if code in (errno.EACCES, errno.EPERM):
            return permission_denied(where, writing=writing)
        if code in (errno.ENOENT, errno.ENOTDIR) and where is not None and not Path(where).parent.is_dir():
            return missing(where, store=False)
        if where is not None or code in (errno.EIO, errno.ENXIO, errno.ENODEV, errno.ESTALE):
            return StoreError(f"{exc.strerror or exc} — check the path and the device it is on", path=where)
        return None
    import sqlite3

    orig = getattr(exc, "orig", None) or exc
    if isinstance(orig, sqlite3.Error):
        name = getattr(orig, "sqlite_errorname", None) or ""
        msg = str(orig)
        if not name:  # Python < 3.11 has no error names: read SQLite's own message
            low = msg.lower()
            name = ("SQLITE_FULL" if "full" in low else "SQLITE_READONLY" if "readonly" in low else
                    "SQLITE_NOTADB" if "not a database" in low else "SQLITE_CORRUPT" if "malformed" in low else
                    "SQLITE_BUSY" if "locked" in low or "busy" in low else
                    "SQLITE_CANTOPEN" if "unable to open" in low else "SQLITE_IOERR" if "i/o" in low else
                    "SQLITE_ERROR")
        return _sqlite_fault(name, msg, path, writing, needed, free)
    sqlstate = getattr(orig, "pgcode", None) or getattr(orig, "sqlstate", None)
    if sqlstate is None and _is_pg_operational(orig):
        # libpq reports a refused login before the session exists, so without SQLSTATE: read its message
        # (the server's own words, PostgreSQL src/backend/libpq/auth.c and postinit.c)
        low = str(orig).lower()
        if "password authentication failed" in low or "no pg_hba.conf entry" in low or (
                "authentication failed" in low):
            sqlstate = "28P01"
        elif "database" in low and "does not exist" in low:
            sqlstate = "3D000"
    if sqlstate in _PG_READ_ONLY and (writing or sqlstate == "25006"):
        return StoreReadOnly("the store is read-only for this database role (it may not write); nothing was "
                             "written — reading commands still work; ask the database administrator for a role "
                             "with write grants to change it", path=path)
    if sqlstate == "42501":
        return PermissionDenied("permission denied: the database role may not read the store's tables — ask "
                                "the database administrator for a role with SELECT on them", path=path)
    if sqlstate == "53100":  # disk_full
        return no_space(None, needed=needed, free=free)
    if sqlstate in ("55P03", "40P01"):  # lock_not_available, deadlock_detected
        return busy(path)
    if sqlstate in ("23505", "40001") and writing is not False:
        return ConflictError("another writer changed the same records at the same moment; nothing was written — "
                             "run the command again", path=path)
    if sqlstate == "3D000":
        return StoreMissing("no such database on the server; nothing was created — ask the database "
                            "administrator to create it (CREATE DATABASE), then run the command again", path=path)
    if sqlstate in ("28000", "28P01"):
        return PermissionDenied("the database server refused the login (wrong user name or password, or no "
                                "pg_hba.conf entry for this host) — check the URL, $PGPASSWORD, ~/.pgpass or the "
                                "service file", path=path)
    if (sqlstate or "").startswith("08") or sqlstate in ("57P01", "57P02", "57P03"):
        return StoreError("the connection to the database server failed or was lost; nothing more was written "
                          "— check that the server is running and reachable, then run the command again", path=path)
    if sqlstate is None and _is_pg_operational(orig):
        first = redact(str(orig).strip().splitlines()[0] if str(orig).strip() else type(orig).__name__)
        return StoreError(f"cannot use the database server ({first}) — check the host, port and that the server "
                          "is running", path=path)
    return None


def _is_pg_operational(exc: BaseException) -> bool:
    """A psycopg OperationalError without SQLSTATE: the connection failed before the server answered."""
    mod = type(exc).__module__ or ""
    return mod.startswith("psycopg") and type(exc).__name__ == "OperationalError"


@contextmanager
def translating(path: str | os.PathLike | None, *, writing: bool = False, os_errors: bool = False,
                needed: int | None = None, free: int | None = None) -> Iterator[None]:
    """Re-raise database faults (and OS faults if ``os_errors``) inside the block as cutbook errors."""
    try:
        yield
    except CutbookError:
        raise
    except Exception as exc:
        err = translate(exc, path=path, writing=writing, os_errors=os_errors, needed=needed, free=free)
        if err is None:
            raise
        raise err from exc
