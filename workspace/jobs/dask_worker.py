"""What runs on Dask workers for a sweep (imported only where ``distributed`` is installed).

The graph goes to each worker exactly once, as a worker plugin (:class:`GraphOnWorkers`): Dask sends a
registered plugin to every worker of the cluster, including one that joins later (a replacement for a
worker that died), and the plugin keeps the graph in this module under a token for the sweep's tasks.
Scattered data would not do: the scheduler's memory manager drops the extra replicas of scattered data,
so a worker would fetch the graph again for each task. The token's graph is removed when the sweep
unregisters the plugin.
"""

from __future__ import annotations

from typing import Any

from distributed.diagnostics.plugin import WorkerPlugin

_GRAPHS: dict[str, Any] = {}
INSTALLS: dict[str, int] = {}   # token -> times this worker process received the graph (read by tests)


class GraphOnWorkers(WorkerPlugin):
    """Holds one sweep's graph; ``setup`` on each worker stores it under ``token``."""

    def __init__(self, token: str, graph) -> None:
        self.token = token
        self.graph = graph

    def setup(self, worker) -> None:
        _GRAPHS[self.token] = self.graph
        INSTALLS[self.token] = INSTALLS.get(self.token, 0) + 1

    def teardown(self, worker) -> None:
        _GRAPHS.pop(self.token, None)


def graph(token: str):
    """The graph installed under ``token`` on this worker."""
    try:
        return _GRAPHS[token]
    except KeyError:
        raise RuntimeError(f"this worker holds no graph for sweep token {token}") from None


def installs(token: str) -> int:
    return INSTALLS.get(token, 0)
