"""``cutbook copy`` as a user runs it: text and --json output, exit codes of the faults mapping
(errors.py: 3 not found, 10 no store, 11 read-only, 2 usage), passwords never printed, and the
destination unchanged after any refusal.

Outside references: the karate network is Zachary's (1977) 34 members and 78 ties (as in
networkx.karate_club_graph); role privileges follow PostgreSQL's GRANT (documentation, "Privileges").
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from tests_support import dump_any

REPO = Path(__file__).resolve().parents[2]
KARATE = REPO / "tests" / "data" / "karate.csv"


def _cutbook(capsys, *argv):
    from workspace.cli import main

    capsys.readouterr()
    code = main([str(a) for a in argv])
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.fixture
def source(tmp_path, capsys):
    a = tmp_path / "a.sqlite"
    assert _cutbook(capsys, "--store", a, "import", KARATE, "--project", "club", "--network", "karate",
                    "--weight", "weight")[0] == 0
    assert _cutbook(capsys, "--store", a, "run", "club/karate", "--method", "njw", "--k", "2")[0] == 0
    assert _cutbook(capsys, "--store", a, "tag", "1", "first")[0] == 0
    return a


def test_copy_then_copy_again(source, tmp_path, capsys):
    b = tmp_path / "b.sqlite"
    code, out, err = _cutbook(capsys, "--store", source, "copy", "--to", b, "--json")
    assert code == 0, err
    res = json.loads(out)
    assert res["added"]["versions"] == 1 and res["added"]["runs"] == 1 and res["added"]["annotations"] == 1
    assert res["verified"]["ok"]
    code, out, err = _cutbook(capsys, "--store", source, "copy", "--to", b)
    assert code == 0 and "nothing new" in out + err
    code, out, _ = _cutbook(capsys, "--store", b, "show", "club/karate", "--json")
    shown = json.loads(out)
    assert (shown["nodes"], shown["edges"]) == (34, 78)  # Zachary (1977)
    assert _cutbook(capsys, "--store", b, "verify")[0] == 0


def test_refusals_change_nothing(source, tmp_path, capsys):
    b = tmp_path / "b.sqlite"
    assert _cutbook(capsys, "--store", source, "copy", "--to", b, "--network", "club/karate")[0] == 0
    before = dump_any(str(b))
    code, _, err = _cutbook(capsys, "--store", source, "copy", "--to", b, "--network", "club/karat")
    assert code == 3 and "no network club/karat" in err
    code, _, err = _cutbook(capsys, "--store", source, "copy", "--to", b, "--run", "42")
    assert code == 3 and "no run 42" in err
    code, _, err = _cutbook(capsys, "--store", tmp_path / "none.sqlite", "copy", "--to", b)
    assert code == 10
    code, _, err = _cutbook(capsys, "--store", b, "copy", "--to", b)
    assert code == 2 and "same store" in err
    assert dump_any(str(b)) == before
    assert not (tmp_path / "none.sqlite").exists()


@pytest.mark.postgres
@pytest.mark.slow
def test_copy_into_postgres_with_a_read_only_role(source, pg_server, pg_url, capsys):
    """Into a database where the role may only read: exit 11, one line, no password, nothing changed;
    then as the owner: copied, and a second copy adds nothing."""
    code, out, err = _cutbook(capsys, "--store", source, "copy", "--to", pg_url, "--json")
    assert code == 0, err
    assert pg_server.password not in out + err
    db = pg_url.rsplit("/", 1)[1]
    role = f"reader_{db[-6:]}"
    pg_server.admin(f"CREATE ROLE {role} LOGIN PASSWORD 'cp-Secret-3'")
    pg_server.admin(f'GRANT CONNECT ON DATABASE "{db}" TO {role}')
    pg_server.admin(f"GRANT USAGE ON SCHEMA public TO {role}", database=db)
    pg_server.admin(f"GRANT SELECT ON ALL TABLES IN SCHEMA public TO {role}", database=db)
    ro = pg_server.url(db, user=role, password="cp-Secret-3")
    assert _cutbook(capsys, "--store", source, "tag", "1", "second")[0] == 0  # something new to copy
    before = dump_any(pg_url)
    code, out, err = _cutbook(capsys, "--store", source, "copy", "--to", ro)
    assert code == 11, err
    assert len(err.strip().splitlines()) == 1 and "read-only" in err
    assert "cp-Secret-3" not in out + err
    assert dump_any(pg_url) == before
    code, out, err = _cutbook(capsys, "--store", source, "copy", "--to", pg_url, "--json")
    assert code == 0 and json.loads(out)["added"]["annotations"] == 1
