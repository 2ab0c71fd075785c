"""Schema: models and migrations agree, one head, upgrade-on-open, refusal of newer stores,
backup before upgrading a store with data, migrations found from a wheel."""

from __future__ import annotations

import sqlite3
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest
from sqlalchemy import text

from workspace.errors import StoreError
from workspace.store.db import _make_engine, head_revision, migrate, migrations_dir, resolve_store_url
from workspace.store.schema import Base

REPO = Path(__file__).resolve().parents[2]


def _revisions():
    from alembic.config import Config
    from alembic.script import ScriptDirectory

    cfg = Config()
    cfg.set_main_option("script_location", str(migrations_dir()))
    return ScriptDirectory.from_config(cfg)


def test_one_head_and_the_code_knows_it():
    heads = _revisions().get_heads()
    assert len(heads) == 1
    from workspace.store.db import HEAD_REVISION

    assert heads[0] == HEAD_REVISION  # update HEAD_REVISION when adding a migration


def test_models_and_migrations_agree(tmp_path):
    # alembic.autogenerate.compare_metadata is the reference: after upgrading to head
    # it must find no difference between the ORM models and the migrated schema.
    from alembic.autogenerate import compare_metadata
    from alembic.runtime.migration import MigrationContext

    url = resolve_store_url(tmp_path / "s.sqlite")
    migrate(url)
    engine = _make_engine(url)
    with engine.connect() as conn:
        ctx = MigrationContext.configure(conn, opts={"compare_type": True})
        assert compare_metadata(ctx, Base.metadata) == []
    engine.dispose()


def test_fresh_store_is_at_head(store, store_path):
    con = sqlite3.connect(store_path)
    assert con.execute("SELECT version_num FROM alembic_version").fetchone()[0] == head_revision()
    assert con.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    con.close()
    with store.read() as s:
        assert s.execute(text("PRAGMA foreign_keys")).scalar() == 1


def test_new_store_pages_and_an_older_page_size_kept(tmp_path):
    """A new store gets ``SQLITE_PAGE_SIZE`` pages (set before its first page, as SQLite requires:
    sqlite.org/pragma.html#pragma_page_size); a store made with SQLite's default 4096-byte pages
    (every store before) keeps them and still takes imports."""
    from workspace.services.networks import import_network
    from workspace.services.store import open_workspace
    from workspace.store.db import SQLITE_PAGE_SIZE

    assert SQLITE_PAGE_SIZE != 4096
    fresh = tmp_path / "new.sqlite"
    open_workspace(fresh).dispose()
    older = tmp_path / "old.sqlite"
    con = sqlite3.connect(older)
    con.execute("PRAGMA page_size=4096")
    con.execute("PRAGMA journal_mode=WAL")
    con.execute("CREATE TABLE t (x)")  # its first pages written: the size is fixed
    con.execute("DROP TABLE t")
    con.close()
    edges = tmp_path / "e.csv"
    edges.write_text("".join(f"a{i},a{(i * 7 + 1) % 3000}\n" for i in range(3000)))
    for path, size in ((fresh, SQLITE_PAGE_SIZE), (older, 4096)):
        store = open_workspace(path)
        try:
            outcome = import_network(store, edges, project="p", network="n")
        finally:
            store.dispose()
        assert outcome.new_version and outcome.nodes == 3000
        con = sqlite3.connect(path)
        assert con.execute("PRAGMA page_size").fetchone()[0] == size
        assert con.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        con.close()


def test_newer_store_is_refused_and_untouched(tmp_path):
    from workspace.services.store import open_workspace

    path = tmp_path / "s.sqlite"
    open_workspace(path).dispose()
    con = sqlite3.connect(path)
    con.execute("UPDATE alembic_version SET version_num = 'ffffffffffff'")
    con.commit()
    con.close()
    before = path.read_bytes()
    with pytest.raises(StoreError, match="newer than this cutbook"):
        open_workspace(path)
    assert path.read_bytes() == before


def test_upgrade_keeps_rows_and_makes_a_backup(tmp_path):
    from workspace.services.store import open_workspace

    path = tmp_path / "s.sqlite"
    url = resolve_store_url(path)
    first = _revisions().get_base()
    first = first[0] if isinstance(first, (list, tuple)) else first
    migrate(url, target=first)
    con = sqlite3.connect(path)
    con.execute("INSERT INTO projects (name, created_at) VALUES ('harbour', '2026-01-01 00:00:00')")
    con.commit()
    con.close()
    notes = []
    open_workspace(path, notify=notes.append).dispose()
    backups = list(tmp_path.glob("s.sqlite.backup-*"))
    assert len(backups) == 1 and notes and str(backups[0]) in notes[0]
    for p in (path, backups[0]):
        con = sqlite3.connect(p)
        assert con.execute("SELECT name FROM projects").fetchall() == [("harbour",)]
        con.close()
    con = sqlite3.connect(path)
    assert con.execute("SELECT version_num FROM alembic_version").fetchone()[0] == head_revision()
    con.close()


@pytest.mark.slow
def test_installed_wheel_finds_its_migrations(tmp_path):
    wheel_dir = tmp_path / "wheel"
    subprocess.run([sys.executable, "-m", "pip", "wheel", "--no-deps", "--no-build-isolation", "-q",
                    "-w", str(wheel_dir), str(REPO)], check=True, capture_output=True)
    (wheel,) = wheel_dir.glob("cutbook-*.whl")
    names = zipfile.ZipFile(wheel).namelist()
    assert "workspace/migrations/env.py" in names
    assert "workspace/migrations/script.py.mako" in names
    assert any(n.startswith("workspace/migrations/versions/0001_") for n in names)
    site = tmp_path / "site"
    zipfile.ZipFile(wheel).extractall(site)
    code = ("import workspace, sys; from workspace.store.db import migrations_dir; "
            "from workspace.services.store import open_workspace; "
            "assert str(migrations_dir()).startswith(sys.argv[1]), migrations_dir(); "
            "open_workspace(sys.argv[2]).dispose(); print(workspace.__file__)")
    res = subprocess.run([sys.executable, "-c", code, str(site), str(tmp_path / "w.sqlite")],
                         cwd=tmp_path, env={"PYTHONPATH": str(site), "PATH": "/usr/bin:/bin"},
                         capture_output=True, text=True)
    assert res.returncode == 0, res.stderr
    assert res.stdout.strip().startswith(str(site))
    con = sqlite3.connect(tmp_path / "w.sqlite")
    assert con.execute("SELECT version_num FROM alembic_version").fetchone()[0] == head_revision()
