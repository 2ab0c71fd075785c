"""Building the demo workspace (the scenario lives in workspace.demo)."""

from __future__ import annotations

from typing import Callable

from workspace.services.networks import list_projects
from workspace.services.store import open_workspace


def demo_exists(store_arg: str, *, create_dirs: bool = True) -> str:
    """``"empty"`` (no projects), ``"demo"`` (the demo's projects) or ``"other"``.

    ``create_dirs=False`` (a store named by the user): a missing folder is an error, not made.
    """
    from workspace.demo.build import CITY, LAB

    store = open_workspace(store_arg, create_dirs=create_dirs)
    try:
        names = {p["project"] for p in list_projects(store)}
    finally:
        store.dispose()
    if not names:
        return "empty"
    return "demo" if names == {CITY, LAB} else "other"


def build_demo_store(store_arg: str, *, say: Callable[[str], None] = lambda s: None) -> dict:
    from workspace.demo.build import build_demo

    store = open_workspace(store_arg, require_write=True)
    try:
        return build_demo(store, say=say)
    finally:
        store.dispose()
