"""kill -9 of the whole process group while cutbook writes: nothing half-written is ever visible.

Three ways of landing the kill:

* timed, during the import of a 4-million-edge CSV (at 30%, 60% and 90% of the time a whole
  import of it takes on this machine, measured first);
* as soon as the store's write-ahead log grows, i.e. while the import's one write
  transaction is writing pages (it may also land just after the commit: then the
  version must be there complete — all or nothing);
* deterministically inside the final write transaction of an import and of a run: the
  CLI runs in a child interpreter whose ``repo.put_encoded`` (the blob insert) is wrapped to
  leave a marker file and stall after it has written inside the open transaction.

A kill during a run's compute is tests/cli/test_cli_runs.py::test_kill_9_leaves_interrupted_run.
After each kill the store must open, pass ``PRAGMA integrity_check`` / ``foreign_key_check``
and ``cutbook verify --json``, keep every earlier row unchanged, hold no version without
its arrays, no array without an owner, no run ``done`` without a membership, and show the
killed run as ``interrupted``; a new import must then succeed.
"""

from __future__ import annotations

import contextlib
import io
import json
import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from cli_processes import STALL_CHILD
from tests_support import dump_store

REPO = Path(__file__).resolve().parents[2]
KARATE = REPO / "tests" / "data" / "karate.csv"
BIG_EDGES = 4_000_000  # large enough that the faster import still runs for seconds

pytestmark = pytest.mark.slow

VERSION_BLOBS = ("node_offsets_blob", "node_bytes_blob", "edge_u_blob", "edge_v_blob", "weight_blob")
RUN_BLOBS = ("membership_blob", "stability_blob", "eigenvalues_blob")


def _env() -> dict:
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    env.pop("CUTBOOK_DEBUG", None)
    return env


def _cli(store: Path, *argv: str) -> tuple[int, str, str]:
    from workspace.cli import main

    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["--store", str(store), *map(str, argv)])
    return code, out.getvalue(), err.getvalue()


def _start(*cmd: str) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, *cmd], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            env=_env(), start_new_session=True)


def _kill_group(proc: subprocess.Popen) -> bool:
    """SIGKILL the process group; True if the process was still running when killed."""
    alive = proc.poll() is None
    with contextlib.suppress(ProcessLookupError):
        os.killpg(proc.pid, signal.SIGKILL)
    _, err = proc.communicate(timeout=60)
    killed = alive and proc.returncode == -signal.SIGKILL
    if not killed:  # it had finished first: then cleanly, and the store checks below still apply
        assert "Traceback" not in err, err
        assert proc.returncode == 0, err
    return killed


def _copy(src: Path, dst: Path) -> Path:
    a, b = sqlite3.connect(src), sqlite3.connect(dst)
    try:
        a.backup(b)
    finally:
        b.close()
        a.close()
    return dst


@pytest.fixture(scope="module")
def base_store(tmp_path_factory) -> Path:
    """A store with work in it: karate imported, a parameter set, a finished run."""
    store = tmp_path_factory.mktemp("kill") / "base.sqlite"
    assert _cli(store, "import", KARATE, "--project", "club", "--network", "karate", "--weight", "weight")[0] == 0
    assert _cli(store, "params", "save", "club/two", "--method", "njw", "--k", "2")[0] == 0
    code, out, err = _cli(store, "run", "club/karate", "--params", "club/two", "--json")
    assert code == 0, err
    return store


@pytest.fixture(scope="module")
def big_csv(tmp_path_factory) -> Path:
    """4 million random edges over 200,000 ids (about 60 MB)."""
    path = tmp_path_factory.mktemp("big") / "big.csv"
    rng = np.random.default_rng(20260101)
    u = rng.integers(0, 200_000, BIG_EDGES).tolist()
    v = rng.integers(0, 200_000, BIG_EDGES).tolist()
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("".join(f"v{a},v{b}\n" for a, b in zip(u, v)))
    return path


def _rows(store: Path, sql: str) -> list[tuple]:
    con = sqlite3.connect(store)
    try:
        return con.execute(sql).fetchall()
    finally:
        con.close()


def assert_sound(store: Path, before: dict) -> dict:
    """The checks every killed store must pass; returns its dump."""
    from workspace.services.store import open_workspace

    open_workspace(store).dispose()  # opens (and marks vanished runs interrupted)
    assert _rows(store, "PRAGMA integrity_check") == [("ok",)]
    assert _rows(store, "PRAGMA foreign_key_check") == []
    code, out, err = _cli(store, "verify", "--json")
    doc = json.loads(out)
    assert code == 0 and doc["ok"] is True and doc["findings"] == [], doc
    # no version without its arrays
    for col in VERSION_BLOBS:
        assert _rows(store, f"SELECT id FROM network_versions WHERE {col} NOT IN (SELECT hash FROM blobs)") == []
    # no array without an owner (a rolled-back write leaves none behind)
    used = " UNION ".join([f"SELECT {c} FROM network_versions" for c in VERSION_BLOBS]
                          + [f"SELECT {c} FROM runs WHERE {c} IS NOT NULL" for c in RUN_BLOBS])
    assert _rows(store, f"SELECT hash FROM blobs WHERE hash NOT IN ({used})") == []
    # no run done without its membership and measures; nothing left 'running'
    assert _rows(store, "SELECT id FROM runs WHERE status = 'done' AND (membership_blob IS NULL "
                        "OR id NOT IN (SELECT run_id FROM run_communities))") == []
    assert _rows(store, "SELECT id FROM runs WHERE status = 'running'") == []
    after = dump_store(store)
    for table, rows in before.items():
        if table in ("runs",):
            continue  # checked by the callers (a killed run's row changes to interrupted)
        missing = set(rows) - set(after.get(table, []))
        assert not missing, f"{table}: earlier rows changed or vanished: {sorted(missing)[:3]}"
    return after


def _assert_writable(store: Path, tmp_path: Path) -> None:
    f = tmp_path / "after.csv"
    f.write_text("x,y\ny,z\n", encoding="utf-8")
    code, out, err = _cli(store, "import", f, "--project", "club", "--network", "after-kill")
    assert code == 0, err


def _assert_import_all_or_nothing(store: Path, before: dict, listing_before: tuple) -> str:
    after = assert_sound(store, before)
    assert after["runs"] == before["runs"]
    rows = _rows(store, "SELECT v.n_edges FROM network_versions v JOIN networks n ON n.id = v.network_id "
                        "WHERE n.name = 'big'")
    listing = (_cli(store, "projects", "--json")[1], _cli(store, "networks", "--json")[1])
    if not rows:
        assert listing == listing_before, "a killed import left a project or network behind"
        return "nothing"
    assert len(rows) == 1 and rows[0][0] > 0.99 * BIG_EDGES  # the whole version (random pairs repeat rarely)
    return "complete"


def _listing(store: Path) -> tuple:
    return _cli(store, "projects", "--json")[1], _cli(store, "networks", "--json")[1]


@pytest.fixture(scope="module")
def big_import_seconds(base_store, big_csv, tmp_path_factory) -> float:
    """Wall time of one whole import of ``big_csv`` by a child process on this machine, now: the
    kills below are timed as fractions of it (fixed delays stopped landing mid-import once the
    import got faster)."""
    store = _copy(base_store, tmp_path_factory.mktemp("timed") / "s.sqlite")
    t0 = time.monotonic()
    proc = _start("-m", "workspace.cli", "--store", str(store), "import", str(big_csv), "--project", "club",
                  "--network", "big")
    _, err = proc.communicate(timeout=300)
    assert proc.returncode == 0, err
    return time.monotonic() - t0


@pytest.mark.parametrize("fraction", [0.3, 0.6, 0.9])
def test_kill_during_import_of_a_large_file(base_store, big_csv, big_import_seconds, tmp_path, fraction):
    """Kills at 30%, 60% and 90% of a whole import's time; the 30% one must land while the
    import is still going (the store is written in its last part)."""
    delay = fraction * big_import_seconds
    store = _copy(base_store, tmp_path / "s.sqlite")
    before, listing = dump_store(store), _listing(store)
    proc = _start("-m", "workspace.cli", "--store", str(store), "import", str(big_csv), "--project", "club",
                  "--network", "big")
    t0 = time.monotonic()
    while time.monotonic() - t0 < delay and proc.poll() is None:
        time.sleep(0.01)
    killed = _kill_group(proc)
    outcome = _assert_import_all_or_nothing(store, before, listing)
    print(f"kill after {delay:.2f} s of {big_import_seconds:.2f} s: "
          f"{'killed' if killed else 'had finished'}; version: {outcome}")
    if fraction == 0.3:
        assert killed and outcome == "nothing", "the kill at 30% of the import's time came too late"
    if not killed:
        assert outcome == "complete"  # it finished before the kill: then all of it is there
    _assert_writable(store, tmp_path)


def test_kill_when_the_import_starts_writing(base_store, big_csv, tmp_path):
    """Kill as soon as the write-ahead log grows: inside (or just after) the one write transaction."""
    store = _copy(base_store, tmp_path / "s.sqlite")
    before, listing = dump_store(store), _listing(store)
    wal = Path(str(store) + "-wal")
    proc = _start("-m", "workspace.cli", "--store", str(store), "import", str(big_csv), "--project", "club",
                  "--network", "big")
    deadline = time.monotonic() + 120
    start_size = None
    while time.monotonic() < deadline and proc.poll() is None:
        size = wal.stat().st_size if wal.exists() else 0
        if start_size is None and wal.exists():
            start_size = size
        if start_size is not None and size > start_size + 64 * 1024:
            break
        time.sleep(0.002)
    killed = _kill_group(proc)
    outcome = _assert_import_all_or_nothing(store, before, listing)
    print(f"kill on WAL growth: {'killed' if killed else 'had finished'}; version: {outcome}")
    _assert_writable(store, tmp_path)


@pytest.mark.parametrize("call", [1, 3, 5])
def test_kill_inside_the_import_write_transaction(base_store, tmp_path, call):
    """The import's transaction has created the project and network rows and written `call`
    of the version's five arrays when the group is killed: none of it may be visible."""
    store = _copy(base_store, tmp_path / "s.sqlite")
    before, listing = dump_store(store), _listing(store)
    f = tmp_path / "fresh.csv"
    f.write_text("".join(f"n{i},n{(i * 7 + 1) % 500}\n" for i in range(500)), encoding="utf-8")
    marker = tmp_path / "stalled"
    proc = _start("-c", STALL_CHILD, str(marker), str(call), "--store", str(store), "import", str(f),
                  "--project", "fresh", "--network", "big")
    deadline = time.monotonic() + 60
    while not marker.exists():
        assert proc.poll() is None, proc.communicate()
        assert time.monotonic() < deadline, "the import never reached its write"
        time.sleep(0.01)
    assert _kill_group(proc)
    assert _assert_import_all_or_nothing(store, before, listing) == "nothing"
    assert _rows(store, "SELECT name FROM projects WHERE name = 'fresh'") == []
    _assert_writable(store, tmp_path)


@pytest.mark.parametrize("call", [1, 2])
def test_kill_inside_the_final_write_of_a_run(base_store, tmp_path, call):
    """The run's outcome transaction has set status 'done' and written its membership
    (call 1) or its eigenvalues too (call 2) when killed: the run must read 'interrupted',
    with no membership, no community rows and no orphan array."""
    store = _copy(base_store, tmp_path / "s.sqlite")
    before = dump_store(store)
    marker = tmp_path / "stalled"
    proc = _start("-c", STALL_CHILD, str(marker), str(call), "--store", str(store), "run", "club/karate",
                  "--method", "njw", "--k", "3", "--seed", "5", "--json")
    deadline = time.monotonic() + 60
    while not marker.exists():
        assert proc.poll() is None, proc.communicate()
        assert time.monotonic() < deadline, "the run never reached its final write"
        time.sleep(0.01)
    assert _kill_group(proc)
    after = assert_sound(store, before)
    assert set(before["runs"]) <= set(after["runs"])  # the earlier run is untouched
    new = _rows(store, "SELECT status, membership_blob, k, error FROM runs WHERE id NOT IN (SELECT min(id) FROM runs)")
    assert len(new) == 1
    status, membership, k, error = new[0]
    assert status == "interrupted" and membership is None and k is None, new
    assert "stopped before it finished" in error
    code, out, err = _cli(store, "runs", "--status", "interrupted", "--json")
    assert code == 0 and len(json.loads(out)) == 1
    _assert_writable(store, tmp_path)
