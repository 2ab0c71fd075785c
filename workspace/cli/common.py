"""Small helpers shared by the command modules."""

from __future__ import annotations

from contextlib import contextmanager

from workspace.cli.output import Out, ProgressBar, emit_json


@contextmanager
def session(args):
    """Open the store named by --store/env/default; yield (store, out)."""
    from workspace.services.store import open_workspace

    out = Out(bool(getattr(args, "json", False)))
    store = open_workspace(getattr(args, "store", None), notify=out.note)
    try:
        yield store, out
    finally:
        store.dispose()


@contextmanager
def progress_bar(enabled: bool = True):
    bar = ProgressBar(enabled)
    try:
        yield bar
    finally:
        bar.close()


__all__ = ["session", "progress_bar", "emit_json", "Out"]
