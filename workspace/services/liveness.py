"""Which recorded runs are still computing: process identity and the ``interrupted`` sweep.

Kept apart from :mod:`workspace.services.runs` so that opening a store (which marks runs
whose process has vanished) loads only this small module, not the whole run service.
"""

from __future__ import annotations

import os
import socket

from sqlalchemy import text, update

from workspace.store.db import Store
from workspace.store.schema import Run


def _process_token(pid: int) -> str | None:
    """pid plus the process start time from /proc, so a reused pid is not mistaken for ours."""
    try:
        with open(f"/proc/{pid}/stat", "rb") as fh:
            stat = fh.read().decode(errors="replace")
        return f"{pid}:{stat.rsplit(')', 1)[1].split()[19]}"
    except (OSError, IndexError):
        return None


def _process_alive(pid: int, token: str | None) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    if token is not None:
        current = _process_token(pid)
        if current is not None and current != token:
            return False
    return True


_RUNNING_HERE = text("SELECT id, pid, process_token FROM runs WHERE status = 'running' AND host = :host")


def mark_interrupted(store: Store) -> list[int]:
    """Mark ``running`` runs of this host whose process is gone as ``interrupted``."""
    from workspace.store.repo import utcnow

    host = socket.gethostname()
    with store.read() as s:  # plain SQL: every command runs this on open, and compiling an ORM select costs more
        rows = s.execute(_RUNNING_HERE, {"host": host}).all()
    gone = [r.id for r in rows if r.pid is not None and not _process_alive(r.pid, r.process_token)]
    if gone:
        with store.write() as s:
            s.execute(update(Run).where(Run.id.in_(gone), Run.status == "running").values(
                status="interrupted", finished_at=utcnow(),
                error="the process running it stopped before it finished"))
    return gone
