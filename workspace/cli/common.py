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


def warm_imports(*modules: str):
    """Import ``modules`` on a background thread while the caller starts on other work.

    For commands whose first step spends most of its time outside the interpreter lock
    (Arrow's CSV reader and hash kernels, numpy sorts): the store layer then loads on the
    other core instead of before or after that work. The caller must ``join()`` the returned
    (started, daemon) thread before it imports any package of ``modules`` itself: one package
    must never be imported by two threads at once (lazy submodule loading, as in SciPy, is not
    safe for that). A failure here is ignored: the caller's own import raises it.
    """
    import threading

    def run() -> None:
        import importlib

        for name in modules:
            try:
                importlib.import_module(name)
            except BaseException:  # noqa: BLE001 - the caller's own import reports it
                return

    thread = threading.Thread(target=run, name="cutbook-warm-imports", daemon=True)
    thread.start()
    return thread


@contextmanager
def progress_bar(enabled: bool = True):
    bar = ProgressBar(enabled)
    try:
        yield bar
    finally:
        bar.close()


__all__ = ["session", "progress_bar", "warm_imports", "emit_json", "Out"]
