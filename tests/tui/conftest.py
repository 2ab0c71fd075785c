"""Fixtures of the terminal-workspace tests: no animations; the demo store (workspace.demo) built
once per module, with its run summary beside it (``demo.json``), and a copy for tests that write."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from workspace.services.store import open_workspace


@pytest.fixture(autouse=True)
def _no_animations(monkeypatch):
    monkeypatch.setenv("TEXTUAL_ANIMATIONS", "none")


@pytest.fixture(scope="module")
def demo_path(tmp_path_factory) -> Path:
    from workspace.demo.build import build_demo

    path = tmp_path_factory.mktemp("tui-demo") / "demo.sqlite"
    store = open_workspace(path)
    try:
        summary = build_demo(store)
    finally:
        store.dispose()
    path.with_suffix(".json").write_text(repr(summary["runs"]))
    return path


@pytest.fixture
def demo_copy(demo_path, tmp_path) -> Path:
    target = tmp_path / "demo.sqlite"
    for suffix in ("", "-wal", "-shm"):
        src = Path(str(demo_path) + suffix)
        if src.exists():
            shutil.copy(src, str(target) + suffix)
    return target
