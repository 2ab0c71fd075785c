"""Faults of the machine: every command class against a full disk, a read-only store, a file that is
not a store, a truncated store, a missing folder, a busy store and a file it may not read.

Each fault must give one line ``cutbook: error: PATH: …`` with its own exit code (workspace/errors.py;
README "Exit codes and machine faults"), no traceback, no SQL text, and leave the store's bytes as they
were (sha256 of every file in the store's folder before and after: no temporary file left either)
whenever the command could not write.

The faults are made for real, never simulated: a small tmpfs filled to the last byte (Linux tmpfs,
``mount -t tmpfs -o size=…``), a read-only bind mount (``mount -o remount,bind,ro``), the immutable
file attribute (``chattr +i``, ext2/3/4 and xfs) or, for a user who is not root, plain mode bits; a
file-size limit (``setrlimit(RLIMIT_FSIZE)`` with SIGXFSZ ignored, POSIX.1-2017 setrlimit); a process
without CAP_DAC_OVERRIDE / CAP_DAC_READ_SEARCH (Linux capabilities(7), dropped with
``prctl(PR_CAPBSET_DROP)`` before exec) for permission denied even as root. Where the kernel forbids a
mechanism the test says so in its skip reason; the file-size-limit tests need no privilege at all.
"""

from __future__ import annotations

import contextlib
import ctypes
import errno
import hashlib
import io
import json
import os
import resource
import shutil
import signal
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

from tests_support import dump_store

REPO = Path(__file__).resolve().parents[2]
KARATE = REPO / "tests" / "data" / "karate.csv"
FORBIDDEN = ("Traceback", "internal error", "SELECT ", "INSERT ", "UPDATE ", "DELETE FROM", "sqlalche", "[SQL",
             "[parameters", "sqlite3.", "OperationalError", "DatabaseError")

# Exit codes: the contract in workspace/errors.py.
BUSY, MISSING, READ_ONLY, NO_SPACE, DAMAGED, PERMISSION = 4, 10, 11, 12, 13, 14

READS = {
    "projects": ("projects",),
    "networks": ("networks",),
    "versions": ("versions", "club/karate"),
    "show-version": ("show", "club/karate"),
    "show-run": ("show", "1"),
    "changes": ("changes", "club/karate@1", "club/karate@1"),
    "runs": ("runs",),
    "diff": ("diff", "1", "2"),
    "where": ("where", "1", "--network", "club/karate"),
    "export": ("export", "1", "-o", "{out}"),
    "verify": ("verify",),
    "params-list": ("params", "list"),
    "params-show": ("params", "show", "club/two"),
}
WRITES = {
    "import": ("import", "{other}", "--project", "club", "--network", "other", "--weight", "weight"),
    "run": ("run", "club/karate", "--method", "njw", "--k", "3"),
    "rerun": ("rerun", "1"),
    "attach": ("attach", "{members}", "--to", "club/karate", "--label", "survey"),
    "params-save": ("params", "save", "club/three", "--method", "njw", "--k", "3"),
    "delete": ("delete", "club/karate", "--yes"),
}
ALL = {**READS, **WRITES}


def loud_skip(reason: str) -> None:
    """Skip, and say so in pytest's warnings summary too (shown without -rs): a fault test that
    could not run must not pass unnoticed."""
    import warnings

    warnings.warn(reason, stacklevel=2)
    pytest.skip(reason)


class Result:
    def __init__(self, code: int, out: str, err: str) -> None:
        self.code, self.out, self.err = code, out, err


def cutbook(store: Path | str, *argv: str, files: dict | None = None) -> Result:
    """``cutbook --store STORE ARGV…`` in this process (stdout and stderr captured)."""
    from workspace.cli import main

    argv = [a.format(**(files or {})) if isinstance(a, str) else os.fspath(a) for a in argv]
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["--store", os.fspath(store), *argv])
    return Result(code, out.getvalue(), err.getvalue())


def assert_fault(r: Result, code: int, *words: str) -> None:
    """One line on stderr, the fault's exit code, the words that say what happened; nothing internal."""
    assert r.code == code, f"exit {r.code}, expected {code}: {r.err}"
    lines = r.err.strip().splitlines()
    assert len(lines) == 1, r.err
    assert lines[0].startswith("cutbook: error: "), r.err
    for w in words:
        assert w in lines[0], (w, r.err)
    for bad in FORBIDDEN:
        assert bad not in r.err, (bad, r.err)


def snapshot(folder: Path, skip: tuple[str, ...] = ("filler",)) -> dict[str, str]:
    """sha256 of every file in the folder: the store's bytes, and proof no temporary file was left."""
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.iterdir())
            if p.is_file() and p.name not in skip}


# --- the store every test starts from --------------------------------------------------------------

@pytest.fixture(scope="module")
def template(tmp_path_factory) -> dict:
    """A closed store with a network, a parameter set, two computed runs and an attached run."""
    import networkx as nx

    root = tmp_path_factory.mktemp("template")
    store = root / "store.sqlite"
    ok = lambda r: r.code == 0 or pytest.fail(r.err)  # noqa: E731
    from workspace.services.store import open_workspace

    open_workspace(store).dispose()
    ok(cutbook(store, "import", KARATE, "--project", "club", "--network", "karate", "--weight", "weight"))
    ok(cutbook(store, "params", "save", "club/two", "--method", "njw", "--k", "2"))
    ok(cutbook(store, "run", "club/karate", "--params", "club/two"))
    ok(cutbook(store, "run", "club/karate", "--method", "njw", "--k", "4"))
    # Zachary (1977): the club's split, as networkx karate_club_graph's 'club' attribute (nodes 1-based here)
    G = nx.karate_club_graph()
    members = root / "split.csv"
    members.write_text("node,community\n" + "".join(f"{i + 1},{G.nodes[i]['club']}\n" for i in G.nodes))
    ok(cutbook(store, "attach", members, "--to", "club/karate", "--label", "split"))
    other = root / "other.csv"  # a second network (a 6-cycle) for imports
    other.write_text("source,target,weight\n" + "".join(f"c{i},c{(i + 1) % 6},1\n" for i in range(6)))
    assert sorted(p.name for p in root.iterdir()) == ["other.csv", "split.csv", "store.sqlite"]
    answers = {name: cutbook(store, *argv, "--json", files={"out": root / "answer.csv"}).out
               for name, argv in READS.items() if name not in ("export", "verify")}
    return {"store": store, "files": {"other": other, "members": members}, "answers": answers}


def _files(template, tmp_path) -> dict:
    return {**template["files"], "out": tmp_path / "membership.csv"}


def _place(template, folder: Path) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    shutil.copy2(template["store"], folder / "store.sqlite")
    return folder / "store.sqlite"


# --- mounting (root in CI) -------------------------------------------------------------------------------

def _run(*cmd: str) -> subprocess.CompletedProcess:
    return subprocess.run(list(cmd), capture_output=True, text=True)


_MOUNT_OK: list[bool] = []


def mount_allowed(tmp: Path) -> bool:
    if not _MOUNT_OK:
        probe = tmp / "mount-probe"
        probe.mkdir(exist_ok=True)
        ok = shutil.which("mount") is not None and _run("mount", "-t", "tmpfs", "-o", "size=64k", "tmpfs",
                                                         str(probe)).returncode == 0
        if ok:
            _run("umount", str(probe))
        _MOUNT_OK.append(ok)
    return _MOUNT_OK[0]


@contextlib.contextmanager
def tmpfs(folder: Path, size_kb: int):
    folder.mkdir(parents=True, exist_ok=True)
    r = _run("mount", "-t", "tmpfs", "-o", f"size={size_kb}k,mode=0755", "tmpfs", str(folder))
    assert r.returncode == 0, r.stderr
    try:
        yield folder
    finally:
        _run("umount", "-l", str(folder))


@contextlib.contextmanager
def read_only_view(source: Path, folder: Path):
    """``folder`` shows ``source`` through a read-only bind mount."""
    folder.mkdir(parents=True, exist_ok=True)
    assert _run("mount", "--bind", str(source), str(folder)).returncode == 0
    try:
        r = _run("mount", "-o", "remount,bind,ro", str(folder))
        assert r.returncode == 0, r.stderr
        yield folder
    finally:
        _run("umount", "-l", str(folder))


def fill(folder: Path, leave: int = 0) -> None:
    """Write zeros into ``folder/filler`` until the device says ENOSPC (bounded by the tmpfs size),
    then give back ``leave`` bytes."""
    with open(folder / "filler", "wb", buffering=0) as fh:
        for block in (1 << 16, 1 << 12, 1 << 9, 1):
            for _ in range(100_000):
                try:
                    fh.write(b"\0" * block)
                except OSError as exc:
                    assert exc.errno == errno.ENOSPC
                    break
    assert shutil.disk_usage(folder).free < 4096
    if leave:
        size = (folder / "filler").stat().st_size
        os.truncate(folder / "filler", size - leave)


@pytest.fixture
def full_disk(template, tmp_path):
    if not mount_allowed(tmp_path):
        loud_skip("SKIPPED LOUDLY: this kernel/user may not mount a tmpfs (needs root or CAP_SYS_ADMIN); "
                    "the RLIMIT_FSIZE tests below still cover writes that run out of space")
    with tmpfs(tmp_path / "full", 2048) as mnt:
        store = _place(template, mnt)
        fill(mnt)
        yield store


# --- full disk ------------------------------------------------------------------------------------

@pytest.mark.parametrize("name", list(ALL))
def test_full_disk(full_disk, template, tmp_path, name):
    """Reads work on a full disk (the store opens read-only when SQLite cannot even grow its -shm);
    every write is refused with 'no space left' and the store's folder is byte-for-byte as before."""
    before = snapshot(full_disk.parent)
    r = cutbook(full_disk, *ALL[name], files=_files(template, tmp_path))
    if name in READS:
        assert r.code == 0, r.err
        if name in template["answers"]:
            r2 = cutbook(full_disk, *ALL[name], "--json")
            assert json.loads(r2.out) == json.loads(template["answers"][name])
    else:
        assert_fault(r, NO_SPACE, str(full_disk), "no space left", "nothing was written", "free some space")
    assert snapshot(full_disk.parent) == before


def test_export_onto_a_full_disk_leaves_no_partial_file(full_disk, tmp_path):
    before = snapshot(full_disk.parent)
    target = full_disk.parent / "membership.csv"
    r = cutbook(full_disk, "export", "1", "-o", target)
    assert_fault(r, NO_SPACE, str(target), "no space left")
    assert snapshot(full_disk.parent) == before


def test_after_space_is_freed_writes_work_again(full_disk, template, tmp_path):
    files = _files(template, tmp_path)
    for name in WRITES:
        assert cutbook(full_disk, *WRITES[name], files=files).code == NO_SPACE
    (full_disk.parent / "filler").unlink()
    for name in ("import", "run", "attach", "params-save", "delete"):
        r = cutbook(full_disk, *WRITES[name], files=files)
        assert r.code == 0, (name, r.err)
    assert cutbook(full_disk, "verify").code == 0


def test_new_store_on_a_full_disk_leaves_nothing(full_disk, tmp_path):
    before = snapshot(full_disk.parent)
    new = full_disk.parent / "new.sqlite"
    r = cutbook(new, "import", KARATE, "--project", "club", "--network", "karate")
    assert_fault(r, NO_SPACE, str(new), "no space left")
    assert snapshot(full_disk.parent) == before


def test_import_larger_than_the_free_space(template, tmp_path):
    """Some space left, but less than the new version needs: SQLITE_FULL half way through the
    transaction; the message gives the free space and the size needed; nothing is kept."""
    if not mount_allowed(tmp_path):
        loud_skip("SKIPPED LOUDLY: cannot mount a tmpfs here; see the RLIMIT_FSIZE test")
    import numpy as np

    rng = np.random.default_rng(7)
    big = tmp_path / "big.csv"
    u, v = rng.integers(0, 20_000, 60_000), rng.integers(0, 20_000, 60_000)
    big.write_text("a,b,w\n" + "".join(f"n{a},n{b},{w:.6f}\n" for a, b, w in zip(u, v, rng.random(60_000))))
    # room for the store, its log's first pages and its shared-memory index, not for the new arrays
    # (several hundred kB compressed)
    room_kb = template["store"].stat().st_size // 1024 + 384
    with tmpfs(tmp_path / "small", room_kb) as mnt:
        store = _place(template, mnt)
        before = snapshot(mnt)
        r = cutbook(store, "import", big, "--project", "club", "--network", "big", "--weight", "w")
        assert_fault(r, NO_SPACE, str(store), "no space left", "free", "the write needed about")
        assert snapshot(mnt) == before


# --- a file-size limit (no privilege needed) ---------------------------------------------------------------

def _limited(limit: int):
    def apply() -> None:
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)  # write() then fails with EFBIG instead of killing us
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))
    return apply


def _cli_process(store: Path, *argv, preexec=None, env=None) -> Result:
    env = {**os.environ, "PYTHONPATH": str(REPO), **(env or {})}
    p = subprocess.run([sys.executable, "-m", "workspace.cli", "--store", str(store), *map(str, argv)],
                       capture_output=True, text=True, timeout=120, env=env, preexec_fn=preexec)
    return Result(p.returncode, p.stdout, p.stderr)


@pytest.mark.slow
def test_file_size_limit_refuses_the_write_and_changes_nothing(template, tmp_path):
    store = _place(template, tmp_path / "limited")
    before = snapshot(store.parent)
    files = _files(template, tmp_path)
    # the write-ahead log starts empty and may not grow past 1 kB: every write transaction fails
    for name in ("import", "params-save"):
        r = _cli_process(store, *[a.format(**files) for a in WRITES[name]], preexec=_limited(1024))
        assert_fault(r, NO_SPACE, str(store), "file-size limit", "nothing was written")
        assert snapshot(store.parent) == before
    r = _cli_process(store, "runs", preexec=_limited(1024))
    assert r.code == 0 and "survey" not in r.out and "split" in r.out, r.err
    r = _cli_process(store, *[a.format(**files) for a in WRITES["import"]])
    assert r.code == 0, r.err


# --- read-only store ------------------------------------------------------------------------------

def _chattr(path: Path, flag: str) -> bool:
    return shutil.which("chattr") is not None and _run("chattr", flag, str(path)).returncode == 0


@pytest.fixture(params=["read-only medium", "read-only file"])
def read_only_store(request, template, tmp_path):
    source = _place(template, tmp_path / "src")
    if request.param == "read-only medium":
        if not mount_allowed(tmp_path):
            loud_skip("SKIPPED LOUDLY: cannot bind-mount read-only here (needs root or CAP_SYS_ADMIN); "
                        "the read-only file case still runs")
        with read_only_view(source.parent, tmp_path / "ro") as view:
            yield view / "store.sqlite", "read-only medium"
        return
    if os.geteuid() != 0:
        source.chmod(0o444)
        yield source, "read-only"
        source.chmod(0o644)
        return
    if not _chattr(source, "+i"):
        loud_skip("SKIPPED LOUDLY: running as root and this filesystem has no immutable attribute (chattr +i); "
                    "root ignores mode bits, so no read-only file can be made here")
    try:
        yield source, "read-only"
    finally:
        _chattr(source, "-i")


@pytest.mark.parametrize("name", list(ALL))
def test_read_only_store(read_only_store, template, tmp_path, name):
    store, why = read_only_store
    before = snapshot(store.parent)
    r = cutbook(store, *ALL[name], files=_files(template, tmp_path))
    if name in READS:
        assert r.code == 0, r.err
        if name in template["answers"]:
            assert json.loads(cutbook(store, *ALL[name], "--json").out) == json.loads(template["answers"][name])
    else:
        assert_fault(r, READ_ONLY, str(store), "read-only", why, "nothing was written", "reading commands still work")
    assert snapshot(store.parent) == before


def test_read_only_medium_with_a_live_write_ahead_log(template, tmp_path):
    """A store copied while another connection kept its -wal (committed work not yet in the main
    file): on a read-only medium that work is still seen (SQLite ``?mode=ro`` reads the log)."""
    if not mount_allowed(tmp_path):
        loud_skip("SKIPPED LOUDLY: cannot bind-mount read-only here")
    live = _place(template, tmp_path / "live")
    holder = sqlite3.connect(live)  # a second connection: the importer's close is not the last one
    holder.execute("SELECT 1 FROM projects").fetchall()
    try:
        r = cutbook(live, *WRITES["import"], files=_files(template, tmp_path))
        assert r.code == 0, r.err
        assert Path(f"{live}-wal").stat().st_size > 0
        copy = tmp_path / "copy"
        copy.mkdir()
        for suffix in ("", "-wal", "-shm"):
            shutil.copy2(f"{live}{suffix}", copy / f"store.sqlite{suffix}")
    finally:
        holder.close()
    with read_only_view(copy, tmp_path / "ro") as view:
        r = cutbook(view / "store.sqlite", "networks", "--json")
        assert r.code == 0, r.err
        assert [n["network"] for n in json.loads(r.out)] == ["karate", "other"]


# --- not a store, damaged store --------------------------------------------------------------------

def _notes(tmp_path: Path) -> Path:
    p = tmp_path / "notes" / "notes.txt"
    p.parent.mkdir()
    p.write_text("shopping: bread, lamp oil\n")
    return p


def _foreign_sqlite(tmp_path: Path) -> Path:
    p = tmp_path / "foreign" / "contacts.db"
    p.parent.mkdir()
    con = sqlite3.connect(p)
    con.execute("CREATE TABLE contacts (name TEXT)")
    con.commit()
    con.close()
    return p


def _truncated(template, tmp_path: Path) -> Path:
    p = _place(template, tmp_path / "cut")
    data = p.read_bytes()
    p.write_bytes(data[: len(data) // 3])
    return p


@pytest.mark.parametrize("kind", ["text file", "foreign database", "truncated store", "folder"])
@pytest.mark.parametrize("name", list(ALL))
def test_not_a_store_or_damaged(template, tmp_path, kind, name):
    if kind == "text file":
        store, words = _notes(tmp_path), ("not a cutbook store", "not an SQLite database")
    elif kind == "foreign database":
        store, words = _foreign_sqlite(tmp_path), ("not a cutbook store", "without cutbook's tables")
    elif kind == "truncated store":
        store, words = _truncated(template, tmp_path), ("damaged", "cut short", "backup copy")
    else:
        store, words = tmp_path / "a-folder", ("not a cutbook store", "folder")
        store.mkdir()
        (store / "keep").write_text("x")
    folder = store if store.is_dir() else store.parent
    before = snapshot(folder)
    r = cutbook(store, *ALL[name], files=_files(template, tmp_path))
    assert_fault(r, DAMAGED, str(store), *words)
    assert snapshot(folder) == before


def test_damaged_page_inside_the_store(template, tmp_path):
    """The header is intact but a page in the middle is overwritten: reading it is refused as a
    damaged store (SQLITE_CORRUPT), and verify names it too."""
    store = _place(template, tmp_path / "bad")
    data = bytearray(store.read_bytes())
    page = int.from_bytes(data[16:18], "big")
    for p in range(1, len(data) // page):  # every page but the first: scramble its b-tree header
        data[p * page: p * page + 12] = b"\x0d\xff\xff\xff\xff\xff\xff\xff\xff\xff\xff\xff"
    store.write_bytes(bytes(data))
    before = snapshot(store.parent)
    for argv in (("runs",), ("verify",), ("run", "club/karate", "--method", "njw", "--k", "2")):
        r = cutbook(store, *argv)
        assert_fault(r, DAMAGED, str(store), "damaged", "cutbook verify")
    assert snapshot(store.parent) == before


# --- missing store, missing folder -------------------------------------------------------------------

@pytest.mark.parametrize("name", list(ALL))
def test_missing_folder(template, tmp_path, name):
    store = tmp_path / "no" / "such" / "folder" / "store.sqlite"
    r = cutbook(store, *ALL[name], files=_files(template, tmp_path))
    assert_fault(r, MISSING, str(store), "does not exist", "nothing was created")
    assert not (tmp_path / "no").exists()


@pytest.mark.parametrize("name", list(READS))
def test_read_commands_never_create_a_store(template, tmp_path, name):
    store = tmp_path / "typo.sqlite"
    r = cutbook(store, *READS[name], files=_files(template, tmp_path))
    assert_fault(r, MISSING, str(store), "no store here", "nothing was created")
    assert sorted(p.name for p in tmp_path.iterdir()) == []


def test_a_write_command_creates_the_store(template, tmp_path):
    store = tmp_path / "new.sqlite"
    r = cutbook(store, "import", KARATE, "--project", "club", "--network", "karate")
    assert r.code == 0, r.err
    assert cutbook(store, "projects").code == 0


# --- busy, permission ---------------------------------------------------------------------------------

@pytest.mark.parametrize("name", list(WRITES))
def test_store_busy_beyond_the_wait(template, tmp_path, monkeypatch, name):
    """Another process holds the write lock (BEGIN IMMEDIATE) longer than $CUTBOOK_BUSY_TIMEOUT."""
    store = _place(template, tmp_path / "busy")
    before = dump_store(store)
    monkeypatch.setenv("CUTBOOK_BUSY_TIMEOUT", "0.3")
    holder = sqlite3.connect(store, isolation_level=None)
    holder.execute("BEGIN IMMEDIATE")
    try:
        r = cutbook(store, *WRITES[name], files=_files(template, tmp_path))
        assert_fault(r, BUSY, str(store), "busy", "another process", "0.3 s", "nothing was written")
        assert cutbook(store, "runs").code == 0  # readers are not blocked by a writer
    finally:
        holder.execute("ROLLBACK")
        holder.close()
    assert dump_store(store) == before


def _without_dac_override():
    """Before exec: drop CAP_DAC_OVERRIDE (1) and CAP_DAC_READ_SEARCH (2) from the bounding set
    (prctl PR_CAPBSET_DROP = 24, capabilities(7)), so even root obeys mode bits."""
    libc = ctypes.CDLL(None, use_errno=True)
    for cap in (1, 2):
        if libc.prctl(24, cap, 0, 0, 0) != 0:
            raise OSError(ctypes.get_errno(), "prctl(PR_CAPBSET_DROP)")


def _can_drop_caps() -> bool:
    if os.geteuid() != 0:
        return True  # mode bits already apply
    try:
        p = subprocess.run([sys.executable, "-c", "open('/proc/self/status').read()"],
                           preexec_fn=_without_dac_override, capture_output=True)
    except (OSError, subprocess.SubprocessError):
        return False
    return p.returncode == 0


@pytest.mark.parametrize("name", ["projects", "show-run", "import"])
def test_permission_denied(template, tmp_path, name):
    if not _can_drop_caps():
        loud_skip("SKIPPED LOUDLY: running as root without CAP_SETPCAP; cannot make root obey mode bits")
    store = _place(template, tmp_path / "locked")
    before = snapshot(store.parent)
    store.chmod(0o000)
    try:
        files = _files(template, tmp_path)
        r = _cli_process(store, *[a.format(**files) for a in ALL[name]],
                         preexec=_without_dac_override if os.geteuid() == 0 else None)
        assert_fault(r, PERMISSION, str(store), "permission denied")
    finally:
        store.chmod(0o644)
    assert snapshot(store.parent) == before


# --- migration backup on a full disk ----------------------------------------------------------------

def test_migration_backup_on_a_full_disk(tmp_path):
    """A store at the first schema revision with data needs an upgrade (and a backup copy first);
    on a full disk the copy fails: the store is untouched and the partial copy is gone."""
    if not mount_allowed(tmp_path):
        loud_skip("SKIPPED LOUDLY: cannot mount a tmpfs here")
    from workspace.store.db import HEAD_REVISION, migrate, resolve_store_url

    with tmpfs(tmp_path / "mig", 4096) as mnt:  # the store, its backup and the upgrade's log
        store = mnt / "old.sqlite"
        migrate(resolve_store_url(store), target="0001")
        con = sqlite3.connect(store)
        con.execute("INSERT INTO projects (name, created_at) VALUES ('club', '2026-01-01 00:00:00')")
        con.commit()
        con.close()
        assert HEAD_REVISION != "0001"
        fill(mnt)  # no room at all: not even for reading the old schema
        before = snapshot(mnt)
        r = cutbook(store, "projects")
        assert_fault(r, NO_SPACE, str(store), "no space left", "needs an upgrade", "nothing was changed")
        assert snapshot(mnt) == before
        (mnt / "filler").unlink()
        fill(mnt, leave=48 * 1024)  # room to open the store (its 32 kB -shm), none for the copy
        assert store.stat().st_size > 48 * 1024
        before = snapshot(mnt)
        r = cutbook(store, "projects")
        assert_fault(r, NO_SPACE, "backup", "no space left", "the store was not changed",
                     "the partial copy was removed")
        assert snapshot(mnt) == before
        (mnt / "filler").unlink()
        r = cutbook(store, "projects", "--json")
        assert r.code == 0 and [p["project"] for p in json.loads(r.out)] == ["club"], r.err
        assert len(list(mnt.glob("old.sqlite.backup-0001-*"))) == 1


# --- developers, scripts, the demo hint -------------------------------------------------------------------

def test_cutbook_debug_keeps_the_traceback(tmp_path, monkeypatch, capsys):
    notes = _notes(tmp_path)
    monkeypatch.setenv("CUTBOOK_DEBUG", "1")
    r = cutbook(notes, "runs")
    assert r.code == DAMAGED
    assert "Traceback" in r.err and r.err.strip().splitlines()[-1].startswith("cutbook: error: ")


def test_exit_codes_are_distinct_and_documented():
    from workspace import errors

    codes = {cls.__name__: cls.exit_code for cls in (errors.StoreBusy, errors.StoreMissing, errors.StoreReadOnly,
                                                       errors.NoSpace, errors.StoreDamaged, errors.PermissionDenied)}
    assert codes == {"StoreBusy": 4, "StoreMissing": 10, "StoreReadOnly": 11, "NoSpace": 12, "StoreDamaged": 13,
                     "PermissionDenied": 14}
    readme = (REPO / "README.md").read_text(encoding="utf-8")
    for code in (4, 10, 11, 12, 13, 14):
        assert f"| `{code}` |" in readme, code
    for name, code in codes.items():
        assert f"{code} " in errors.__doc__


def test_server_read_only_role_has_the_read_only_code():
    """PostgreSQL SQLSTATE 25006 read_only_sql_transaction and 42501 insufficient_privilege on a
    write (PostgreSQL docs, Appendix A) map to the read-only code, as a read-only medium does."""
    from workspace.store.faults import translate

    class PgError(Exception):  # stands in for a psycopg error: it carries .pgcode / .sqlstate
        def __init__(self, code, attr):
            super().__init__("ERROR:  cannot execute INSERT in a read-only transaction")
            setattr(self, attr, code)

    class Wrapped(Exception):  # SQLAlchemy's DBAPIError keeps the driver's error as .orig
        def __init__(self, orig):
            super().__init__("(psycopg.errors.ReadOnlySqlTransaction) INSERT INTO runs …")
            self.orig = orig

    for attr in ("pgcode", "sqlstate"):
        err = translate(Wrapped(PgError("25006", attr)), path=None, writing=True)
        assert err is not None and err.exit_code == READ_ONLY and "INSERT" not in str(err)
        assert translate(Wrapped(PgError("42501", attr)), writing=True).exit_code == READ_ONLY
        assert translate(Wrapped(PgError("53100", attr)), writing=True).exit_code == NO_SPACE
        assert translate(Wrapped(PgError("55P03", attr)), writing=True).exit_code == BUSY


def test_default_store_missing_or_empty_points_at_the_demo_store(tmp_path, monkeypatch):
    """After `cutbook demo` (its own store), a command on the empty or absent default store says
    how to reach the demo store."""
    from workspace.cli import main
    from workspace.services.store import open_workspace
    from workspace.store.db import default_demo_path, default_store_path

    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "data"))
    monkeypatch.delenv("CUTBOOK_STORE", raising=False)
    demo = default_demo_path()
    assert str(demo).startswith(str(tmp_path))
    open_workspace(demo).dispose()

    def run(*argv):
        out, err = io.StringIO(), io.StringIO()
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            code = main(list(argv))
        return Result(code, out.getvalue(), err.getvalue())

    r = run("runs")
    assert_fault(r, MISSING, "no store yet", f"--store {demo}", f"CUTBOOK_STORE={demo}")
    assert not default_store_path().exists()
    open_workspace(default_store_path()).dispose()
    r = run("runs")
    assert r.code == 0 and f"--store {demo}" in r.err and "no runs" in r.out
    r = run("--store", str(demo), "runs")
    assert r.code == 0 and "--store" not in r.err


def test_the_terminal_workspace_on_a_read_only_store(template, tmp_path):
    """The UI opens a read-only store for browsing; starting a run is refused with the read-only line."""
    if not mount_allowed(tmp_path):
        loud_skip("SKIPPED LOUDLY: cannot bind-mount read-only here")
    import asyncio

    from workspace.services.store import open_workspace
    from workspace.tui.app import CutbookApp

    source = _place(template, tmp_path / "src")
    with read_only_view(source.parent, tmp_path / "ro") as view:
        store = open_workspace(view / "store.sqlite", create=False)
        try:
            assert store.readonly == "it is on a read-only medium"

            async def drive():
                app = CutbookApp(store)
                async with app.run_test(size=(120, 36)) as pilot:
                    await pilot.pause()
                    assert "read-only" in app.sub_title
                    app.start_job(object())
                    await pilot.pause()
                    assert app.job is None
                    return list(app.shown)

            shown = asyncio.run(drive())
        finally:
            store.dispose()
    assert any(sev == "error" and "read-only" in msg for sev, msg in shown), shown


@pytest.mark.parametrize("name", ["runs", "import"])
def test_store_path_under_a_file(template, tmp_path, name):
    notes = _notes(tmp_path)
    store = notes / "store.sqlite"
    before = snapshot(notes.parent)
    r = cutbook(store, *ALL[name], files=_files(template, tmp_path))
    assert_fault(r, MISSING, str(store), f"{notes} is a file, not a folder", "nothing was created")
    assert snapshot(notes.parent) == before


def test_export_where_it_cannot_write(template, tmp_path):
    """Output files get the same faults as the store: a missing folder (10), a read-only medium (11);
    no partial file is left beside the target."""
    store = _place(template, tmp_path / "s")
    r = cutbook(store, "export", "1", "-o", tmp_path / "nowhere" / "m.csv")
    assert_fault(r, MISSING, str(tmp_path / "nowhere" / "m.csv"), "does not exist", "nothing was written")
    assert not (tmp_path / "nowhere").exists()
    if not mount_allowed(tmp_path):
        loud_skip("SKIPPED LOUDLY: cannot bind-mount read-only here; the missing-folder case ran")
    (tmp_path / "shelf").mkdir()
    with read_only_view(tmp_path / "shelf", tmp_path / "ro") as view:
        r = cutbook(store, "export", "1", "-o", view / "m.csv")
        assert_fault(r, READ_ONLY, str(view / "m.csv"), "read-only medium")
    assert list((tmp_path / "shelf").iterdir()) == []


@pytest.mark.slow
def test_run_and_attach_with_too_little_space_record_nothing(tmp_path):
    """Room for a run's 'running' record but not for its result (a 20 000-node membership): the
    attachment (one transaction) leaves the store's bytes as they were; the computed run takes its
    'running' record back, so the store holds exactly the rows it held before; no file is left over."""
    if not mount_allowed(tmp_path):
        loud_skip("SKIPPED LOUDLY: cannot mount a tmpfs here")
    import numpy as np

    n = 20_000
    ring = tmp_path / "ring.csv"
    ring.write_text("a,b\n" + "".join(f"v{i},v{(i + 1) % n}\n" for i in range(n)))
    members = tmp_path / "members.csv"
    labels = np.random.default_rng(3).integers(0, 1000, n)
    members.write_text("node,community\n" + "".join(f"v{i},{c}\n" for i, c in enumerate(labels)))
    source = tmp_path / "src" / "store.sqlite"
    source.parent.mkdir()
    from workspace.services.store import open_workspace

    open_workspace(source).dispose()
    assert cutbook(source, "import", ring, "--project", "p", "--network", "ring").code == 0
    with tmpfs(tmp_path / "tight", 4096) as mnt:
        store = mnt / "store.sqlite"
        shutil.copy2(source, store)
        fill(mnt, leave=160 * 1024)  # the 32 kB -shm plus about 128 kB of log (eight 16 kB pages)
        before, rows = snapshot(mnt), dump_store(store)
        r = cutbook(store, "attach", members, "--to", "p/ring", "--label", "survey")
        assert_fault(r, NO_SPACE, str(store), "no space left", "the write needed about")
        assert snapshot(mnt) == before
        r = cutbook(store, "run", "p/ring", "--method", "label-propagation")
        assert_fault(r, NO_SPACE, str(store), "no space left", "was not recorded")
        assert dump_store(store) == rows
        assert sorted(p.name for p in mnt.iterdir()) == ["filler", "store.sqlite"]
        (mnt / "filler").unlink()
        assert cutbook(store, "run", "p/ring", "--method", "label-propagation").code == 0
        assert cutbook(store, "attach", members, "--to", "p/ring", "--label", "survey").code == 0


@pytest.mark.parametrize("kind", ["text file", "truncated store", "missing folder", "no store here"])
def test_ui_refuses_what_it_cannot_open(template, tmp_path, kind):
    """`cutbook ui` fails at opening, before the terminal UI starts, with the same line and code."""
    store, code = {"text file": (lambda: _notes(tmp_path), DAMAGED),
                   "truncated store": (lambda: _truncated(template, tmp_path), DAMAGED),
                   "missing folder": (lambda: tmp_path / "gone" / "store.sqlite", MISSING),
                   "no store here": (lambda: tmp_path / "typo.sqlite", MISSING)}[kind]
    store = store()
    folder = store.parent if store.parent.is_dir() else tmp_path
    before = snapshot(folder)
    assert_fault(cutbook(store, "ui"), code, str(store))
    assert snapshot(folder) == before


@pytest.mark.parametrize("fault", ["read-only medium", "full disk", "text file", "missing folder"])
def test_demo_build_meets_the_faults(tmp_path, fault):
    """`cutbook demo --no-ui --store PATH` writes a whole workspace; each fault stops it cleanly."""
    from workspace.services.store import open_workspace

    if fault in ("read-only medium", "full disk") and not mount_allowed(tmp_path):
        loud_skip("SKIPPED LOUDLY: cannot mount here (needs root or CAP_SYS_ADMIN)")
    if fault == "text file":
        store = _notes(tmp_path)
        before = snapshot(store.parent)
        assert_fault(cutbook(store, "demo", "--no-ui"), DAMAGED, str(store), "not a cutbook store")
        assert snapshot(store.parent) == before
    elif fault == "missing folder":
        store = tmp_path / "gone" / "demo.sqlite"
        assert_fault(cutbook(store, "demo", "--no-ui"), MISSING, str(store), "does not exist")
        assert not (tmp_path / "gone").exists()
    elif fault == "read-only medium":
        (tmp_path / "src").mkdir()
        open_workspace(tmp_path / "src" / "demo.sqlite").dispose()  # an empty store
        with read_only_view(tmp_path / "src", tmp_path / "ro") as view:
            before = snapshot(view)
            r = cutbook(view / "demo.sqlite", "demo", "--no-ui")
            assert_fault(r, READ_ONLY, str(view / "demo.sqlite"), "read-only medium")
            assert snapshot(view) == before
    else:
        with tmpfs(tmp_path / "full", 4096) as mnt:  # an empty store is about 1 MB
            open_workspace(mnt / "demo.sqlite").dispose()
            fill(mnt)
            before = snapshot(mnt)
            r = cutbook(mnt / "demo.sqlite", "demo", "--no-ui")
            assert_fault(r, NO_SPACE, str(mnt / "demo.sqlite"), "no space left")
            assert snapshot(mnt) == before


def test_sqlite_result_codes_map_to_their_class(tmp_path):
    """Errors raised by SQLite itself (sqlite.org/rescode.html names them) map to one class each,
    with the path and without SQLite's own wording."""
    from workspace.store.faults import translate

    def fault(fn, path):
        try:
            fn()
        except sqlite3.Error as exc:
            return translate(exc, path=path, writing=True)
        raise AssertionError("SQLite raised nothing")

    notes = _notes(tmp_path)
    err = fault(lambda: sqlite3.connect(notes).execute("SELECT 1 FROM sqlite_master").fetchall(), notes)
    assert err.exit_code == DAMAGED and "not a cutbook store" in str(err)          # SQLITE_NOTADB

    missing_dir = tmp_path / "gone" / "x.db"
    err = fault(lambda: sqlite3.connect(missing_dir).execute("SELECT 1").fetchall(), missing_dir)
    assert err.exit_code == MISSING and "does not exist" in str(err)               # SQLITE_CANTOPEN

    db = tmp_path / "t.db"
    con = sqlite3.connect(db)
    con.execute("CREATE TABLE t (x)")
    con.commit()
    con.close()
    ro = sqlite3.connect(f"file:{db}?mode=ro", uri=True)
    err = fault(lambda: ro.execute("INSERT INTO t VALUES (1)"), db)
    ro.close()
    assert err.exit_code == READ_ONLY and "read-only" in str(err)                   # SQLITE_READONLY

    a = sqlite3.connect(db, isolation_level=None)
    a.execute("BEGIN IMMEDIATE")
    b = sqlite3.connect(db, timeout=0.05, isolation_level=None)
    err = fault(lambda: b.execute("BEGIN IMMEDIATE"), db)
    a.execute("ROLLBACK")
    a.close()
    b.close()
    assert err.exit_code == BUSY and "busy" in str(err)                             # SQLITE_BUSY
    for e in (err,):
        assert "database is locked" not in str(e) and "INSERT" not in str(e)


@pytest.mark.slow
def test_read_only_file_while_its_owner_is_connected(template, tmp_path):
    """A store file we may read but not write, while another connection keeps committed work in its
    -wal: reading goes through SQLite's locks and the log (``mode=ro``), so that work is seen; a write
    is refused as read-only. (As root the reader runs without CAP_DAC_OVERRIDE, so mode bits apply.)"""
    if not _can_drop_caps():
        loud_skip("SKIPPED LOUDLY: running as root without CAP_SETPCAP; cannot make root obey mode bits")
    store = _place(template, tmp_path / "shared")
    holder = sqlite3.connect(store)
    holder.execute("SELECT 1 FROM projects").fetchall()
    try:
        assert cutbook(store, *WRITES["import"], files=_files(template, tmp_path)).code == 0
        assert Path(f"{store}-wal").stat().st_size > 0
        store.chmod(0o444)
        drop = _without_dac_override if os.geteuid() == 0 else None
        r = _cli_process(store, "networks", "--json", preexec=drop)
        assert r.code == 0, r.err
        assert [n["network"] for n in json.loads(r.out)] == ["karate", "other"]
        r = _cli_process(store, "params", "save", "club/three", "--method", "njw", preexec=drop)
        assert_fault(r, READ_ONLY, str(store), "the file is read-only")
    finally:
        store.chmod(0o644)
        holder.close()
