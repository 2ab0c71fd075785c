"""Messages the workspace app posts between its parts.

The run job lives in a spawned process (see :mod:`workspace.jobs`); the app
polls it from a timer and turns its events into these messages, so no handler
ever blocks the event loop waiting for the solver.
"""

from __future__ import annotations

from textual.message import Message


class RunStarted(Message):
    """The spawned process recorded run ``run_id`` and began computing."""

    def __init__(self, run_id: int) -> None:
        super().__init__()
        self.run_id = run_id


class RunProgress(Message):
    """A progress report: solver ``stage`` and ``done`` steps (matvecs) of ``total`` (None = unknown)."""

    def __init__(self, stage: str, done: int, total: int | None) -> None:
        super().__init__()
        self.stage, self.done, self.total = stage, done, total


class RunEnded(Message):
    """The run ended: ``status`` is done, failed, cancelled or interrupted."""

    def __init__(self, run_id: int | None, status: str, message: str | None) -> None:
        super().__init__()
        self.run_id, self.status, self.message = run_id, status, message


class StoreChanged(Message):
    """Something new was written (a run, a parameter set): lists should count again."""


def run_end_line(run_id: int | None, status: str, message: str | None) -> str:
    """``run 13 failed: <why>`` — the message only when it says more than the status does.

    A cancelled run's message is often just ``run 13 cancelled``; repeating it
    read as ``run 13 cancelled — run 13 cancelled``.
    """
    head = f"run {run_id if run_id is not None else '?'} {status}"
    msg = (message or "").strip()
    if not msg or status == "done" or msg.lower() in (status, head.lower(), f"{head.lower()}.") \
            or msg.lower().rstrip(".") == head.lower():
        return head
    return f"{head}: {msg}"
