"""Shared fixtures: a fresh temporary store per test, and a CLI runner."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent
DATA = REPO / "tests" / "data"


@pytest.fixture
def store_path(tmp_path) -> Path:
    return tmp_path / "store.sqlite"


@pytest.fixture
def store_backend() -> str:
    """The back end of the ``store``/``cli`` fixtures: "sqlite" unless the test is parametrised over both
    (``pytest_generate_tests`` below)."""
    return "sqlite"


@pytest.fixture
def store_target(store_backend, store_path, request):
    """What ``--store`` gets: the SQLite file ``store_path``, or a fresh PostgreSQL database's URL."""
    if store_backend == "postgresql":
        return request.getfixturevalue("pg_store_url")
    return store_path


@pytest.fixture
def store(store_target):
    from workspace.services.store import open_workspace

    s = open_workspace(store_target)
    yield s
    s.dispose()


class CliResult:
    def __init__(self, code: int, out: str, err: str) -> None:
        self.code, self.out, self.err = code, out, err

    @property
    def json(self):
        return json.loads(self.out)


@pytest.fixture
def cli(store_target, capsys):
    """Run ``cutbook`` in-process against the temporary store (made empty first: read commands never create one)."""
    from workspace.cli import main
    from workspace.services.store import open_workspace

    open_workspace(store_target).dispose()

    def run(*argv: str) -> CliResult:
        capsys.readouterr()
        code = main(["--store", str(store_target), *map(str, argv)])
        captured = capsys.readouterr()
        return CliResult(code, captured.out, captured.err)

    return run


def run_cli_process(store: Path, *argv: str, timeout: float = 120, **kw) -> subprocess.CompletedProcess:
    """Run ``cutbook`` in a fresh interpreter (for kill, concurrency and start-up tests)."""
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    return subprocess.run([sys.executable, "-m", "workspace.cli", "--store", str(store), *map(str, argv)],
                          capture_output=True, text=True, timeout=timeout, env=env, **kw)


sys.path.insert(0, str(REPO / "tests" / "support"))


# --- PostgreSQL: a throwaway server for the session, and fixtures over both back ends -----------

def _postgres_required() -> bool:
    """In CI (``$CI`` set) or with ``CUTBOOK_REQUIRE_POSTGRES=1`` the PostgreSQL tests must run:
    a missing server binary or driver fails them loudly instead of skipping them."""
    return bool(os.environ.get("CI")) or os.environ.get("CUTBOOK_REQUIRE_POSTGRES", "") not in ("", "0")


def _no_postgres(reason: str):
    if _postgres_required():
        pytest.fail(f"PostgreSQL tests cannot run: {reason} (they must run in CI; .ci/run installs the "
                    "postgresql package)", pytrace=False)
    pytest.skip(f"PostgreSQL tests skipped: {reason} (set CI=1 or CUTBOOK_REQUIRE_POSTGRES=1 to make this fail)")


BOTH_BACKENDS = ("tests/store/", "tests/services/", "tests/cli/")


def pytest_generate_tests(metafunc):
    """The store, services and CLI suites run on both back ends through the same ``store``/``cli``
    fixtures: a test there that uses them (directly or through its fixtures) is parametrised over
    SQLite and PostgreSQL, unless it names ``store_path`` itself (it reads the SQLite file directly)
    or is marked ``sqlite_only``."""
    names = metafunc.fixturenames
    if "store_backend" not in names:
        return
    rel = Path(str(metafunc.definition.fspath)).resolve().relative_to(REPO).as_posix()
    if not rel.startswith(BOTH_BACKENDS):
        return
    import inspect

    own = set(inspect.signature(metafunc.function).parameters)
    if "store_path" in own or metafunc.definition.get_closest_marker("sqlite_only"):
        return
    metafunc.parametrize("store_backend", ["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)],
                         ids=["sqlite", "pg"])


@pytest.fixture(scope="session")
def pg_server():
    """One PostgreSQL server for the whole session (tests/support/pgserver.py), stopped at the end."""
    from pgserver import PgServer, find_bindir, wait_ready

    try:
        import psycopg  # noqa: F401
    except ImportError:
        _no_postgres("the psycopg driver is not installed (pip install -e '.[test]')")
    bindir = find_bindir()
    if bindir is None:
        _no_postgres("no PostgreSQL server binaries in /usr/lib/postgresql/*/bin (apt-get install postgresql)")
    server = PgServer(bindir)
    try:
        server.start()
        wait_ready(server)
    except BaseException:
        server.stop()
        raise
    yield server
    server.stop()


@pytest.fixture
def pg_url(pg_server) -> str:
    """A fresh, empty PostgreSQL database (SQLAlchemy URL, with the password) for one test."""
    return pg_server.url(pg_server.new_database())


@pytest.fixture(scope="session")
def pg_template(pg_server) -> str:
    """A database holding a new, migrated store, copied by ``pg_store_url`` (CREATE DATABASE … TEMPLATE)."""
    from workspace.services.store import open_workspace

    name = pg_server.new_database("template")
    open_workspace(pg_server.url(name)).dispose()
    return name


@pytest.fixture
def pg_store_url(pg_server, pg_template) -> str:
    """A fresh PostgreSQL database that already holds a new, empty store at the current schema."""
    return pg_server.url(pg_server.new_database(template=pg_template))


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def backend(request) -> str:
    return request.param


@pytest.fixture
def store_url(backend, request, tmp_path) -> str:
    """Where a test's store lives on the current back end: an SQLite file path, or a PostgreSQL URL."""
    if backend == "sqlite":
        return str(tmp_path / "store.sqlite")
    return request.getfixturevalue("pg_url")


@pytest.fixture
def any_store(store_url):
    from workspace.services.store import open_workspace

    s = open_workspace(store_url)
    yield s
    s.dispose()


@pytest.fixture
def any_cli(store_url, capsys):
    """Like ``cli``, against the current back end's store."""
    from workspace.cli import main
    from workspace.services.store import open_workspace

    open_workspace(store_url).dispose()

    def run(*argv: str) -> CliResult:
        capsys.readouterr()
        code = main(["--store", store_url, *map(str, argv)])
        captured = capsys.readouterr()
        return CliResult(code, captured.out, captured.err)

    run.store = store_url
    return run
