"""A throwaway PostgreSQL server for the test session, started from the Debian binaries.

``initdb`` makes a cluster in a temporary folder, ``pg_ctl`` starts it on a free
port of 127.0.0.1 (no Unix socket outside that folder), and :meth:`PgServer.stop`
stops it and removes the folder. PostgreSQL refuses to run as root ("root"
execution of the PostgreSQL server is not permitted), so when the tests run as
root the server runs as the unprivileged ``postgres`` system account, through
``runuser``, and the folder is handed to that account.

Clients connect over TCP with a password (``scram-sha-256`` in ``pg_hba.conf``),
so the tests also see that a password in a store URL is never printed.

Durability settings (``fsync``, ``synchronous_commit``, ``full_page_writes``) are
off: the server dies with the session, and the tests are about the client's
transactions (a client killed mid-transaction is rolled back by the server
whatever these settings are; PostgreSQL documentation, "Server Configuration:
Write Ahead Log").
"""

from __future__ import annotations

import glob
import os
import pwd
import secrets
import shutil
import socket
import subprocess
import tempfile
import time
from pathlib import Path

SUPERUSER = "cutbook_admin"
WATCH_S = 6 * 3600  # the watchdog gives up after six hours


def find_bindir() -> Path | None:
    """The newest ``/usr/lib/postgresql/<major>/bin`` holding ``initdb`` and ``pg_ctl`` (or ``$CUTBOOK_PG_BINDIR``)."""
    forced = os.environ.get("CUTBOOK_PG_BINDIR")
    candidates = [forced] if forced else sorted(glob.glob("/usr/lib/postgresql/*/bin"),
                                                key=lambda p: int(Path(p).parent.name)
                                                if Path(p).parent.name.isdigit() else 0)
    for cand in reversed(candidates):
        if cand and (Path(cand) / "initdb").is_file() and (Path(cand) / "pg_ctl").is_file():
            return Path(cand)
    return None


def _free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class PgServer:
    """One running cluster. ``url(db)`` gives a SQLAlchemy URL for database ``db`` as the superuser."""

    def __init__(self, bindir: Path) -> None:
        self.bindir = bindir
        self.as_root = os.geteuid() == 0
        self.root = Path(tempfile.mkdtemp(prefix="cutbook-pg-"))
        self.data = self.root / "data"
        self.log = self.root / "server.log"
        self.password = "pw-" + secrets.token_hex(8)
        self.port = 0
        self._counter = 0
        if self.as_root:
            try:
                account = pwd.getpwnam("postgres")
            except KeyError:
                raise RuntimeError("tests run as root and there is no 'postgres' system account to run "
                                   "the PostgreSQL server as (it refuses root)") from None
            os.chown(self.root, account.pw_uid, account.pw_gid)
        os.chmod(self.root, 0o755)

    def _cmd(self, *argv: str, **kw) -> subprocess.CompletedProcess:
        args = list(argv)
        if self.as_root:
            args = ["runuser", "-u", "postgres", "--", *args]
        return subprocess.run(args, capture_output=True, text=True, timeout=120, **kw)

    def start(self) -> "PgServer":
        pwfile = self.root / "pw"
        pwfile.write_text(self.password + "\n")
        if self.as_root:
            shutil.chown(pwfile, "postgres")
        init = self._cmd(str(self.bindir / "initdb"), "-D", str(self.data), "-U", SUPERUSER,
                         f"--pwfile={pwfile}", "--auth-local=scram-sha-256", "--auth-host=scram-sha-256",
                         "-E", "UTF8", "--locale=C.UTF-8" if _has_c_utf8() else "--locale=C", "--no-sync")
        pwfile.unlink()
        if init.returncode != 0:
            raise RuntimeError(f"initdb failed: {init.stderr.strip() or init.stdout.strip()}")
        last = ""
        for _ in range(3):  # the free port can be taken between probing and binding: try another
            self.port = _free_port()
            opts = (f"-c listen_addresses=127.0.0.1 -c port={self.port} -c unix_socket_directories={self.root} "
                    "-c fsync=off -c synchronous_commit=off -c full_page_writes=off -c max_connections=120 "
                    "-c shared_buffers=32MB")
            res = self._cmd(str(self.bindir / "pg_ctl"), "-D", str(self.data), "-l", str(self.log), "-w",
                            "-t", "60", "-o", opts, "start")
            if res.returncode == 0:
                self._start_watchdog()
                return self
            last = res.stderr.strip() or res.stdout.strip()
            try:
                last += "\n" + self.log.read_text()[-2000:]
            except OSError:
                pass
        raise RuntimeError(f"pg_ctl start failed: {last}")

    def _start_watchdog(self) -> None:
        """A shell loop that stops the server and removes its folder once this process is gone
        (a test session killed by a signal runs no fixture teardown). Bounded: at most WATCH_S seconds."""
        stop = ["pg_ctl", "-D", str(self.data), "-m", "immediate", "-w", "stop"]
        stop[0] = str(self.bindir / "pg_ctl")
        stop_cmd = " ".join(f"'{a}'" for a in (["runuser", "-u", "postgres", "--", *stop] if self.as_root else stop))
        script = (f"i=0; while [ $i -lt {WATCH_S} ] && kill -0 {os.getpid()} 2>/dev/null; do i=$((i+1)); sleep 1; "
                  f"done; [ -f '{self.data}/postmaster.pid' ] && {stop_cmd}; rm -rf '{self.root}'")
        self._watchdog = subprocess.Popen(["sh", "-c", script], stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
                                          stderr=subprocess.DEVNULL, start_new_session=True)

    def stop(self) -> None:
        watchdog = getattr(self, "_watchdog", None)
        if watchdog is not None and watchdog.poll() is None:
            watchdog.kill()
            watchdog.wait(timeout=10)
        try:
            if (self.data / "postmaster.pid").exists():
                self._cmd(str(self.bindir / "pg_ctl"), "-D", str(self.data), "-m", "immediate", "-w", "stop")
        finally:
            shutil.rmtree(self.root, ignore_errors=True)

    # --- databases and roles ------------------------------------------------------------

    def url(self, database: str = "postgres", *, user: str = SUPERUSER, password: str | None = None) -> str:
        pw = self.password if password is None and user == SUPERUSER else password
        auth = f"{user}:{pw}" if pw else user
        return f"postgresql+psycopg://{auth}@127.0.0.1:{self.port}/{database}"

    def admin(self, sql: str, *, database: str = "postgres") -> list[tuple]:
        """Run one statement as the superuser (autocommit) and return its rows."""
        import psycopg

        with psycopg.connect(host="127.0.0.1", port=self.port, user=SUPERUSER, password=self.password,
                             dbname=database, autocommit=True) as con:
            cur = con.execute(sql)
            return cur.fetchall() if cur.description else []

    def new_database(self, prefix: str = "t", *, template: str | None = None) -> str:
        """A fresh database (empty, or a copy of ``template``); returns its name."""
        self._counter += 1
        name = f"{prefix}_{os.getpid()}_{self._counter}_{secrets.token_hex(3)}"
        self.admin(f'CREATE DATABASE "{name}"' + (f' TEMPLATE "{template}"' if template else ""))
        return name


def _has_c_utf8() -> bool:
    try:
        out = subprocess.run(["locale", "-a"], capture_output=True, text=True, timeout=10).stdout
    except (OSError, subprocess.SubprocessError):
        return False
    return any(line.strip().lower() in ("c.utf8", "c.utf-8") for line in out.splitlines())


def wait_ready(server: PgServer, timeout: float = 30.0) -> None:
    deadline = time.monotonic() + timeout
    while True:
        try:
            server.admin("SELECT 1")
            return
        except Exception:  # noqa: BLE001 - bounded wait for the server to accept connections
            if time.monotonic() > deadline:
                raise
            time.sleep(0.2)
