"""CLI contract for parameter sets and runs (--json keys, exit codes), and the process-level status
paths: Ctrl-C records `cancelled`, kill -9 leaves a run the next open marks `interrupted`."""

from __future__ import annotations

import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import networkx as nx
import pytest

from cli_processes import ctrl_c_as_at_a_terminal
from graphs import adjacency_to_csv

REPO = Path(__file__).resolve().parents[2]


@pytest.fixture
def karate_csv(tmp_path):
    # Zachary (1977) karate club as shipped by networkx
    G = nx.karate_club_graph()
    A = nx.to_scipy_sparse_array(G, nodelist=range(34), weight="weight")
    return adjacency_to_csv(A, tmp_path / "karate.csv", [f"m{i:02d}" for i in range(34)])


def test_params_and_run_json_contract(cli, karate_csv, tmp_path):
    assert cli("import", karate_csv, "--project", "club", "--network", "karate", "--weight", "weight").code == 0
    saved = cli("params", "save", "club/three", "--method", "njw", "--k", "3", "--set", "n_init=5", "--json")
    assert saved.code == 0, saved.err
    assert saved.json["name"] == "three" and saved.json["version"] == 1
    assert cli("params", "save", "club/three", "--method", "njw", "--k", "3", "--set", "n_init=5",
               "--json").json["version"] == 1
    assert cli("params", "list", "club", "--json").json[0]["method"] == "njw"
    assert cli("params", "show", "club/three@1", "--json").json["k"] == "3"
    bad = cli("params", "save", "club/bad", "--method", "njw", "--set", "n_init=-3")
    assert bad.code == 2 and "n_init" in bad.err

    r = cli("run", "club/karate", "--params", "club/three", "--json")
    assert r.code == 0, r.err
    doc = r.json
    for key in ("run", "status", "k", "membership_hash", "quality", "eigenvalues", "warnings"):
        assert key in doc
    assert doc["status"] == "done" and doc["k"] == 3 and isinstance(doc["eigenvalues"], list)
    run_id = doc["run"]

    rr = cli("rerun", run_id, "--json")
    assert rr.code == 0 and rr.json["identical"] is True and rr.json["run"] != run_id

    listing = cli("runs", "club/karate", "--json").json
    assert [x["run"] for x in listing] == [rr.json["run"], run_id]
    for key in ("run", "method", "kind", "status", "version", "k", "created"):
        assert key in listing[0]
    shown = cli("show", run_id, "--json").json
    assert shown["param_set"] == "club/three@1" and shown["communities"]

    out = tmp_path / "m.csv"
    assert cli("export", run_id, "--format", "csv", "-o", out).code == 0
    att = cli("attach", out, "--to", "club/karate", "--label", "exported", "--json")
    assert att.code == 0 and att.json["membership_hash"] == doc["membership_hash"]

    where = cli("where", "m00", "--network", "club/karate", "--json").json
    assert {x["run"] for x in where["runs"]} == {run_id, rr.json["run"], att.json["run"]}

    d = cli("diff", run_id, att.json["run"], "--json").json
    assert d["ari"] == 1.0 and d["moved"] == 0
    assert cli("verify", "--json").json["ok"] is True


def test_run_failures_and_usage(cli, karate_csv):
    cli("import", karate_csv, "--project", "club", "--network", "karate")
    # karate has 34 nodes (networkx.karate_club_graph): k=99 is refused before anything is recorded
    r = cli("run", "club/karate", "--method", "njw", "--k", "99")
    assert r.code == 2 and "n=34" in r.err and cli("runs", "--json").json == []
    assert cli("run", "club/karate", "--method", "louvain", "--k", "3").code == 2  # louvain picks k itself
    # three components and k=2: known only once the graph is analysed, so recorded as a failed run
    three = Path(karate_csv).with_name("three.csv")
    three.write_text("a,b\nb,c\nc,a\nd,e\ne,f\nf,d\ng,h\n", encoding="utf-8")
    assert cli("import", three, "--project", "club", "--network", "three", "--header", "no").code == 0
    r = cli("run", "club/three", "--method", "njw", "--k", "2", "--json")
    assert r.code == 1 and "failed" in r.err and "components" in r.err
    assert r.json["status"] == "failed" and r.json["error"]
    assert cli("run", "club/karate", "--method", "njw", "--set", "bogus=1").code == 2
    assert cli("run", "club/none", "--method", "njw").code == 3
    assert cli("show", "999").code == 3
    assert cli("runs", "--json").json[0]["status"] == "failed"  # the only record: the failed run


def _slow_store(tmp_path) -> Path:
    """A store with a graph on which 60 repeats of njw take many seconds."""
    from workspace.spectral.generators import planted_partition

    A, _ = planted_partition(20000, 4, c_in=24.0, c_out=3.0, seed=1)
    f = adjacency_to_csv(A, tmp_path / "g.csv")
    store = tmp_path / "slow.sqlite"
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    subprocess.run([sys.executable, "-m", "workspace.cli", "--store", str(store), "import", str(f),
                    "--project", "p", "--network", "g"], check=True, env=env, capture_output=True)
    return store


def _start_run(store: Path) -> subprocess.Popen:
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    return subprocess.Popen([sys.executable, "-m", "workspace.cli", "--store", str(store), "run", "p/g",
                             "--method", "njw", "--k", "4", "--repeats", "60", "--json"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env,
                            start_new_session=True, preexec_fn=ctrl_c_as_at_a_terminal)


def _wait_running(store: Path, proc: subprocess.Popen, timeout: float = 60) -> None:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        assert proc.poll() is None, proc.communicate()
        try:
            con = sqlite3.connect(store, timeout=5)
            row = con.execute("SELECT status FROM runs").fetchone()
            con.close()
        except sqlite3.OperationalError:
            row = None
        if row and row[0] == "running":
            time.sleep(1.0)  # well inside compute
            return
        time.sleep(0.1)
    raise AssertionError("the run never started")


@pytest.mark.slow
def test_ctrl_c_records_cancelled(tmp_path):
    store = _slow_store(tmp_path)
    proc = _start_run(store)
    _wait_running(store, proc)
    proc.send_signal(signal.SIGINT)
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err
    con = sqlite3.connect(store)
    assert con.execute("SELECT status, error FROM runs").fetchone()[0] == "cancelled"


@pytest.mark.slow
def test_kill_9_leaves_interrupted_run(tmp_path):
    store = _slow_store(tmp_path)
    proc = _start_run(store)
    _wait_running(store, proc)
    os.killpg(proc.pid, signal.SIGKILL)  # the whole process group
    proc.wait(timeout=30)
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    res = subprocess.run([sys.executable, "-m", "workspace.cli", "--store", str(store), "runs", "--json"],
                         capture_output=True, text=True, env=env, timeout=60)
    assert res.returncode == 0, res.stderr
    assert "interrupted" in res.stderr  # the open says what it marked
    con = sqlite3.connect(store)
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    status, membership = con.execute("SELECT status, membership_blob FROM runs").fetchone()
    assert status == "interrupted" and membership is None
    ver = subprocess.run([sys.executable, "-m", "workspace.cli", "--store", str(store), "verify", "--json"],
                         capture_output=True, text=True, env=env, timeout=60)
    assert ver.returncode == 0, ver.stdout


def test_show_names_the_run_conductance_as_the_worst_community(cli, karate_csv, tmp_path):
    """The run's conductance is its worst community's: the text says so, and the value equals the
    largest networkx ``algorithms.cuts.conductance`` over the stored communities (Zachary 1977 karate
    club as shipped by networkx, unweighted)."""
    assert cli("import", karate_csv, "--project", "club", "--network", "karate").code == 0
    run = cli("run", "club/karate", "--method", "njw", "--k", "3", "--json").json["run"]
    members = cli("members", run, "--json")
    assert members.code == 0, members.err
    G = nx.relabel_nodes(nx.karate_club_graph(), {i: f"m{i:02d}" for i in range(34)})
    groups = {c["community"]: set(c["nodes"]) for c in members.json["communities"]}
    assert sum(len(g) for g in groups.values()) == 34
    worst = max(nx.conductance(G, c) for c in groups.values())
    text = cli("show", run).out
    line = next(ln for ln in text.splitlines() if "conductance (worst)" in ln)
    value = float(line.split("conductance (worst)")[1].split()[0])
    assert value == pytest.approx(worst, rel=1e-3)


def test_show_names_the_blas_threads_a_large_solve_fixed(cli, karate_csv, monkeypatch):
    """``show`` adds the OpenBLAS thread count to the solver line when the solve fixed one (from
    ``eigen.BLAS_FIXED_THREADS_MIN_NODES`` rows; lowered here so that the karate club, Zachary 1977
    as shipped by networkx, takes the path), and the JSON carries it; a small solve shows none."""
    from threadpoolctl import threadpool_info

    import workspace.spectral.eigen as eigen

    assert cli("import", karate_csv, "--project", "club", "--network", "karate").code == 0
    small = cli("run", "club/karate", "--method", "njw", "--k", "3", "--set", "dense_threshold=10", "--json").json
    assert small["diagnostics"]["blas_threads"] is None
    line = next(ln for ln in cli("show", small["run"]).out.splitlines() if ln.strip().startswith("solver"))
    assert line.split() == ["solver", "arpack-eigsh"]
    if not any("openblas" in i["internal_api"] for i in threadpool_info()):
        pytest.skip("the count is fixed for OpenBLAS only")
    monkeypatch.setattr(eigen, "BLAS_FIXED_THREADS_MIN_NODES", 0)
    large = cli("run", "club/karate", "--method", "njw", "--k", "3", "--set", "dense_threshold=10", "--json").json
    threads = large["diagnostics"]["blas_threads"]
    assert threads in (1, eigen.SOLVE_BLAS_THREADS)
    line = next(ln for ln in cli("show", large["run"]).out.splitlines() if ln.strip().startswith("solver"))
    assert line.split()[1:] == ["arpack-eigsh", f"({threads}", "BLAS", "threads)" if threads > 1 else "thread)"]
