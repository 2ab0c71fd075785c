"""Where a sweep's tasks compute: threads of this process (``local``) or a Dask cluster (``dask``).

The local executor is the default (threads of the client; numpy releases the GIL). The Dask
executor hands each task — one partition computation: a k, a parameter value, a seed, a
perturbation — to the workers of a ``distributed`` cluster: a ``LocalCluster`` of worker
processes started on this machine for the sweep (``workers``), or an existing scheduler
(``scheduler``, or the ``CUTBOOK_SCHEDULER`` environment variable).

What travels to the workers: the graph's edges and weights (scattered once to every worker, with
plain integer positions in place of the node ids), the method's parameters, the seeds, and the
shared embeddings the k tasks of one (value, repeat) need. What does not: the store, its URL or
credentials, node ids, files. Workers return memberships, eigenvalues, measures and their package
versions; only the client writes to the store (short transactions as tasks finish).

The functions :func:`embedding_task`, :func:`embedding_summary` and :func:`partition_task` run
on the workers; they are top-level so a worker imports them from the installed package. The graph
reaches each worker once, as a worker plugin (:mod:`workspace.jobs.dask_worker`).
"""

from __future__ import annotations

import os
from dataclasses import asdict, dataclass
from typing import Any

from workspace.errors import UsageError, redact

SCHEDULER_ENV = "CUTBOOK_SCHEDULER"
EXECUTORS = ("local", "dask")
MAX_LOCAL_WORKERS = 64
CONNECT_TIMEOUT_S = 20


@dataclass(frozen=True)
class ExecutorSpec:
    """Which executor computes a sweep's tasks.

    ``kind``: ``local`` (threads of this process; ``workers`` threads) or ``dask`` (``scheduler``
    address of an existing cluster, else a ``LocalCluster`` of ``workers`` processes on this machine).
    """

    kind: str = "local"
    workers: int | None = None
    scheduler: str | None = None

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)

    @property
    def label(self) -> str:
        """One line for progress messages (never a password)."""
        if self.kind == "local":
            return "this process"
        if self.scheduler:
            return f"Dask scheduler {redact(self.scheduler)}"
        return f"Dask on this machine ({self.workers or default_local_workers()} worker processes)"


def keep_malloc_adaptive() -> None:
    """Start LocalCluster workers without ``MALLOC_TRIM_THRESHOLD_``.

    Dask's nanny sets it (65536) in every worker it spawns, to return memory to the system sooner.
    Setting the trim threshold turns off glibc's dynamic mmap threshold (GNU C Library manual,
    "Memory Allocation Tunables", M_TRIM_THRESHOLD), so every array above 128 KiB is mapped and
    unmapped afresh. With an eigensolver allocating vectors of n floats at each product that cost a
    lot: a 32-task sweep on 100k nodes took 69.6 s on one such worker against 51.1 s in the client's
    own thread, and 50.9 s on a worker without the setting (tests/benchmarks/bench_dask.py). The
    setting is left out for the clusters cutbook starts (the nanny reads it when it spawns a worker,
    a restarted one included, so it is set for this process); an existing cluster's workers keep
    whatever their administrator chose (README: "Sweeps on a cluster").
    """
    import dask

    env = dict(dask.config.get("distributed.nanny.pre-spawn-environ", default={}) or {})
    if env.pop("MALLOC_TRIM_THRESHOLD_", None) is not None:
        dask.config.set({"distributed.nanny.pre-spawn-environ": env})


class _EnvironmentSnapshot:
    """This process's environment as it was when made; :meth:`restore` puts back the variables that
    changed since (and removes those added).

    Dask's nanny runs in the client process of a LocalCluster and writes its pre-spawn variables
    (``OMP_NUM_THREADS=1``, ``MKL_NUM_THREADS=1``, ``OPENBLAS_NUM_THREADS=1``, ``PYTHONHASHSEED``,
    ``__DASK_PARENT_PID``) into ``os.environ`` for good before it spawns each worker, so every process
    the client started later (a script or notebook that sweeps and then starts processes; every
    interpreter later tests start) got one BLAS thread (``workspace.spectral.eigen.SOLVE_BLAS_THREADS``:
    a slower solve, other last bits). The terminal UI sweeps in a process of its own, which ends.
    """

    def __init__(self) -> None:
        self.before = dict(os.environ)

    def restore(self) -> None:
        for name in [k for k in os.environ if k not in self.before]:
            os.environ.pop(name, None)
        for name, value in self.before.items():
            if os.environ.get(name) != value:
                os.environ[name] = value


def default_local_workers() -> int:
    """Worker processes of a LocalCluster when not given: the CPUs available, at most 4."""
    from workspace.domain import available_cpus

    return min(available_cpus(), 4)


def executor_from_options(executor: str | None = None, *, workers: int | None = None,
                          scheduler: str | None = None, environ=None) -> ExecutorSpec:
    """The executor a command asked for (validated; nothing is started).

    ``--scheduler`` (or ``CUTBOOK_SCHEDULER`` when ``--executor`` is not ``local``) selects Dask on that
    scheduler; ``--executor dask`` without one starts a LocalCluster of ``workers`` processes.
    """
    env = os.environ if environ is None else environ
    if executor is not None and executor not in EXECUTORS:
        raise UsageError(f"--executor takes one of {', '.join(EXECUTORS)} (got {executor!r})")
    if workers is not None and (not isinstance(workers, int) or not 1 <= workers <= MAX_LOCAL_WORKERS):
        raise UsageError(f"--workers must be a whole number from 1 to {MAX_LOCAL_WORKERS} (got {workers!r})")
    if scheduler is not None and executor == "local":
        raise UsageError("--scheduler needs the Dask executor; leave out --executor local")
    if scheduler is None and executor != "local":
        scheduler = (env.get(SCHEDULER_ENV) or "").strip() or None
    if scheduler is not None:
        scheduler = check_scheduler_address(scheduler)
        return ExecutorSpec(kind="dask", workers=workers, scheduler=scheduler)
    if executor == "dask":
        return ExecutorSpec(kind="dask", workers=workers or default_local_workers())
    return ExecutorSpec(kind="local", workers=workers)


def check_scheduler_address(address: str) -> str:
    """``tcp://host:port`` (or ``tls://``, ``ws://``, ``wss://``; ``host:port`` means tcp)."""
    text = address.strip()
    if "://" not in text:
        text = "tcp://" + text
    scheme, _, rest = text.partition("://")
    host, sep, port = rest.rpartition(":")
    if scheme not in ("tcp", "tls", "ws", "wss") or not sep or not host or not port.isdigit() \
            or not 0 < int(port) < 65536:
        raise UsageError(f"a scheduler address looks like tcp://host:8786 (got {redact(address)!r})")
    return text


def executor_from_text(text: str | None, environ=None) -> ExecutorSpec:
    """The UI's "sweep on" box: empty = this process (or ``CUTBOOK_SCHEDULER`` when set), ``local`` = this
    process, a number N = a LocalCluster of N worker processes, an address = that Dask scheduler."""
    value = (text or "").strip()
    if not value:
        return executor_from_options(None, environ=environ)
    if value.lower() == "local":
        return ExecutorSpec(kind="local")
    if value.isdigit():
        return executor_from_options("dask", workers=int(value), environ={})
    return executor_from_options("dask", scheduler=value)


# --- the cluster ---------------------------------------------------------------------------------------

def _distributed():
    try:
        import distributed
    except ImportError:
        raise UsageError("the Dask executor needs the optional package 'distributed': "
                         "pip install 'cutbook[dask]'") from None
    return distributed


class DaskCluster:
    """A connected Dask client (and the LocalCluster it started, if any) for the length of a sweep."""

    kind = "dask"

    def __init__(self, spec: ExecutorSpec) -> None:
        self.spec = spec
        self.client = None
        self.cluster = None
        self._graph_tokens: list[str] = []
        self._environment: _EnvironmentSnapshot | None = None

    def __enter__(self) -> "DaskCluster":
        from workspace.errors import ComputeError

        distributed = _distributed()
        try:
            if self.spec.scheduler:
                self.client = distributed.Client(self.spec.scheduler, timeout=CONNECT_TIMEOUT_S,
                                                 set_as_default=False)
            else:
                keep_malloc_adaptive()
                self._environment = _EnvironmentSnapshot()
                self.cluster = distributed.LocalCluster(
                    n_workers=self.spec.workers or default_local_workers(), threads_per_worker=1, processes=True,
                    host="127.0.0.1", dashboard_address=None, silence_logs=40)
                self._environment.restore()      # the workers are spawned: their variables are theirs
                self.client = distributed.Client(self.cluster, set_as_default=False)
        except (OSError, TimeoutError) as exc:
            self.__exit__(None, None, None)
            where = redact(self.spec.scheduler) if self.spec.scheduler else "a LocalCluster on this machine"
            raise ComputeError(f"cannot reach the Dask scheduler at {where}: {redact(str(exc))}") from None
        return self

    def __exit__(self, *exc) -> None:
        if exc and exc[0] is not None and self.cluster is not None:
            # cancelled or failed: the LocalCluster's workers may be inside a long task that a graceful
            # close waits out (about 4 s before the nanny gives up); they are ours and go at once
            self._stop_own_workers()
        for token in self._graph_tokens:     # the workers let go of the graph
            try:
                self.client.unregister_worker_plugin(token)
            except Exception:  # noqa: BLE001 - a cluster that is going away drops it anyway
                pass
        self._graph_tokens = []
        for thing in (self.client, self.cluster):
            if thing is not None:
                try:
                    thing.close()
                except Exception:  # noqa: BLE001 - closing must not hide the sweep's own outcome
                    pass
        self.client = self.cluster = None
        if self._environment is not None:      # a worker the nanny restarted wrote them again
            self._environment.restore()
            self._environment = None

    def _stop_own_workers(self) -> None:
        """SIGKILL the worker processes of the LocalCluster this object started (never a remote one)."""
        import signal

        self._graph_tokens = []          # nothing left to unregister from
        for nanny in list(getattr(self.cluster, "workers", {}).values()):
            proc = getattr(getattr(nanny, "process", None), "process", None)
            pid = getattr(proc, "pid", None)
            if pid:
                try:
                    os.kill(pid, signal.SIGKILL)
                except OSError:
                    pass

    @property
    def label(self) -> str:
        return self.spec.label

    @property
    def address(self) -> str:
        return self.client.scheduler.address

    def worker_count(self) -> int:
        return len(self.client.scheduler_info(n_workers=-1).get("workers", {})) if self.client else 0

    def threads(self) -> int:
        info = self.client.scheduler_info(n_workers=-1).get("workers", {})
        return max(1, sum(int(w.get("nthreads", 1)) for w in info.values()))

    def install_graph(self, graph) -> str:
        """Send the graph (node ids left out) to every worker once, present and future; returns its token."""
        import uuid

        from workspace.jobs.dask_worker import GraphOnWorkers

        token = f"cutbook-graph-{uuid.uuid4().hex}"
        self.client.register_plugin(GraphOnWorkers(token, graph_for_workers(graph)), name=token)
        self._graph_tokens.append(token)
        return token

    def describe(self) -> dict[str, Any]:
        """The executor as recorded in each run's provenance (the address without credentials)."""
        import distributed

        return {"kind": "dask", "cluster": "scheduler" if self.spec.scheduler else "local",
                "scheduler": redact(self.address), "workers": self.worker_count(),
                "distributed": distributed.__version__}


def local_description(threads: int) -> dict[str, Any]:
    return {"kind": "local", "threads": int(threads)}


# --- on the workers ------------------------------------------------------------------------------------

def graph_for_workers(graph):
    """The graph as sent to workers: the same edges, weights and direction; node ids replaced by their
    positions (the computation never reads them, and they stay on the client)."""
    import numpy as np

    from workspace.domain import GraphData

    return GraphData(node_ids=np.arange(graph.n_nodes, dtype=np.int64), edge_u=graph.edge_u, edge_v=graph.edge_v,
                     weight=graph.weight, directed=graph.directed)


_WORKER_INFO: dict[str, Any] = {}


def worker_provenance() -> dict[str, Any]:
    """Host and package versions of the process computing a task (and its Dask worker address)."""
    if not _WORKER_INFO:
        from workspace.services.runs import provenance

        _WORKER_INFO.update(provenance())
        try:
            from distributed import get_worker

            _WORKER_INFO["worker"] = redact(get_worker().address)
        except (ImportError, ValueError):
            pass
    return dict(_WORKER_INFO)


def embedding_task(graph_token: str, method: str, n_vectors: int, seed: int, params: dict[str, Any],
                   perturb: float = 0.0, perturb_seed: int | None = None):
    """The shared embedding of one (value, repeat): exactly what the local executor solves
    (:func:`workspace.spectral.sweep.compute_embedding`, on the graph perturbed with ``perturb_seed``
    when ``perturb`` > 0). Returns the Embedding or None (several components: each k solves alone)."""
    from workspace.jobs.dask_worker import graph
    from workspace.spectral.sweep import compute_embedding, perturbed_adjacency

    A = graph(graph_token).adjacency()
    if perturb > 0:
        A = perturbed_adjacency(A, perturb, perturb_seed)
    return compute_embedding(A, method, n_vectors, seed=seed, **params)


def embedding_summary(embedding) -> dict[str, Any] | None:
    """What the client records about a shared embedding without fetching its vectors."""
    if embedding is None:
        return None
    return {"n_vectors": int(embedding.n_vectors), "operator": embedding.operator}


def partition_task(graph_token: str, spec: dict[str, Any], embedding=None) -> dict[str, Any]:
    """One partition computation (:func:`workspace.services.runs.compute`), as the local executor does it.

    Returns ``{"computed": Computed, "worker": {...}}``, or ``{"error": message, "worker": {...}}`` for the
    failures the local executor records as a failed run (other exceptions propagate and are recorded by
    the client with their type and message).
    """
    import numpy as np

    from workspace.errors import CutbookError
    from workspace.jobs.dask_worker import graph
    from workspace.services.runs import RunSpec, compute

    info = worker_provenance()
    try:
        return {"computed": compute(graph(graph_token), RunSpec(**spec), embedding=embedding), "worker": info}
    except CutbookError as exc:
        return {"error": str(exc), "worker": info}
    except (ArithmeticError, ValueError, RuntimeError, MemoryError, np.linalg.LinAlgError) as exc:
        return {"error": f"{type(exc).__name__}: {exc}", "worker": info}
