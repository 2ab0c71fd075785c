"""Opening a workspace store (front ends call this, never workspace.store directly)."""

from __future__ import annotations

import os
from typing import Callable

from workspace.store.db import HEAD_REVISION, Store, _current_revision, _make_engine, migrate, resolve_store_url


def open_workspace(store: str | os.PathLike | None = None, *,
                   notify: Callable[[str], None] | None = None) -> Store:
    """Open the store (creating it if new), upgrading its schema first when needed.

    A store that already holds data is copied before an upgrade; ``notify``
    receives a one-line message naming the copy. Later revisions also mark runs
    whose process has vanished as interrupted here.
    """
    url = resolve_store_url(store)
    engine = _make_engine(url)
    with engine.connect() as conn:
        current = _current_revision(conn)
        conn.rollback()
    if current != HEAD_REVISION:
        backup = migrate(url)
        if backup is not None and notify:
            notify(f"cutbook: store upgraded to the current schema; previous copy kept at {backup}")
    store = Store(url, engine)
    from workspace.services.runs import mark_interrupted

    gone = mark_interrupted(store)
    if gone and notify:
        notify(f"cutbook: marked {len(gone)} run(s) interrupted (their process is gone): "
               + ", ".join(map(str, gone)))
    return store
