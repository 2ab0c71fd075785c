"""The sqlite3 read path of the everyday listings (workspace.services.quickread) against the full
services it stands in for.

The reference is the full service path over SQLAlchemy (networks.list_projects,
browse.ledger_runs, runs.show_run) on the same store: every answer must be equal, keys in the
same order (the JSON output prints them in that order). The stored values themselves are checked
against networkx elsewhere (test_services_ledger.py). The rest checks when the quick path steps
aside: a server URL, a store to upgrade, a run marked running, listing forms it does not serve.
"""

from __future__ import annotations

import json
import os
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

from workspace.services import quickread
from workspace.services.store import open_workspace

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def demo_store_path(tmp_path_factory) -> Path:
    from workspace.demo.build import build_demo
    from workspace.services import annotations

    path = tmp_path_factory.mktemp("quickread") / "demo.sqlite"
    store = open_workspace(path)
    try:
        build_demo(store)
        # annotations: a tag taken off again, a tag kept, notes with their times
        annotations.tag(store, 1, ["keep", "drop", "émoji-😀"])
        annotations.untag(store, 1, ["drop"])
        annotations.add_note(store, 1, "first look: looks fine")
        annotations.add_note(store, 2, "second")
    finally:
        store.dispose()
    return path


@pytest.fixture
def both(demo_store_path):
    quick = quickread.open_quick(os.fspath(demo_store_path))
    assert isinstance(quick, quickread.QuickStore)
    full = open_workspace(demo_store_path, create=False)
    yield quick, full
    quick.dispose()
    full.dispose()


def _same(a, b) -> None:
    # equal values and the same key order (json.dumps keeps insertion order)
    assert json.dumps(a) == json.dumps(b)


def test_projects_equal_the_full_service(both):
    from workspace.services.networks import list_projects

    quick, full = both
    _same(quickread.list_projects(quick), list_projects(full))
    assert quickread.list_projects(quick)


@pytest.mark.parametrize("limit", [None, 1, 5])
def test_ledger_equals_the_full_service(both, limit):
    from workspace.services.browse import ledger_runs

    quick, full = both
    mine = quickread.ledger_runs(quick, limit=limit)
    _same(mine, ledger_runs(full, limit=limit))
    assert any(r["tags"] for r in mine) and any(r["param_set"] for r in mine) or limit is not None


@pytest.mark.parametrize("kwargs", [dict(scope="velmora-bikes"), dict(status="done"), dict(text="njw"),
                                    dict(sort="modularity"), dict(sort="run", descending=False)])
def test_other_ledger_forms_go_to_the_full_service(both, kwargs):
    from workspace.services.browse import ledger_runs

    quick, full = both
    _same(quickread.ledger_runs(quick, **kwargs), ledger_runs(full, **kwargs))


def test_show_equals_the_full_service_for_every_run(both):
    from workspace.errors import NotFoundError
    from workspace.services.runs import list_runs, show_run

    quick, full = both
    ids = [r["run"] for r in list_runs(full)]
    assert ids
    for run_id in ids:
        _same(quickread.show_run(quick, run_id), show_run(full, run_id))
    first = quickread.show_run(quick, 1)
    assert first["tags"] == ["keep", "émoji-😀"] and [n["note"] for n in first["notes"]] == ["first look: looks fine"]
    _same(quickread.show_run(quick, ids[0], include_labels=True), show_run(full, ids[0], include_labels=True))
    with pytest.raises(NotFoundError, match="no run 99999"):
        quickread.show_run(quick, 99999)


def test_quick_path_steps_aside(tmp_path, demo_store_path):
    assert quickread.open_quick("postgresql://user@127.0.0.1:1/none") is None
    assert quickread.open_quick(os.fspath(tmp_path / "absent.sqlite")) is None  # the full path says "no store"
    assert not (tmp_path / "absent.sqlite").exists()
    copy = tmp_path / "copy.sqlite"
    src = sqlite3.connect(demo_store_path)
    dst = sqlite3.connect(copy)
    src.backup(dst)
    src.close()
    # a run marked running: the full path must look at it (and mark it interrupted when its process is gone)
    dst.execute("UPDATE runs SET status = 'running' WHERE id = 1")
    dst.commit()
    assert quickread.open_quick(os.fspath(copy)) is None
    dst.execute("UPDATE runs SET status = 'done' WHERE id = 1")
    # a store at another schema revision: the full path upgrades it (or refuses a newer one)
    dst.execute("UPDATE alembic_version SET version_num = '0001'")
    dst.commit()
    dst.close()
    assert quickread.open_quick(os.fspath(copy)) is None


def test_listings_start_without_sqlalchemy(demo_store_path):
    # the point of the quick path: these commands never import SQLAlchemy (nor numpy)
    code = ("import sys, io, contextlib\n"
            "from workspace.cli import main\n"
            "for argv in (['projects'], ['runs'], ['show', '1'], ['runs', '--json']):\n"
            "    with contextlib.redirect_stdout(io.StringIO()):\n"
            "        assert main(['--store', sys.argv[1], *argv]) == 0\n"
            "print(sorted(m for m in ('sqlalchemy', 'numpy', 'alembic') if m in sys.modules))\n")
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    done = subprocess.run([sys.executable, "-c", code, os.fspath(demo_store_path)], capture_output=True,
                          text=True, env=env, timeout=120)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "[]"
