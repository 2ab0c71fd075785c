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
def store(store_path):
    from workspace.services.store import open_workspace

    s = open_workspace(store_path)
    yield s
    s.dispose()


class CliResult:
    def __init__(self, code: int, out: str, err: str) -> None:
        self.code, self.out, self.err = code, out, err

    @property
    def json(self):
        return json.loads(self.out)


@pytest.fixture
def cli(store_path, capsys):
    """Run ``cutbook`` in-process against the temporary store (made empty first: read commands never create one)."""
    from workspace.cli import main
    from workspace.services.store import open_workspace

    open_workspace(store_path).dispose()

    def run(*argv: str) -> CliResult:
        capsys.readouterr()
        code = main(["--store", str(store_path), *map(str, argv)])
        captured = capsys.readouterr()
        return CliResult(code, captured.out, captured.err)

    return run


def run_cli_process(store: Path, *argv: str, timeout: float = 120, **kw) -> subprocess.CompletedProcess:
    """Run ``cutbook`` in a fresh interpreter (for kill, concurrency and start-up tests)."""
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    return subprocess.run([sys.executable, "-m", "workspace.cli", "--store", str(store), *map(str, argv)],
                          capture_output=True, text=True, timeout=timeout, env=env, **kw)


sys.path.insert(0, str(REPO / "tests" / "support"))
