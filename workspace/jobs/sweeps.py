"""A sweep computing in a spawned process, with per-task progress and cancellation (for the UI).

Like :class:`workspace.jobs.RunJob`: the child records the sweep, runs its tasks
through :func:`workspace.services.sweeps.run_sweep` (each task an ordinary run
with short write transactions) and reports events on a queue; the parent polls.

Events (plain dicts): ``{"type": "started", "sweep": id}``,
``{"type": "progress", "done": int, "total": int, "elapsed_s": float, "task": str, "stage": str}``,
``{"type": "finished", "sweep": id, "status": "done"|"failed"|"cancelled", "message": str|None}``.
Cancelling keeps the finished runs; the sweep is recorded ``cancelled``.
"""

from __future__ import annotations

import multiprocessing as mp
import queue as queue_module
from typing import Any


def _child(store_url: str, spec: dict[str, Any], events, stop) -> None:
    """Entry point of the spawned process (top-level so ``spawn`` can import it)."""
    import time

    from workspace.errors import Cancelled, CutbookError
    from workspace.services import sweeps
    from workspace.services.store import open_workspace

    sweep_id = None
    try:
        store = open_workspace(store_url)
        sweep_id = sweeps.create_sweep(store, sweeps.SweepSpec(**spec))
        events.put({"type": "started", "sweep": sweep_id})
        last = [0.0]

        def progress(ev: dict[str, Any]) -> None:
            now = time.monotonic()
            if ev["stage"] == "stored" or now - last[0] >= 0.1:
                last[0] = now
                events.put({"type": "progress", **{k: ev[k] for k in ("done", "total", "elapsed_s", "task",
                                                                      "stage")}})

        res = sweeps.run_sweep(store, sweep_id, progress=progress, cancel=stop.is_set)
        events.put({"type": "finished", "sweep": sweep_id, "status": res["status"], "message": res["error"]})
    except Cancelled as exc:
        events.put({"type": "finished", "sweep": sweep_id, "status": "cancelled", "message": str(exc)})
    except CutbookError as exc:
        events.put({"type": "finished", "sweep": sweep_id, "status": "failed", "message": str(exc)})
    except BaseException as exc:  # report, never die silently
        events.put({"type": "finished", "sweep": sweep_id, "status": "failed",
                    "message": f"{type(exc).__name__}: {exc}"})


class SweepJob:
    """One sweep computing in a spawned process."""

    def __init__(self, store_url: str, spec) -> None:
        ctx = mp.get_context("spawn")
        self.spec = spec
        self._events = ctx.Queue()
        self._stop = ctx.Event()
        self._process = ctx.Process(target=_child, args=(store_url, spec.to_dict(), self._events, self._stop),
                                    daemon=True, name="cutbook-sweep")
        self.sweep_id: int | None = None
        self.status: str | None = None
        self.message: str | None = None
        self.last_progress: dict[str, Any] | None = None

    def start(self) -> "SweepJob":
        self._process.start()
        return self

    def cancel(self) -> None:
        """Ask the child to stop at its next check (inside the solver, or between tasks)."""
        self._stop.set()

    def poll(self) -> list[dict[str, Any]]:
        """Events that arrived since the last call (never blocks)."""
        out = []
        while True:
            try:
                ev = self._events.get_nowait()
            except queue_module.Empty:
                break
            self._absorb(ev)
            out.append(ev)
        if self.status is None and not self._process.is_alive() and self._process.exitcode is not None:
            try:
                ev = self._events.get(timeout=0.5)
                self._absorb(ev)
                return out + [ev] + self.poll()
            except queue_module.Empty:
                pass
            self.status = "interrupted"
            self.message = f"the sweep process stopped (exit code {self._process.exitcode})"
            out.append({"type": "finished", "sweep": self.sweep_id, "status": "interrupted", "message": self.message})
        return out

    def _absorb(self, ev: dict[str, Any]) -> None:
        if ev["type"] == "started":
            self.sweep_id = ev["sweep"]
        elif ev["type"] == "progress":
            self.last_progress = ev
        elif ev["type"] == "finished":
            self.sweep_id = ev["sweep"] if ev["sweep"] is not None else self.sweep_id
            self.status, self.message = ev["status"], ev["message"]

    @property
    def finished(self) -> bool:
        return self.status is not None

    def wait(self, timeout: float | None = None) -> list[dict[str, Any]]:
        import time

        events: list[dict[str, Any]] = []
        deadline = None if timeout is None else time.monotonic() + timeout
        while not self.finished:
            events.extend(self.poll())
            if deadline is not None and time.monotonic() > deadline:
                break
            time.sleep(0.02)
        self._process.join(timeout=5)
        events.extend(self.poll())
        return events

    def kill(self) -> None:
        if self._process.is_alive():
            self._process.kill()
        self._process.join(timeout=5)
