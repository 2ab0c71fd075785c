"""Who did what: every record a person creates says who (``--user``, ``$CUTBOOK_USER``, else the
OS account), on both back ends; runs of another host are never marked interrupted here.

Outside references: the OS account name is the password database's entry for the effective user
id (POSIX ``getpwuid``, Python's ``pwd`` module); the host name is ``socket.gethostname()``
(POSIX ``gethostname``).
"""

from __future__ import annotations

import os
import pwd
import socket
from pathlib import Path

from sqlalchemy import create_engine, text

from tests_support import dump_store

REPO = Path(__file__).resolve().parents[2]
KARATE = REPO / "tests" / "data" / "karate.csv"


def _url(store) -> str:
    store = str(store)
    return store if "://" in store else f"sqlite:///{store}"


def _rows(store, sql: str) -> list[tuple]:
    engine = create_engine(_url(store))
    try:
        with engine.connect() as con:
            return [tuple(r) for r in con.execute(text(sql))]
    finally:
        engine.dispose()


def test_records_say_who_made_them(cli, store_target, monkeypatch):
    monkeypatch.delenv("CUTBOOK_USER", raising=False)
    r = cli("import", KARATE, "--project", "club", "--network", "karate", "--weight", "weight", "--user", "ana")
    assert r.code == 0, r.err
    monkeypatch.setenv("CUTBOOK_USER", "ben")
    r = cli("run", "club/karate", "--method", "njw", "--k", "2", "--json")
    assert r.code == 0, r.err
    run_id = r.json["run"]
    assert r.json["by"] == "ben" and r.json["host"] == socket.gethostname()
    monkeypatch.delenv("CUTBOOK_USER")
    assert cli("params", "save", "club/two", "--method", "njw", "--k", "2").code == 0
    assert cli("note", str(run_id), "checked by hand", "--user", "cleo").code == 0
    account = pwd.getpwuid(os.geteuid()).pw_name  # POSIX password database, not our code
    assert _rows(store_target, "SELECT created_by FROM projects") == [("ana",)]
    assert _rows(store_target, "SELECT created_by FROM networks") == [("ana",)]
    assert _rows(store_target, "SELECT created_by FROM network_versions") == [("ana",)]
    assert _rows(store_target, "SELECT created_by FROM runs") == [("ben",)]
    assert _rows(store_target, "SELECT created_by FROM param_sets") == [(account,)]
    assert _rows(store_target, "SELECT created_by FROM param_set_versions") == [(account,)]
    assert _rows(store_target, "SELECT created_by FROM annotations") == [("cleo",)]
    # listings show it
    versions = cli("versions", "club/karate")
    assert versions.code == 0 and "ana" in versions.out
    assert cli("versions", "club/karate", "--json").json[0]["by"] == "ana"
    runs = cli("runs", "--json")
    assert runs.json[0]["by"] == "ben"
    shown = cli("show", str(run_id))
    assert f"ben on host {socket.gethostname()}" in shown.out
    assert cli("params", "list", "--json").json[0]["by"] == account


def test_a_bad_user_name_is_refused_and_changes_nothing(cli, store_target):
    assert cli("import", KARATE, "--project", "club", "--network", "karate").code == 0
    before = dump_store(store_target)
    for bad in ("ana:secret", "", "x" * 201, "tab\there"):
        r = cli("import", KARATE, "--project", "club", "--network", "other", "--user", bad)
        assert r.code == 2, (bad, r.err)
        assert "secret" not in r.err
    assert dump_store(store_target) == before


def test_runs_of_another_host_are_not_marked_interrupted(cli, store_target):
    """A `running` run whose pid does not exist here is interrupted only when it is this host's."""
    assert cli("import", KARATE, "--project", "club", "--network", "karate").code == 0
    assert cli("run", "club/karate", "--method", "njw", "--k", "2").code == 0
    assert cli("run", "club/karate", "--method", "njw", "--k", "3").code == 0
    dead_pid = 2 ** 22 + 12345  # above Linux's default pid_max (4194304 = 2^22): no such process
    engine = create_engine(_url(store_target))
    with engine.begin() as con:
        con.execute(text("UPDATE runs SET status = 'running', finished_at = NULL, pid = :p, host = :h WHERE id = 1"),
                    {"p": dead_pid, "h": socket.gethostname()})
        con.execute(text("UPDATE runs SET status = 'running', finished_at = NULL, pid = :p, host = 'elsewhere' "
                         "WHERE id = 2"), {"p": dead_pid})
    engine.dispose()
    assert cli("runs").code == 0  # any command opening the store for writing-capable use
    assert _rows(store_target, "SELECT id, status FROM runs ORDER BY id") == [(1, "interrupted"), (2, "running")]
