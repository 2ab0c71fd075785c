"""Run execution in a spawned process, with progress events and cancellation.

The terminal UI must stay responsive while a solver runs; a thread would stall
its event loop (the GIL), so each run gets its own *spawned* process. The child
records the run (its own pid, so a killed child is later marked
``interrupted``), computes, and stores the outcome; the parent reads events
from a queue and can ask the child to stop.

Events (plain dicts): ``{"type": "started", "run": id}``,
``{"type": "progress", "stage": str, "done": int, "total": int|None}``,
``{"type": "finished", "run": id, "status": "done"|"failed"|"cancelled", "message": str|None}``.
"""

from __future__ import annotations

import multiprocessing as mp
import queue as queue_module
from typing import Any

from workspace.services.runs import RunSpec


def _child(store_url: str, spec: dict[str, Any], events, stop) -> None:
    """Entry point of the spawned process (top-level so ``spawn`` can import it)."""
    import time

    from workspace.errors import Cancelled, ComputeError, CutbookError
    from workspace.services import runs
    from workspace.services.store import open_workspace

    run_id = None
    try:
        store = open_workspace(store_url, create=False, require_write=True)
        spec_obj = RunSpec(**spec)
        built, warm_block, warm_info = runs.solver_input(store, spec_obj)   # as launch prepares it
        run_id = runs._insert_running(store, spec_obj)
        events.put({"type": "started", "run": run_id})
        last = [0.0]

        def progress(stage: str, done: int, total: int | None = None) -> None:
            now = time.monotonic()
            if now - last[0] >= 0.05:
                last[0] = now
                events.put({"type": "progress", "stage": stage, "done": int(done), "total": total})

        runs.execute(store, run_id, spec_obj, built, progress=progress, cancel=stop.is_set,
                     warm_block=warm_block, warm_info=warm_info)
        events.put({"type": "finished", "run": run_id, "status": "done", "message": None})
    except Cancelled as exc:
        events.put({"type": "finished", "run": run_id, "status": "cancelled", "message": str(exc)})
    except (ComputeError, CutbookError) as exc:
        events.put({"type": "finished", "run": run_id, "status": "failed", "message": str(exc)})
    except BaseException as exc:  # report, never die silently
        events.put({"type": "finished", "run": run_id, "status": "failed",
                    "message": f"{type(exc).__name__}: {exc}"})


class ChildJob:
    """Work computing in a spawned process that reports through an event queue.

    The child puts ``{"type": "started", KEY: id}``, any number of ``progress`` events and one
    ``{"type": "finished", KEY: id, "status": …, "message": …}``; ``KEY`` is the record the job
    computes (``run`` or ``sweep``). A child that dies without its last word is reported
    ``interrupted`` (the store marks its records so on the next open).
    """

    KEY = "run"
    WHAT = "run"

    def __init__(self, store_url: str, spec, target, name: str, *, payload: dict[str, Any] | None = None,
                 daemon: bool = True) -> None:
        """``payload`` (default ``spec.to_dict()``) is what the child receives; ``daemon=False`` lets the child
        start processes of its own (a Dask LocalCluster)."""
        ctx = mp.get_context("spawn")
        self.spec = spec
        self._events = ctx.Queue()
        self._stop = ctx.Event()
        self._process = ctx.Process(target=target, args=(store_url, spec.to_dict() if payload is None else payload,
                                                         self._events, self._stop),
                                    daemon=daemon, name=name)
        self.record_id: int | None = None
        self.status: str | None = None
        self.message: str | None = None

    def start(self):
        self._process.start()
        return self

    def cancel(self) -> None:
        """Ask the child to stop at its next check (inside the solver's matvec, or between tasks)."""
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
            try:  # the child's last events may still be in the pipe
                ev = self._events.get(timeout=0.5)
                self._absorb(ev)
                return out + [ev] + self.poll()
            except queue_module.Empty:
                pass
            self.status = "interrupted"
            self.message = f"the {self.WHAT} process stopped (exit code {self._process.exitcode})"
            out.append({"type": "finished", self.KEY: self.record_id, "status": "interrupted",
                        "message": self.message})
        return out

    def _absorb(self, ev: dict[str, Any]) -> None:
        """Update state from an event."""
        if ev["type"] == "started":
            self.record_id = ev[self.KEY]
        elif ev["type"] == "finished":
            self.record_id = ev[self.KEY] if ev[self.KEY] is not None else self.record_id
            self.status, self.message = ev["status"], ev["message"]

    @property
    def finished(self) -> bool:
        return self.status is not None

    def wait(self, timeout: float | None = None) -> list[dict[str, Any]]:
        """Block until the child ends (or ``timeout``); return all events."""
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


class RunJob(ChildJob):
    """One run computing in a spawned process."""

    KEY = WHAT = "run"

    def __init__(self, store_url: str, spec: RunSpec) -> None:
        super().__init__(store_url, spec, _child, "cutbook-run")

    @property
    def run_id(self) -> int | None:
        return self.record_id
