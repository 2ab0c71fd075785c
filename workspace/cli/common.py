"""Small helpers shared by the command modules."""

from __future__ import annotations

import os
from contextlib import contextmanager

from workspace.cli.output import Out, ProgressBar, emit_json


def resume_collector() -> None:
    """Re-enable the cyclic garbage collector after a command paused it (``gc.disable()``).

    In the console script (:data:`workspace.cli.PROCESS_ENDS_AFTER_COMMAND`) the objects made meanwhile (chiefly the modules loaded for the
    command, about 120k objects for an import) are first moved to the collector's permanent
    generation (``gc.freeze()``): they live until the process ends anyway, and otherwise the
    first collection after re-enabling walks all of them (38 ms at the end of a 2M-edge import).
    Objects are still freed by reference counting; only cycles among them are left to the exit.
    In a longer-lived process the collector is simply re-enabled.
    """
    import gc

    import workspace.cli

    if workspace.cli.PROCESS_ENDS_AFTER_COMMAND:
        gc.freeze()
    gc.enable()


def _explicit_store(args) -> str | None:
    from workspace.services.store import ENV_STORE

    return getattr(args, "store", None) or os.environ.get(ENV_STORE) or None


def demo_hint(args) -> str | None:
    """Where the demo store is, when the default store is in use and the demo has been built elsewhere."""
    if _explicit_store(args) is not None:
        return None
    from workspace.services.store import default_demo_path

    demo = default_demo_path()
    if not demo.is_file():
        return None
    return (f"the demo workspace has its own store: add --store {demo} "
            f"(or export CUTBOOK_STORE={demo}) to see it")


@contextmanager
def session(args, *, writes: bool = False, create: bool | None = None):
    """Open the store named by --store/env/default; yield (store, out).

    ``create`` defaults to ``writes``; commands that change records which must already
    exist (delete, delete-run, note, tag, untag) pass ``writes=True, create=False``: they
    are refused at once on a read-only store and never make a new one.
    Commands that write (``writes=True``) may create a new store (and, for the
    default location only, its folders) and are refused at once on a store that
    cannot be written. Commands that only read never create anything: a path
    with no store gives "no store here" (exit 10), and a read-only store opens
    for reading.
    """
    from workspace.errors import StoreMissing
    from workspace.services.store import open_workspace

    out = Out(bool(getattr(args, "json", False)))
    explicit = _explicit_store(args)
    create = writes if create is None else create
    try:
        store = open_workspace(explicit, notify=out.note, create=create, create_dirs=explicit is None,
                               require_write=writes, user=getattr(args, "user", None))
    except StoreMissing as exc:
        hint = demo_hint(args)
        if explicit is None and hint:
            exc.message = (f"no store yet in the default place — {hint}; `cutbook import FILE --project P "
                           "--network N` starts your own")
        elif explicit is None:
            exc.message = ("no store yet in the default place; start one with `cutbook import FILE --project P "
                           "--network N`, or build the demo with `cutbook demo`")
        raise
    try:
        if not writes and explicit is None:
            hint = demo_hint(args)
            if hint and _is_empty(store):
                out.note(f"cutbook: {hint}")
        yield store, out
    finally:
        store.dispose()


@contextmanager
def read_session(args):
    """:func:`session` for the listings of :mod:`workspace.services.quickread`: yields ``(store, out)``
    where ``store`` is a :class:`~workspace.services.quickread.QuickStore` (plain sqlite3, no
    SQLAlchemy to load) when the store allows it, else the full store from :func:`session`. Pass it
    only to the ``quickread`` functions, which fall back to the full services themselves."""
    from workspace.services import quickread

    out = Out(bool(getattr(args, "json", False)))
    explicit = _explicit_store(args)
    store = quickread.open_quick(explicit, notify=out.note, user=getattr(args, "user", None))
    if store is None:
        with session(args) as pair:
            yield pair
        return
    try:
        if explicit is None:
            hint = demo_hint(args)
            if hint and quickread.is_empty(store):
                out.note(f"cutbook: {hint}")
        yield store, out
    finally:
        store.dispose()


def _is_empty(store) -> bool:
    from workspace.services.networks import list_projects

    return not list_projects(store)


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


def confirmed(what: str, question: str, answer: str) -> bool:
    """Ask on the terminal before a deletion; True only when ``answer`` is typed back.

    Without a terminal (scripts, pipes) this raises a usage error that names ``--yes``,
    so nothing is ever deleted unasked. ``question`` may hold several lines.
    """
    import sys

    from workspace.errors import UsageError

    if not sys.stdin.isatty():
        raise UsageError(f"deleting {what} needs confirmation: run it in a terminal or add --yes")
    sys.stderr.write(f"{question}\ntype {answer} and press Enter to delete (anything else keeps it): ")
    sys.stderr.flush()
    return " ".join(sys.stdin.readline().split()) == answer


@contextmanager
def progress_bar(enabled: bool = True):
    bar = ProgressBar(enabled)
    try:
        yield bar
    finally:
        bar.close()


__all__ = ["confirmed", "session", "read_session", "progress_bar", "warm_imports", "emit_json", "Out", "demo_hint"]
