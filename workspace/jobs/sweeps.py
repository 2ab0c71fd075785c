"""A sweep computing in a spawned process, with per-task progress and cancellation (for the UI).

Like :class:`workspace.jobs.RunJob`: the child records the sweep, runs its tasks
through :func:`workspace.services.sweeps.run_sweep` (each task an ordinary run
with short write transactions) and reports events on a queue; the parent polls.

Events (plain dicts): ``{"type": "started", "sweep": id}``,
``{"type": "progress", "done": int, "total": int, "failed": int, "elapsed_s": float, "task": str, "stage": str}``,
``{"type": "finished", "sweep": id, "status": "done"|"failed"|"cancelled", "message": str|None}``.
Cancelling keeps the finished runs; the sweep is recorded ``cancelled``. The tasks compute in the
child's threads, or on a Dask cluster (``executor``, see :mod:`workspace.jobs.executors`); a child that
starts a LocalCluster is not a daemon process (those may not start processes of their own).
"""

from __future__ import annotations

from typing import Any

from workspace.jobs import ChildJob


def _child(store_url: str, payload: dict[str, Any], events, stop) -> None:
    """Entry point of the spawned process (top-level so ``spawn`` can import it)."""
    import time

    from workspace.errors import Cancelled, CutbookError
    from workspace.services import sweeps
    from workspace.services.store import open_workspace

    sweep_id = None
    try:
        store = open_workspace(store_url)
        spec, executor = payload["spec"], payload.get("executor")
        with sweeps._connected(executor) as executor:   # a Dask cluster is reached before the sweep is recorded
            sweep_id = sweeps.create_sweep(store, sweeps.SweepSpec(**spec))
            events.put({"type": "started", "sweep": sweep_id})
            last = [0.0]

            def progress(ev: dict[str, Any]) -> None:
                now = time.monotonic()
                if ev["stage"] == "stored" or now - last[0] >= 0.1:
                    last[0] = now
                    events.put({"type": "progress", **{k: ev[k] for k in ("done", "total", "failed", "elapsed_s",
                                                                          "task", "stage")}})

            res = sweeps.run_sweep(store, sweep_id, progress=progress, cancel=stop.is_set, executor=executor)
        events.put({"type": "finished", "sweep": sweep_id, "status": res["status"], "message": res["error"]})
    except Cancelled as exc:
        events.put({"type": "finished", "sweep": sweep_id, "status": "cancelled", "message": str(exc)})
    except CutbookError as exc:
        events.put({"type": "finished", "sweep": sweep_id, "status": "failed", "message": str(exc)})
    except BaseException as exc:  # report, never die silently
        events.put({"type": "finished", "sweep": sweep_id, "status": "failed",
                    "message": f"{type(exc).__name__}: {exc}"})


class SweepJob(ChildJob):
    """One sweep computing in a spawned process (``last_progress``: its newest progress event)."""

    KEY = WHAT = "sweep"

    def __init__(self, store_url: str, spec, executor=None) -> None:
        """``executor``: a :class:`workspace.jobs.executors.ExecutorSpec` (default: the child's threads)."""
        ex = None if executor is None else executor.to_dict()
        starts_processes = ex is not None and ex["kind"] == "dask" and not ex.get("scheduler")
        super().__init__(store_url, spec, _child, "cutbook-sweep", payload={"spec": spec.to_dict(), "executor": ex},
                         daemon=not starts_processes)
        self.executor = executor
        self.last_progress: dict[str, Any] | None = None

    @property
    def sweep_id(self) -> int | None:
        return self.record_id

    def _absorb(self, ev: dict[str, Any]) -> None:
        if ev["type"] == "progress":
            self.last_progress = ev
        super()._absorb(ev)
