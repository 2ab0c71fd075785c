"""Immutability of recorded work, and deleting a project or network.

Versions, parameter-set versions and runs are insert-only: after running every command
(re-imports, equal and changed parameter saves, runs, reruns, attach, export, diff,
track, where, verify, show, listings, and commands that fail) every row that existed
before is still there byte for byte; only new rows were added.

``cutbook delete P`` / ``delete P/N`` asks first: with no terminal and no ``--yes`` it
refuses (exit 2) and deletes nothing; in a terminal it deletes only when the name is
typed back; with ``--yes`` it removes everything of the target in one transaction,
leaves other projects untouched, keeps arrays still used elsewhere and leaves no array
without an owner; a failure half way deletes nothing.
"""

from __future__ import annotations

import os
import pty
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

from tests_support import dump_store

REPO = Path(__file__).resolve().parents[2]
DATA = REPO / "tests" / "data"
KARATE = DATA / "karate.csv"
INSERT_ONLY = ("network_versions", "param_set_versions", "runs", "param_sets", "projects", "networks", "blobs",
               "run_communities", "run_measures")
VERSION_BLOBS = ("node_offsets_blob", "node_bytes_blob", "edge_u_blob", "edge_v_blob", "weight_blob")
RUN_BLOBS = ("membership_blob", "stability_blob", "eigenvalues_blob")


def _karate_without_last_lines(tmp_path: Path, drop: int) -> Path:
    lines = KARATE.read_text(encoding="utf-8").splitlines(keepends=True)
    out = tmp_path / f"karate_minus_{drop}.csv"
    out.write_text("".join(lines[:-drop]), encoding="utf-8")
    return out


def _membership_file(tmp_path: Path) -> Path:
    # Zachary (1977): the club split between the instructor ("Mr. Hi", node 1) and the
    # officer (node 34); networkx karate_club_graph stores it as the 'club' node attribute
    import networkx as nx

    G = nx.karate_club_graph()
    path = tmp_path / "split.csv"
    path.write_text("node,community\n" + "".join(f"{i + 1},{G.nodes[i]['club']}\n" for i in G.nodes),
                    encoding="utf-8")
    return path


@pytest.fixture
def workspace_with_work(cli, tmp_path):
    """club/karate @1 and @2, club/copy, other/karate (same arrays as club/karate@1),
    two parameter sets, computed, repeated and attached runs."""
    ok = lambda r: (r.code == 0) or pytest.fail(r.err)  # noqa: E731
    ok(cli("import", KARATE, "--project", "club", "--network", "karate", "--weight", "weight"))
    ok(cli("import", _karate_without_last_lines(tmp_path, 3), "--project", "club", "--network", "karate",
           "--weight", "weight"))
    ok(cli("import", _karate_without_last_lines(tmp_path, 5), "--project", "club", "--network", "copy",
           "--weight", "weight"))
    ok(cli("import", KARATE, "--project", "other", "--network", "karate", "--weight", "weight"))
    ok(cli("params", "save", "club/two", "--method", "njw", "--k", "2"))
    ok(cli("params", "save", "club/three", "--method", "njw", "--k", "3", "--set", "n_init=4"))
    ok(cli("params", "save", "other/two", "--method", "njw", "--k", "2"))
    runs = {}
    runs["v1"] = cli("run", "club/karate@1", "--params", "club/two", "--json").json["run"]
    runs["v2"] = cli("run", "club/karate@2", "--params", "club/two", "--json").json["run"]
    runs["rep"] = cli("run", "club/karate@2", "--method", "njw", "--k", "2", "--repeats", "3", "--json").json["run"]
    runs["att"] = cli("attach", _membership_file(tmp_path), "--to", "club/karate@1", "--label", "split",
                      "--json").json["run"]
    runs["copy"] = cli("run", "club/copy", "--params", "club/three", "--json").json["run"]
    runs["other"] = cli("run", "other/karate", "--params", "other/two", "--json").json["run"]
    return runs


def _only_added(before: dict, after: dict) -> dict[str, int]:
    """Assert every earlier row is unchanged; return how many rows each table gained."""
    gained = {}
    for table in INSERT_ONLY:
        old, new = before.get(table, []), after.get(table, [])
        missing = sorted(set(old) - set(new))
        assert not missing, f"{table}: rows edited or removed: {missing[:2]}"
        assert len(new) == len(set(new))
        gained[table] = len(new) - len(old)
    return gained


def test_no_command_edits_recorded_work(cli, workspace_with_work, store_path, tmp_path):
    runs = workspace_with_work
    before = dump_store(store_path)
    expect = lambda r, code=0: (r.code == code) or pytest.fail(f"exit {r.code}: {r.err}")  # noqa: E731

    # re-imports of equal content: no new version
    r = cli("import", KARATE, "--project", "club", "--network", "karate", "--weight", "weight", "--json")
    expect(r)
    assert r.json["new_version"] is True and r.json["version"] == 3  # @1's content again, after @2
    r = cli("import", KARATE, "--project", "club", "--network", "karate", "--weight", "weight", "--json")
    assert r.json["new_version"] is False
    r = cli("import", DATA / "karate.graphml", "--project", "other", "--network", "karate", "--weight", "weight",
            "--json")
    assert r.code == 0 and r.json["new_version"] is False  # same graph, another format
    # parameter sets: equal values keep the version, changed values add one
    assert cli("params", "save", "club/two", "--method", "njw", "--k", "2", "--json").json["version"] == 1
    assert cli("params", "save", "club/two", "--method", "njw", "--k", "4", "--json").json["version"] == 2
    # runs, reruns, attach
    expect(cli("run", "club/karate@1", "--params", "club/two@1"))
    rr = cli("rerun", runs["v1"], "--json")
    assert rr.code == 0 and rr.json["identical"] is True
    expect(cli("rerun", runs["rep"]))
    expect(cli("attach", _membership_file(tmp_path), "--to", "club/karate@2", "--label", "split"))
    # read-only commands
    for fmt in ("csv", "json", "graphml"):
        expect(cli("export", runs["v1"], "--format", fmt, "-o", tmp_path / f"out.{fmt}"))
    expect(cli("diff", runs["v1"], runs["v2"], "--json"))
    expect(cli("diff", runs["v1"], runs["att"], "--nodes", "all"))
    expect(cli("diff", "--track", "club/two", "--network", "club/karate", "--json"))
    expect(cli("diff", "--track", "", runs["v1"], runs["v2"], runs["rep"]))
    expect(cli("where", "34", "--network", "club/karate", "--json"))
    expect(cli("verify", "--json"))
    for target in ("club/karate@1", "club/karate@2", "club/karate", str(runs["rep"]), str(runs["att"])):
        expect(cli("show", target, "--json"))
        expect(cli("show", target))
    expect(cli("versions", "club/karate"))
    expect(cli("changes", "club/karate@1", "club/karate@2", "--json"))
    for argv in (("projects",), ("networks",), ("runs",), ("runs", "club/karate@2"), ("params", "list"),
                 ("params", "show", "club/two@1"), ("methods",), ("methods", "njw")):
        expect(cli(*argv, "--json"))
    # commands that fail must not touch anything either
    expect(cli("rerun", runs["att"]), 2)  # nothing to recompute
    expect(cli("import", DATA / "bad" / "wrong_columns.csv", "--project", "club", "--network", "karate"), 1)
    expect(cli("run", "club/karate@9", "--method", "njw"), 3)
    expect(cli("params", "save", "club/two", "--method", "njw", "--set", "n_init=-1"), 2)
    expect(cli("delete", "club/karate@1", "--yes"), 2)  # versions are never deleted on their own

    gained = _only_added(before, dump_store(store_path))
    assert gained["network_versions"] == 1 and gained["param_set_versions"] == 1
    assert gained["runs"] == 4 and gained["projects"] == 0 and gained["networks"] == 0


# --- delete -------------------------------------------------------------------------------------------

def _real_cli(store: Path, *argv: str, **kw) -> subprocess.CompletedProcess:
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    return subprocess.run([sys.executable, "-m", "workspace.cli", "--store", str(store), *map(str, argv)],
                          capture_output=True, text=True, env=env, timeout=120, **kw)


def _orphans(store: Path) -> list:
    used = " UNION ".join([f"SELECT {c} FROM network_versions" for c in VERSION_BLOBS]
                          + [f"SELECT {c} FROM runs WHERE {c} IS NOT NULL" for c in RUN_BLOBS])
    con = sqlite3.connect(store)
    try:
        return con.execute(f"SELECT hash FROM blobs WHERE hash NOT IN ({used})").fetchall()
    finally:
        con.close()


def _rows_of_project(dump: dict, store: Path, project: str) -> dict[str, list]:
    """The rows belonging to one project, read with plain SQL (for 'other projects untouched')."""
    con = sqlite3.connect(store)
    try:
        q = {
            "projects": "SELECT * FROM projects WHERE name = ?",
            "networks": "SELECT n.* FROM networks n JOIN projects p ON p.id = n.project_id WHERE p.name = ?",
            "network_versions": "SELECT v.* FROM network_versions v JOIN networks n ON n.id = v.network_id "
                                "JOIN projects p ON p.id = n.project_id WHERE p.name = ?",
            "param_sets": "SELECT s.* FROM param_sets s JOIN projects p ON p.id = s.project_id WHERE p.name = ?",
            "runs": "SELECT r.* FROM runs r JOIN network_versions v ON v.id = r.version_id JOIN networks n "
                    "ON n.id = v.network_id JOIN projects p ON p.id = n.project_id WHERE p.name = ?",
        }
        return {k: sorted(map(repr, con.execute(sql, (project,)).fetchall())) for k, sql in q.items()}
    finally:
        con.close()


@pytest.mark.parametrize("target", ["club", "club/karate"])
def test_delete_without_yes_and_without_a_terminal_refuses(workspace_with_work, store_path, target):
    before = dump_store(store_path)
    res = _real_cli(store_path, "delete", target, stdin=subprocess.DEVNULL)
    assert res.returncode == 2, res.stderr
    assert res.stderr.count("\n") == 1 and res.stderr.startswith("cutbook: error: ")
    assert "--yes" in res.stderr and "Traceback" not in res.stderr
    assert res.stdout == ""
    assert dump_store(store_path) == before


def test_delete_in_a_terminal_needs_the_name_typed_back(workspace_with_work, store_path):
    before = dump_store(store_path)
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    for typed, code in ((b"clu\n", 1), (b"club/karate\n", 0)):
        master, slave = pty.openpty()
        try:
            os.write(master, typed)
            proc = subprocess.run([sys.executable, "-m", "workspace.cli", "--store", str(store_path), "delete",
                                   "club/karate"], stdin=slave, capture_output=True, text=True, env=env,
                                  timeout=120)
        finally:
            os.close(slave)
            os.close(master)
        assert proc.returncode == code, proc.stderr
        assert "type club/karate and press Enter" in proc.stderr
        if code == 1:
            assert "nothing deleted" in proc.stderr
            assert dump_store(store_path) == before
    con = sqlite3.connect(store_path)
    nets = con.execute("SELECT n.name FROM networks n JOIN projects p ON p.id = n.project_id "
                       "WHERE p.name = 'club' ORDER BY n.name").fetchall()
    con.close()
    assert nets == [("copy",)]


def test_delete_network_with_yes(cli, workspace_with_work, store_path):
    runs = workspace_with_work
    other_before = _rows_of_project(dump_store(store_path), store_path, "other")
    copy_runs = cli("runs", "club/copy", "--json").json
    r = cli("delete", "club/karate", "--yes", "--json")
    assert r.code == 0, r.err
    assert r.json["versions"] == 2 and r.json["runs"] == 4 and r.json["deleted"] is True
    assert [n["network"] for n in cli("networks", "--project", "club", "--json").json] == ["copy"]
    assert cli("versions", "club/karate").code == 3
    for key in ("v1", "v2", "rep", "att"):
        assert cli("show", runs[key]).code == 3
    assert cli("runs", "club/copy", "--json").json == copy_runs
    assert {p["name"] for p in cli("params", "list", "club", "--json").json} == {"two", "three"}  # kept
    assert _rows_of_project(dump_store(store_path), store_path, "other") == other_before
    v = cli("verify", "--json")
    assert v.code == 0 and v.json["ok"] is True
    assert _orphans(store_path) == []
    # other/karate holds the same arrays as the deleted club/karate@1: they must survive
    assert cli("show", "other/karate@1", "--json").code == 0
    assert cli("export", runs["other"], "-o", store_path.parent / "m.csv").code == 0


def test_delete_project_with_yes(cli, workspace_with_work, store_path):
    other_before = _rows_of_project(dump_store(store_path), store_path, "other")
    res = _real_cli(store_path, "delete", "club", "--yes", "--json", stdin=subprocess.DEVNULL)
    assert res.returncode == 0, res.stderr
    assert [p["project"] for p in cli("projects", "--json").json] == ["other"]
    con = sqlite3.connect(store_path)
    try:
        for table, sql in (("param_sets", "SELECT count(*) FROM param_sets WHERE project_id NOT IN "
                                          "(SELECT id FROM projects)"),
                           ("networks", "SELECT count(*) FROM networks WHERE project_id NOT IN (SELECT id FROM projects)"),
                           ("versions", "SELECT count(*) FROM network_versions WHERE network_id NOT IN "
                                        "(SELECT id FROM networks)"),
                           ("runs", "SELECT count(*) FROM runs WHERE version_id NOT IN (SELECT id FROM network_versions)"),
                           ("communities", "SELECT count(*) FROM run_communities WHERE run_id NOT IN "
                                           "(SELECT id FROM runs)")):
            assert con.execute(sql).fetchone()[0] == 0, table
        assert con.execute("PRAGMA foreign_key_check").fetchall() == []
    finally:
        con.close()
    assert _rows_of_project(dump_store(store_path), store_path, "other") == other_before
    v = cli("verify", "--json")
    assert v.code == 0 and v.json["ok"] is True
    assert _orphans(store_path) == []


def test_failure_half_way_through_a_delete_deletes_nothing(cli, workspace_with_work, store_path, monkeypatch):
    """The orphan-array step fails after the project's rows were deleted inside the transaction:
    the whole delete must roll back."""
    import workspace.services.delete as delete_service

    def failing_step():
        raise RuntimeError("disk went away")

    before = dump_store(store_path)
    monkeypatch.setattr(delete_service, "_orphan_blobs_sql", failing_step)
    for target in ("club", "club/karate"):
        r = cli("delete", target, "--yes")
        assert r.code == 1 and "disk went away" in r.err and r.err.count("\n") == 1
        assert dump_store(store_path) == before
    monkeypatch.setattr(delete_service, "_orphan_blobs_sql", lambda: "DELETE FROM no_such_table")
    r = cli("delete", "club", "--yes")
    assert r.code == 1 and dump_store(store_path) == before
