"""Reliability on both back ends, one code path: each test runs on an SQLite file and on a fresh
database of the session's PostgreSQL server (``store_url``, tests/conftest.py).

* bad inputs leave the store exactly as it was;
* kill -9 of a writer inside its write transaction leaves no partial version or run (the server
  rolls back a transaction whose client is gone and frees its advisory lock: PostgreSQL
  documentation, "Explicit Locking: Advisory Locks", 2022; SQLite: "Atomic Commit In SQLite");
* 4 processes x 5 runs, 4 concurrent importers of new versions of one network and 2 processes
  saving versions of one parameter set, all at once: every command succeeds, version numbers
  are consecutive with no gap or duplicate;
* `verify` finds a byte flipped inside a stored array (its SHA-256 content hash no longer
  matches: FIPS 180-4, 2015).
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from sqlalchemy import create_engine, text

from cli_processes import STALL_CHILD, run_at_once
from graphs import adjacency_to_csv
from tests_support import dump_any

REPO = Path(__file__).resolve().parents[2]
KARATE = REPO / "tests" / "data" / "karate.csv"
BAD = REPO / "tests" / "data" / "bad"


def _url(store: str) -> str:
    return store if "://" in store else f"sqlite:///{store}"


def _rows(store: str, sql: str, **params) -> list[tuple]:
    engine = create_engine(_url(store))
    try:
        with engine.connect() as con:
            return [tuple(r) for r in con.execute(text(sql), params)]
    finally:
        engine.dispose()


def _env() -> dict:
    env = {**os.environ, "PYTHONPATH": str(REPO), "OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1",
           "MKL_NUM_THREADS": "1"}
    env.pop("CUTBOOK_DEBUG", None)
    return env


def _proc(store: str, *argv: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "workspace.cli", "--store", store, *map(str, argv)],
                          capture_output=True, text=True, timeout=180, env=_env())


# --- bad inputs ---------------------------------------------------------------------------------

BAD_FILES = ["garbage.csv", "empty.csv", "header_only.csv", "truncated.graphml", "invalid.json", "not_square.mtx",
             "asymmetric.graphml", "truncated.mtx", "invalid_utf8.csv", "entity_bomb.graphml"]


def test_bad_inputs_leave_the_store_unchanged(any_cli):
    assert any_cli("import", KARATE, "--project", "club", "--network", "karate", "--weight", "weight").code == 0
    assert any_cli("run", "club/karate", "--method", "njw", "--k", "2").code == 0
    before = dump_any(any_cli.store)
    for name in BAD_FILES:
        r = any_cli("import", BAD / name, "--project", "club", "--network", "karate")
        assert r.code != 0, name
        lines = r.err.strip().splitlines()
        assert len(lines) == 1 and name in lines[0], (name, r.err)
        r = any_cli("import", BAD / name, "--project", "fresh", "--network", "n")
        assert r.code != 0, name
    r = any_cli("run", "club/karate", "--method", "njw", "--k", "0")
    assert r.code == 2
    r = any_cli("params", "save", "club/p", "--method", "njw", "--set", "no_such_parameter=1")
    assert r.code == 2
    assert dump_any(any_cli.store) == before


# --- kill -9 inside the write transaction -------------------------------------------------------


def _stall_and_kill(store: str, marker: Path, call: int, *argv: str) -> None:
    proc = subprocess.Popen([sys.executable, "-c", STALL_CHILD, str(marker), str(call), "--store", store, *argv],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=_env(),
                            start_new_session=True)
    deadline = time.monotonic() + 90
    try:
        while not marker.exists():
            assert proc.poll() is None, proc.communicate()
            assert time.monotonic() < deadline, "the command never reached its write"
            time.sleep(0.01)
    finally:
        os.killpg(proc.pid, signal.SIGKILL)
        proc.communicate(timeout=30)
    assert proc.returncode == -signal.SIGKILL


@pytest.mark.parametrize("call", [1, 4])
def test_kill_9_inside_an_import_leaves_no_partial_version(store_url, tmp_path, call):
    r = _proc(store_url, "import", KARATE, "--project", "club", "--network", "karate", "--weight", "weight")
    assert r.returncode == 0, r.stderr
    before = dump_any(store_url)
    f = tmp_path / "next.csv"
    f.write_text("".join(f"m{i},m{(i * 7 + 1) % 300}\n" for i in range(300)), encoding="utf-8")
    _stall_and_kill(store_url, tmp_path / "stalled", call, "import", str(f), "--project", "club",
                    "--network", "karate")
    # nothing of the killed transaction is visible; the writer lock is free again (the next write does not wait)
    assert dump_any(store_url) == before
    t0 = time.monotonic()
    r = _proc(store_url, "import", f, "--project", "club", "--network", "karate", "--json")
    assert r.returncode == 0, r.stderr
    assert json.loads(r.stdout)["version"] == 2
    assert time.monotonic() - t0 < 60  # bounded: well under the 60 s lock wait
    r = _proc(store_url, "verify", "--json")
    assert r.returncode == 0 and json.loads(r.stdout)["ok"] is True, r.stdout


def test_kill_9_inside_a_runs_final_write_leaves_it_interrupted(store_url, tmp_path):
    r = _proc(store_url, "import", KARATE, "--project", "club", "--network", "karate", "--weight", "weight")
    assert r.returncode == 0, r.stderr
    _stall_and_kill(store_url, tmp_path / "stalled", 1, "run", "club/karate", "--method", "njw", "--k", "3")
    r = _proc(store_url, "runs", "--json")  # opening marks the dead process's run interrupted (same host)
    assert r.returncode == 0, r.stderr
    rows = _rows(store_url, "SELECT status, membership_blob FROM runs")
    assert rows == [("interrupted", None)], rows
    assert _rows(store_url, "SELECT count(*) FROM run_communities") == [(0,)]
    r = _proc(store_url, "verify", "--json")
    assert r.returncode == 0 and json.loads(r.stdout)["ok"] is True, r.stdout


# --- many writers at once -----------------------------------------------------------------------


@pytest.mark.slow
def test_runners_importers_and_param_savers_at_once(store_url, tmp_path):
    from workspace.spectral.generators import planted_partition

    A, _ = planted_partition(240, 3, c_in=12.0, c_out=1.0, seed=3)
    small = adjacency_to_csv(A, tmp_path / "small.csv")
    r = _proc(store_url, "import", small, "--project", "p", "--network", "g", "--weight", "weight")
    assert r.returncode == 0, r.stderr
    r = _proc(store_url, "import", small, "--project", "incoming", "--network", "shared", "--weight", "weight")
    assert r.returncode == 0, r.stderr
    incoming = []
    for i in range(4):
        B, _ = planted_partition(1500, 4, c_in=10.0, c_out=1.0, seed=10 + i)
        incoming.append(adjacency_to_csv(B, tmp_path / f"incoming{i}.csv"))

    base = ["--store", store_url]
    jobs = [[base + ["run", "p/g", "--method", "njw", "--k", "3", "--seed", str(5 * w + r), "--json"]
             for r in range(5)] for w in range(4)]
    jobs += [[base + ["import", str(incoming[i]), "--project", "incoming", "--network", "shared",
                      "--weight", "weight", "--json"]] for i in range(4)]
    jobs += [[base + ["params", "save", "p/shared-set", "--method", "njw", "--k", str(2 + 3 * s + j), "--json"]
              for j in range(3)] for s in range(2)]
    results = run_at_once(jobs, tmp_path, _env())
    for r in results:
        assert r["code"] == 0, (r["argv"], r["err"])
        assert "internal error" not in r["err"], r["err"]
    imports = [(r["t0"], r["t1"]) for r in results if r["argv"][2] == "import"]
    runs = [(r["t0"], r["t1"]) for r in results if r["argv"][2] == "run"]
    assert any(a0 < b1 and b0 < a1 for a0, a1 in imports for b0, b1 in runs), "no run overlapped an import"

    run_ids = sorted(json.loads(r["out"])["run"] for r in results if r["argv"][2] == "run")
    assert len(set(run_ids)) == 20
    rows = _rows(store_url, "SELECT id, status, membership_blob, seed FROM runs ORDER BY id")
    assert [r[0] for r in rows] == run_ids
    assert all(r[1] == "done" and r[2] is not None for r in rows), rows
    assert sorted(r[3] for r in rows) == list(range(20))

    versions = _rows(store_url, "SELECT v.number, v.content_hash FROM network_versions v "
                                "JOIN networks n ON n.id = v.network_id JOIN projects p ON p.id = n.project_id "
                                "WHERE p.name = 'incoming' AND n.name = 'shared' ORDER BY v.number")
    assert [v[0] for v in versions] == [1, 2, 3, 4, 5]  # consecutive: no gap, no duplicate
    imported = {json.loads(r["out"])["content_hash"] for r in results if r["argv"][2] == "import"}
    assert len(imported) == 4 and {v[1] for v in versions[1:]} == imported
    set_versions = _rows(store_url, "SELECT v.number FROM param_set_versions v JOIN param_sets s "
                                    "ON s.id = v.param_set_id WHERE s.name = 'shared-set' ORDER BY v.number")
    assert [v[0] for v in set_versions] == [1, 2, 3, 4, 5, 6]
    r = _proc(store_url, "verify", "--json")
    assert r.returncode == 0 and json.loads(r.stdout)["ok"] is True, r.stdout


# --- verify -------------------------------------------------------------------------------------

def test_verify_detects_a_flipped_byte(any_cli):
    assert any_cli("import", KARATE, "--project", "club", "--network", "karate", "--weight", "weight").code == 0
    r = any_cli("run", "club/karate", "--method", "njw", "--k", "2", "--json")
    assert r.code == 0, r.err
    run_id = r.json["run"]
    assert any_cli("verify", "--json").json["ok"] is True
    (blob,) = _rows(any_cli.store, "SELECT membership_blob FROM runs WHERE id = :i", i=run_id)[0]
    engine = create_engine(_url(any_cli.store))
    try:
        with engine.begin() as con:
            data = bytearray(con.execute(text("SELECT data FROM blobs WHERE hash = :h"), {"h": blob}).scalar_one())
            data[len(data) // 2] ^= 0xFF
            con.execute(text("UPDATE blobs SET data = :d WHERE hash = :h"), {"d": bytes(data), "h": blob})
    finally:
        engine.dispose()
    r = any_cli("verify", "--json")
    assert r.code == 1
    found = [f for f in r.json["findings"] if f.get("blob") == blob]
    assert len(found) == 1 and any(f"run {run_id}" in who for who in found[0]["belongs_to"]), r.json
