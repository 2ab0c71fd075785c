"""Partition runs: launch, record, rerun, attach, list, show, export, node lookup.

A run is written twice: a ``running`` record before compute (so other
processes see it), then its outcome in one short transaction. No write
transaction is held while computing. A process that vanishes leaves a
``running`` record that the next open of the store marks ``interrupted``.
"""

from __future__ import annotations

import json
import os
import platform
import socket
from dataclasses import asdict, dataclass, field
from typing import TYPE_CHECKING, Any, Callable

from sqlalchemy import delete, select

from workspace.domain import GraphData, VersionRef, canonical_labels, compact_label_dtype, membership_hash
from workspace.errors import Cancelled, ComputeError, CutbookError, NotFoundError, ParameterError, UsageError
from workspace.services import iso_time
from workspace.services.liveness import _process_token, mark_interrupted  # noqa: F401 (mark_interrupted: public here too)
from workspace.services import params as params_service
from workspace.services.networks import resolve_version
from workspace.store import repo
from workspace.store.db import Store
from workspace.store.schema import Network, NetworkVersion, Project, Run, RunCommunity, RunMeasure

if TYPE_CHECKING:  # numpy loads inside the functions that use it (quick CLI start-up)
    import numpy as np

Progress = Callable[[str, int, int | None], None]
MAX_REPEATS = 500
DEFAULT_PERTURB = 0.5  # sd of the multiplicative edge-weight noise of each repeat


@dataclass(frozen=True)
class RunSpec:
    """Everything needed to compute a run, validated; nothing is recorded yet."""

    version_ref: str
    version_id: int
    method: str
    k: str | None
    params: dict[str, Any]
    seed: int = 0
    repeats: int = 1
    perturb: float = 0.0
    param_set_version_id: int | None = None
    param_set_ref: str | None = None
    rerun_of: int | None = None
    # a k-way run that takes its eigenvectors from a shared embedding of this many vectors, solved with
    # this start-vector seed (recorded in the run's provenance; see services/sweeps.py)
    embedding_vectors: int | None = None
    embedding_seed: int | None = None
    # the warm-start source of the eigensolver ("run:<id>" or "embedding:<key>", services/warmstart.py);
    # recorded in the run's provenance as ``warm_from`` so that rerun rebuilds the same start block
    warm_from: str | None = None

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


@dataclass
class Computed:
    labels: np.ndarray
    k: int
    eigenvalues: np.ndarray
    quality: dict[str, Any]
    communities: list[dict[str, Any]]
    warnings: list[str]
    diagnostics: dict[str, Any]
    stability_counts: np.ndarray | None = None
    extra: dict[str, Any] = field(default_factory=dict)


def provenance() -> dict[str, Any]:
    import numpy as np

    import networkx
    import scipy

    import workspace

    return {"cutbook": workspace.__version__, "python": platform.python_version(), "numpy": np.__version__,
            "scipy": scipy.__version__, "networkx": networkx.__version__, "platform": platform.platform(),
            "host": socket.gethostname()}


# --- preparing ----------------------------------------------------------------------

def prepare_run(store: Store, ref: str | VersionRef, *, params_ref: str | None = None, method: str | None = None,
                sets: dict[str, Any] | None = None, k: Any = None, seed: int = 0, repeats: int = 1,
                perturb: float | None = None, warm: Any = "off") -> RunSpec:
    """Resolve and validate a run request. Raises before anything is recorded.

    ``warm``: ``"off"`` (default), ``"auto"`` (warm-start the eigensolver from the previous version's
    cached embedding of the same operator, else from its newest run of the same method, parameters and k;
    a cold run when there is none) or a run id (warm-start from that run's membership); see
    :mod:`workspace.services.warmstart`.
    """
    if (params_ref is None) == (method is None):
        raise UsageError("give either a saved parameter set (--params) or a method (--method)")
    if not isinstance(seed, int) or seed < 0 or seed >= 2**32:
        raise ParameterError(f"seed must be an integer in [0, 2^32), got {seed!r}")
    if not isinstance(repeats, int) or not 1 <= repeats <= MAX_REPEATS:
        raise ParameterError(f"repeats must be an integer from 1 to {MAX_REPEATS}, got {repeats!r}")
    if perturb is None:
        perturb = DEFAULT_PERTURB if repeats > 1 else 0.0
    if not 0.0 <= float(perturb) <= 2.0:
        raise ParameterError(f"perturb (sd of the edge-weight noise per repeat) must be in [0, 2], got {perturb!r}")
    if perturb > 0 and repeats == 1:
        raise ParameterError("perturb applies to repeated runs; give --repeats N (N >= 2) as well")
    vref = VersionRef.parse(ref) if isinstance(ref, str) else ref
    with store.read() as s:
        version = resolve_version(s, vref)
        version_ref = f"{vref.project}/{vref.network}@{version.number}"
        n_nodes = version.n_nodes
        ps_id = ps_ref = None
        if params_ref is not None:
            p_project, p_name, psv = params_service.find_params(s, params_ref)
            if p_project != vref.project:
                raise UsageError(f"parameter set {params_ref} belongs to project {p_project!r}, "
                                 f"not {vref.project!r}")
            method = psv.method
            base = json.loads(psv.values_json)
            base.update(sets or {})
            sets = base
            k = psv.k if k is None else k
            ps_id, ps_ref = psv.id, f"{p_project}/{p_name}@{psv.number}"
    k_norm, values = params_service.validate(method, k, sets or {})
    if k_norm not in (None, "auto") and int(k_norm) >= n_nodes:
        raise ParameterError(f"k={k_norm} must be smaller than the number of nodes of {version_ref} "
                             f"(n={n_nodes}); nothing was recorded")
    spec = RunSpec(version_ref=version_ref, version_id=version.id, method=method, k=k_norm, params=values,
                   seed=seed, repeats=repeats, perturb=float(perturb), param_set_version_id=ps_id,
                   param_set_ref=ps_ref)
    if warm not in (None, "off"):
        from dataclasses import replace

        from workspace.services import warmstart

        warm_from, _ = warmstart.resolve(store, spec, warm)
        spec = replace(spec, warm_from=warm_from)
    return spec


# --- computing (no store access) ------------------------------------------------------------

def _perturbed(A, spread: float, seed: int, directed: bool = False):
    """Seeded multiplicative edge-weight noise (see :func:`workspace.spectral.sweep.perturbed_adjacency`).

    A directed graph gets one Gamma factor (mean 1, sd ``spread``) per arc.
    """
    if not directed:
        from workspace.spectral.sweep import perturbed_adjacency

        return perturbed_adjacency(A, spread, seed)
    import numpy as np

    import scipy.sparse as sp

    arcs = sp.csr_array(A, copy=True)
    shape = 1.0 / spread**2
    arcs.data = arcs.data * np.random.default_rng([seed, 0x5EED]).gamma(shape, 1.0 / shape, size=arcs.nnz)
    return arcs


def compute(graph: GraphData, spec: RunSpec, *, progress: Progress | None = None,
            cancel: Callable[[], bool] | None = None, embedding=None, warm_block=None,
            warm_info: dict[str, Any] | None = None) -> Computed:
    """Run the method (``spec.repeats`` times with seeds seed … seed+N−1) on the graph.

    With repeats, each repeat multiplies edge weights by seeded random noise of
    standard deviation ``spec.perturb`` (see :func:`_perturbed`); the stored membership is the consensus (each node's most frequent
    community after matching every repeat to the first by overlap), and the
    per-node stability is the share of repeats that keep the node in it.

    A single run with ``perturb`` > 0 (a sweep's stability repeat) is computed on the graph perturbed
    with its own seed; its quality measures are those of its membership on the version's graph. With
    ``spec.embedding_vectors``, the eigenvectors come from a shared embedding (``embedding``, or solved
    here from the spec exactly as the sweep solved it). ``warm_block`` (rows in the graph's node order,
    from :func:`workspace.services.warmstart.start_block`) starts the eigensolver; ``diagnostics["warm_start"]``
    then holds ``warm_info`` and the solver's outcome (used, fallback, matvecs).
    """
    import numpy as np

    from workspace.spectral import partition
    from workspace.spectral.quality import quality_measures

    A = graph.adjacency()
    k = params_service.k_argument(spec.k)

    repeat = [0]

    def prog(stage: str, matvecs: int, total: int | None = None) -> None:
        if progress:
            label = stage if spec.repeats == 1 else f"{stage} ({repeat[0] + 1}/{spec.repeats})"
            progress(label, matvecs, total)

    if spec.repeats == 1:
        Ar = _perturbed(A, spec.perturb, spec.seed, directed=graph.directed) if spec.perturb > 0 else A
        if spec.embedding_vectors is not None and embedding is None:
            from workspace.spectral.sweep import compute_embedding

            embedding = compute_embedding(Ar, spec.method, spec.embedding_vectors, seed=spec.embedding_seed or 0,
                                          progress=prog, cancel=cancel, directed=graph.directed,
                                          **spec.params)
        res = partition(Ar, spec.method, k=k, seed=spec.seed, progress=prog, cancel=cancel, embedding=embedding,
                        directed=graph.directed, warm_start=warm_block, **spec.params)
        if warm_block is not None:
            res.diagnostics["warm_start"] = {**(warm_info or {}), **res.diagnostics.get("warm_start", {})}
        if spec.perturb > 0:
            q = quality_measures(A, res.labels, directed=graph.directed)
            communities = q.pop("communities", None) or []
            diagnostics = dict(res.diagnostics, perturb=spec.perturb)
            return Computed(labels=np.asarray(res.labels, dtype=np.int64), k=int(res.k),
                            eigenvalues=np.asarray(res.eigenvalues, dtype=np.float64), quality=q,
                            communities=communities, warnings=list(res.warnings), diagnostics=diagnostics)
        return Computed(labels=np.asarray(res.labels, dtype=np.int64), k=int(res.k),  # canonical already
                        eigenvalues=np.asarray(res.eigenvalues, dtype=np.float64), quality=dict(res.quality),
                        communities=list(res.communities), warnings=list(res.warnings),
                        diagnostics=dict(res.diagnostics))
    from workspace.compare.consensus import consensus_membership

    runs = []
    first = None
    for r in range(spec.repeats):
        if cancel is not None and cancel():
            raise Cancelled("run cancelled")
        repeat[0] = r
        Ar = _perturbed(A, spec.perturb, spec.seed + r, directed=graph.directed) if spec.perturb > 0 else A
        res = partition(Ar, spec.method, k=k, seed=spec.seed + r, progress=prog, cancel=cancel,
                        directed=graph.directed, **spec.params)
        if first is None:
            first = res
        runs.append(np.asarray(res.labels))
    labels, counts = consensus_membership(runs)
    labels = canonical_labels(labels)
    q = quality_measures(A, labels, directed=graph.directed)
    warnings = list(first.warnings)
    diagnostics = dict(first.diagnostics)
    diagnostics["repeats"] = spec.repeats
    diagnostics["perturb"] = spec.perturb
    stability = counts / spec.repeats
    diagnostics["mean_stability"] = float(stability.mean())
    communities = q.pop("communities", None) or []
    for row in communities:
        row["stability"] = float(stability[labels == row["community"]].mean())
    return Computed(labels=labels, k=int(labels.max()) + 1, eigenvalues=np.asarray(first.eigenvalues, np.float64),
                    quality=q, communities=communities, warnings=warnings, diagnostics=diagnostics,
                    stability_counts=counts)


# --- recording ---------------------------------------------------------------------------

def _insert_running(store: Store, spec: RunSpec, *, kind: str = "computed", label: str = "",
                    provenance_extra: dict[str, Any] | None = None,
                    after_insert: Callable[[Any, int], None] | None = None) -> int:
    """Record a ``running`` run in one short transaction (``after_insert(session, run_id)`` joins it)."""
    with store.write() as s:
        run = _new_run(spec, kind=kind, label=label, provenance_extra=provenance_extra)
        s.add(run)
        s.flush()
        if after_insert is not None:
            after_insert(s, run.id)
        return run.id


def _new_run(spec: RunSpec, *, kind: str = "computed", label: str = "",
             provenance_extra: dict[str, Any] | None = None) -> Run:
    """A ``running`` run record for ``spec`` (not yet added to any session)."""
    pid = os.getpid()
    return Run(version_id=spec.version_id, param_set_version_id=spec.param_set_version_id,
               rerun_of=spec.rerun_of, kind=kind, method=spec.method, label=label,
               params_json=json.dumps({**spec.params, "perturb": spec.perturb} if spec.repeats > 1
                                      or spec.perturb > 0 else spec.params, sort_keys=True),
               k_requested=spec.k, seed=spec.seed if kind == "computed" else None, repeats=spec.repeats,
               status="running", started_at=repo.utcnow(), host=socket.gethostname(), pid=pid,
               process_token=_process_token(pid),
               provenance_json=json.dumps({**provenance(), **({"warm_from": spec.warm_from} if spec.warm_from else {}),
                                           **(provenance_extra or {})}, sort_keys=True))


def _json_floats(obj):
    import numpy as np

    if isinstance(obj, dict):
        return {k: _json_floats(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_json_floats(v) for v in obj]
    if isinstance(obj, np.generic):
        obj = obj.item()
    if isinstance(obj, np.ndarray):
        return _json_floats(obj.tolist())
    if isinstance(obj, float) and not np.isfinite(obj):
        return None
    return obj


def _finish(store: Store, run_id: int | None, status: str, *, computed: Computed | None = None,
            error: str | None = None, new_run: Run | None = None) -> int:
    """Record a run's outcome; with ``new_run`` (attached partitions) the run is inserted in the
    same transaction, so nothing is left half-recorded. Returns the run id."""
    import numpy as np

    from workspace.store.blobs import encode_array

    encoded = {}
    if computed is not None:  # compress before taking the write lock
        labels = computed.labels
        encoded["membership"] = encode_array(labels.astype(compact_label_dtype(labels)))
        if computed.eigenvalues.size:
            encoded["eigenvalues"] = encode_array(computed.eigenvalues)
        if computed.stability_counts is not None:
            c = computed.stability_counts
            encoded["stability"] = encode_array(c.astype(np.uint8 if c.max(initial=0) < 256 else np.uint16))
    with store.write(needed=sum(e.stored_size for e in encoded.values()) or None) as s:
        if new_run is not None:
            s.add(new_run)
            s.flush()
            run_id = new_run.id
        run = s.get(Run, run_id)
        if run is None or run.status != "running":
            raise ComputeError(f"run {run_id} is no longer running; its outcome was not recorded")
        run.status = status
        run.finished_at = repo.utcnow()
        run.error = error
        if computed is not None:
            labels = computed.labels
            run.k = computed.k
            run.membership_blob = repo.put_encoded(s, encoded["membership"])
            run.membership_hash = membership_hash(labels)
            run.eigenvalues_blob = repo.put_encoded(s, encoded["eigenvalues"]) if "eigenvalues" in encoded else None
            if "stability" in encoded:
                run.stability_blob = repo.put_encoded(s, encoded["stability"])
            run.quality_json = json.dumps(_json_floats(computed.quality), sort_keys=True)
            run.diagnostics_json = json.dumps(_json_floats(computed.diagnostics), sort_keys=True)
            run.warnings_json = json.dumps(computed.warnings)
            if computed.extra.get("provenance"):   # e.g. the Dask worker that computed it (services/sweeps.py)
                run.provenance_json = json.dumps({**json.loads(run.provenance_json),
                                                  **computed.extra["provenance"]}, sort_keys=True)
            for row in computed.communities:
                s.add(RunCommunity(run_id=run_id, community=int(row["community"]), size=int(row["size"]),
                                   volume=_num(row.get("volume")), cut=_num(row.get("cut")),
                                   conductance=_num(row.get("conductance")), stability=_num(row.get("stability"))))
            for name, value in computed.quality.items():
                if isinstance(value, (int, float, np.number)) and not isinstance(value, bool):
                    s.add(RunMeasure(run_id=run_id, name=name, value=_num(value)))
    return run_id


def _record_outcome(store: Store, run_id: int, status: str, **outcome) -> None:
    """:func:`_finish`; when the disk is too full to store the outcome, take back the run's ``running``
    record too, so the store is as it was before the command (if even that cannot be written, the
    next open marks the record interrupted)."""
    from workspace.errors import NoSpace

    try:
        _finish(store, run_id, status, **outcome)
    except NoSpace as exc:
        store.checkpoint()  # gives back the log's space when the main file has room for its pages
        try:
            with store.write() as s:
                s.execute(delete(Run).where(Run.id == run_id, Run.status == "running"))
            exc.message += f" (run {run_id} was not recorded)"
        except CutbookError:
            exc.message += (f" (run {run_id} stays 'running' for now; the next command that opens the store "
                            "marks it interrupted)")
        raise


def _num(x):
    import numpy as np

    if x is None:
        return None
    x = float(x)
    return x if np.isfinite(x) else None


def execute(store: Store, run_id: int, spec: RunSpec, graph: GraphData, *, progress: Progress | None = None,
            cancel: Callable[[], bool] | None = None, embedding=None, warm_block=None,
            warm_info: dict[str, Any] | None = None) -> None:
    """Compute a recorded ``running`` run and record its outcome (done / failed / cancelled).

    A spec with ``warm_from`` and no ``warm_block`` builds its start block here (short reads)."""
    import numpy as np

    try:
        if spec.warm_from and warm_block is None and not isinstance(graph, _BuiltGraph):
            from workspace.services import warmstart

            warm_block, warm_info = warmstart.start_block(store, spec.warm_from, graph, spec)
        computed = compute(graph, spec, progress=progress, cancel=cancel, embedding=embedding,
                           warm_block=warm_block, warm_info=warm_info)
    except (Cancelled, KeyboardInterrupt):
        _finish(store, run_id, "cancelled", error="cancelled by the user")
        raise Cancelled(f"run {run_id} cancelled") from None
    except CutbookError as exc:
        _finish(store, run_id, "failed", error=str(exc))
        raise ComputeError(f"run {run_id} failed: {exc}") from exc
    except (ArithmeticError, ValueError, RuntimeError, MemoryError, np.linalg.LinAlgError) as exc:
        _finish(store, run_id, "failed", error=f"{type(exc).__name__}: {exc}")
        raise ComputeError(f"run {run_id} failed: {type(exc).__name__}: {exc}") from exc
    if progress:
        progress("store", 0, None)
    _record_outcome(store, run_id, "done", computed=computed)


def _load_version_graph(store: Store, version_id: int) -> GraphData:
    """A version's graph for a computation, its node ids packed as stored: a run needs none of them,
    a warm start only matches them (10M 40-character ids decoded: 1.6 GB)."""
    with store.read() as s:
        return repo.load_graph(s, s.get(NetworkVersion, version_id), packed=True)


class _BuiltGraph:
    """What :func:`compute` reads of a version's graph: its adjacency, built once, and its direction.

    Holding this instead of the :class:`GraphData` lets the node ids and the edge arrays go before
    the solver starts (at 3M nodes and 22.5M edges: 0.54 GB of edges, 0.1-0.5 GB of ids).
    :meth:`adjacency` hands the matrix over and keeps no reference to it, so the matrix goes too as
    soon as the computation is done with it.
    """

    def __init__(self, graph: GraphData) -> None:
        self.directed = graph.directed
        self._adjacency = graph.adjacency()

    def adjacency(self):
        A, self._adjacency = self._adjacency, None
        if A is None:
            raise RuntimeError("the adjacency of a built graph is handed over once")
        return A


def solver_input(store: Store, spec: RunSpec, warm_block=None, warm_info: dict[str, Any] | None = None):
    """``(built graph, warm block, warm info)`` for :func:`execute`: the version's adjacency alone (node
    ids and edge arrays are let go before the solve) and, for a warm-started spec, its start block
    (built first: a source that is gone raises NotFoundError before any run is recorded)."""
    graph = _load_version_graph(store, spec.version_id)
    if spec.warm_from and warm_block is None:
        from workspace.services import warmstart

        warm_block, warm_info = warmstart.start_block(store, spec.warm_from, graph, spec)
    built = _BuiltGraph(graph)
    del graph          # node ids and edge arrays are not read again: the solver gets their memory
    return built, warm_block, warm_info


def launch(store: Store, spec: RunSpec, *, progress: Progress | None = None,
           cancel: Callable[[], bool] | None = None, embedding=None,
           provenance_extra: dict[str, Any] | None = None, warm_block=None,
           warm_info: dict[str, Any] | None = None) -> dict[str, Any]:
    """Record, compute and store one run; returns its summary (see :func:`show_run`).

    A spec with ``warm_from`` builds its start block before the run is recorded (a source that is gone
    raises NotFoundError and records nothing) unless ``warm_block`` is given."""
    built, warm_block, warm_info = solver_input(store, spec, warm_block, warm_info)
    run_id = _insert_running(store, spec, provenance_extra=provenance_extra)
    try:
        execute(store, run_id, spec, built, progress=progress, cancel=cancel, embedding=embedding,
                warm_block=warm_block, warm_info=warm_info)
    except ComputeError as exc:
        raise RunFailed(run_id, str(exc)) from exc
    return show_run(store, run_id, include_labels=False)


class RunFailed(ComputeError):
    """A run that was recorded as failed; carries its id."""

    def __init__(self, run_id: int, message: str) -> None:
        super().__init__(message)
        self.run_id = run_id


def rerun(store: Store, run_id: int, *, progress: Progress | None = None,
          cancel: Callable[[], bool] | None = None) -> dict[str, Any]:
    """Repeat a computed run from its record; ``identical`` tells whether the membership matched."""
    with store.read() as s:
        old = s.get(Run, run_id)
        if old is None:
            raise NotFoundError(f"no run {run_id}")
        if old.kind != "computed":
            raise UsageError(f"run {run_id} was attached from a file; there is nothing to recompute")
        params = json.loads(old.params_json)
        perturb = float(params.pop("perturb", 0.0))
        v = s.get(NetworkVersion, old.version_id)
        net = s.get(Network, v.network_id)
        proj = s.get(Project, net.project_id)
        old_prov = json.loads(old.provenance_json or "{}")
        emb_info = old_prov.get("embedding")
        warm_from = old_prov.get("warm_from")
        old_warm = json.loads(old.diagnostics_json or "{}").get("warm_start") or {}
        spec = RunSpec(version_ref=f"{proj.name}/{net.name}@{v.number}", version_id=v.id, method=old.method,
                       k=old.k_requested, params=params, seed=old.seed or 0, repeats=old.repeats,
                       perturb=perturb, param_set_version_id=old.param_set_version_id, rerun_of=old.id,
                       embedding_vectors=emb_info["n_vectors"] if emb_info else None,
                       embedding_seed=emb_info["seed"] if emb_info else None, warm_from=warm_from)
        old_hash = old.membership_hash
    embedding = extra = None
    if emb_info:  # the cached embedding when the store still holds it, else solved again from the spec
        from workspace.services import sweeps as sweeps_service

        embedding, extra = sweeps_service.embedding_for_rerun(store, emb_info)
    warm_block = warm_info = None
    if warm_from:  # the same start block, rebuilt from the recorded source (or a clear refusal)
        from workspace.services import warmstart

        try:
            warm_block, warm_info = warmstart.start_block(store, warm_from, _load_version_graph(store, spec.version_id), spec)
        except NotFoundError as exc:
            raise NotFoundError(f"run {run_id} was warm-started from {warm_from}: {exc}") from None
        if old_warm.get("block_sha256") and warm_info["block_sha256"] != old_warm["block_sha256"]:
            raise ComputeError(f"run {run_id}: the start block rebuilt from {warm_from} differs from the one "
                               "recorded; the rerun could not be identical")
    out = launch(store, spec, progress=progress, cancel=cancel, embedding=embedding, provenance_extra=extra,
                 warm_block=warm_block, warm_info=warm_info)
    out["rerun_of"] = run_id
    out["identical"] = old_hash is not None and out["membership_hash"] == old_hash
    return out


# --- attached partitions -------------------------------------------------------------------

def attach(store: Store, path: str | os.PathLike, ref: str | VersionRef, *, label: str,
           format: str | None = None, delimiter: str | None = None) -> dict[str, Any]:
    """Store a partition read from a membership file (see :func:`workspace.io.read_membership`) as a run
    of kind ``attached``; ``format`` and ``delimiter`` are passed on to the reader."""
    import numpy as np

    from workspace.io import read_membership
    from workspace.spectral.quality import quality_measures

    if not label or not label.strip():
        raise UsageError("--label must name the grouping (for example 'survey-2026')")
    vref = VersionRef.parse(ref) if isinstance(ref, str) else ref
    with store.read() as s:
        version = resolve_version(s, vref)
        # the ids as stored: matched on their bytes, never decoded (10M 40-character ids as numpy
        # strings alone are 1.6 GB)
        graph = repo.load_graph(s, version, packed=True)
        version_ref = f"{vref.project}/{vref.network}@{version.number}"
    labels, info = read_membership(path, graph.node_ids, format=format, delimiter=delimiter)
    labels = canonical_labels(labels)
    missing = int((labels < 0).sum())
    warnings = []
    assigned = labels >= 0
    if not assigned.any():
        raise UsageError(f"{os.fspath(path)}: no node of {version_ref} is in the file")
    directed = graph.directed
    A = graph.adjacency()
    del graph  # the edge arrays (24 bytes an edge) are not needed beside the matrix
    if missing:
        warnings.append(f"{missing} node(s) of {version_ref} are not in the file; measures use the other "
                        f"{int(assigned.sum())}")
        idx = np.flatnonzero(assigned)
        q = quality_measures(A[idx][:, idx], labels[idx], directed=directed)
    else:
        q = quality_measures(A, labels, directed=directed)
    communities = q.pop("communities", None) or []
    spec = RunSpec(version_ref=version_ref, version_id=version.id, method="attached", k=None,
                   params={"source": os.path.basename(os.fspath(path))})
    computed = Computed(labels=labels, k=int(labels.max()) + 1, eigenvalues=np.empty(0), quality=q,
                        communities=communities, warnings=warnings,
                        diagnostics={"missing_nodes": missing, "file_rows": info.get("rows")})
    run_id = _finish(store, None, "done", computed=computed, new_run=_new_run(spec, kind="attached",
                                                                             label=label.strip()))
    out = show_run(store, run_id, include_labels=False)
    out["missing_nodes"] = missing
    return out


# --- reading -----------------------------------------------------------------------------------

def _run_row_dict(run: Run, project: str, network: str, number: int) -> dict[str, Any]:
    return {"run": run.id, "kind": run.kind, "method": run.method, "label": run.label, "status": run.status,
            "network": f"{project}/{network}", "version": number, "ref": f"{project}/{network}@{number}",
            "k": run.k, "k_requested": run.k_requested, "seed": run.seed, "repeats": run.repeats,
            "membership_hash": run.membership_hash,
            "created": iso_time(run.started_at),
            "finished": iso_time(run.finished_at) if run.finished_at else None,
            "by": run.created_by, "host": run.host}


def _runs_query():
    return (select(Run, Project.name, Network.name, NetworkVersion.number)
            .join(NetworkVersion, NetworkVersion.id == Run.version_id)
            .join(Network, Network.id == NetworkVersion.network_id)
            .join(Project, Project.id == Network.project_id))


def narrowed_to(q, ref: str | None):
    """``q`` (a select joining ``NetworkVersion``, ``Network`` and ``Project``) narrowed to a
    project (``P``), a network (``P/N``) or a version (``P/N@V``); unchanged for no ``ref``."""
    if not ref:
        return q
    if "/" not in ref:
        return q.where(Project.name == ref)
    vref = VersionRef.parse(ref)
    q = q.where(Project.name == vref.project, Network.name == vref.network)
    return q if vref.version is None else q.where(NetworkVersion.number == vref.version)


def list_runs(store: Store, ref: str | None = None, *, limit: int | None = None, offset: int = 0,
              status: str | None = None) -> list[dict[str, Any]]:
    """Runs, newest first; ``ref`` narrows to a project (``P``), network (``P/N``) or version (``P/N@V``)."""
    q = narrowed_to(_runs_query(), ref)
    if status:
        q = q.where(Run.status == status)
    q = q.order_by(Run.id.desc()).offset(offset)
    if limit is not None:
        q = q.limit(limit)
    with store.read() as s:
        rows = [_run_row_dict(r, p, n, v) for r, p, n, v in s.execute(q).all()]
        _with_tags(s, "run", rows, "run")
        return rows


def _with_tags(s, kind: str, rows: list[dict[str, Any]], key: str, ids: list[int] | None = None) -> None:
    """Add each row's current ``tags`` (see :mod:`workspace.services.annotations`)."""
    from workspace.services.annotations import current_for

    ids = [r[key] for r in rows] if ids is None else ids
    ann = current_for(s, kind, ids)
    for row, row_id in zip(rows, ids):
        row["tags"] = ann.get(row_id, {}).get("tags", [])


def count_runs(store: Store) -> int:
    from sqlalchemy import func

    with store.read() as s:
        return int(s.scalar(select(func.count(Run.id))) or 0)


def _get_run(s, run_id: int):
    row = s.execute(_runs_query().where(Run.id == run_id)).first()
    if row is None:
        raise NotFoundError(f"no run {run_id}")
    return row


def load_membership(store: Store, run_id: int, *, packed: bool = False) -> tuple[Any, np.ndarray, dict[str, Any]]:
    """(node_ids, labels int64, run summary) of a finished run; with ``packed`` the node ids as
    stored (:class:`workspace.domain.PackedNodeIds`, decoded only where asked), else a numpy
    ``str`` array."""
    import numpy as np

    with store.read() as s:
        run, p, n, v = _get_run(s, run_id)
        if run.membership_blob is None:
            raise NotFoundError(f"run {run_id} has no membership (status {run.status})")
        version = s.get(NetworkVersion, run.version_id)
        node_ids = repo.load_packed_node_ids(s, version) if packed else repo.load_node_ids(s, version)
        labels = repo.get_array(s, run.membership_blob).astype(np.int64)
        return node_ids, labels, _run_row_dict(run, p, n, v)


def load_memberships(store: Store, run_ids: list[int]) -> list[tuple[Any, Any, dict[str, Any]]]:
    """(node_ids, labels int64, run summary) per run, in one read; the node ids of a version are
    loaded once and shared (the same object lets the alignment take its fast path). Used by
    ``diff``, ``compare`` and tracked updates.

    Every version's ids come packed as stored (:class:`workspace.domain.PackedNodeIds`): the
    comparison decodes only the ids it lists (moved nodes, nodes of one version only); two versions
    are aligned from their bytes (``compare.align_nodes``: merged in order when they differ in a few
    ids, else decoded once each). 10M 40-character ids, two versions two ids apart: `diff` decoded
    both (4.0 s, 1.6 GB each) and searched strings (3.4 s) before."""
    import numpy as np

    from workspace.store import repo

    rows = []
    ids_of: dict[int, Any] = {}
    with store.read() as s:
        for rid in run_ids:
            run, p, n, v = _get_run(s, rid)
            if run.membership_blob is None:
                raise NotFoundError(f"run {rid} has no membership (status {run.status})")
            if run.version_id not in ids_of:
                ids_of[run.version_id] = repo.load_packed_node_ids(s, s.get(NetworkVersion, run.version_id))
            labels = repo.get_array(s, run.membership_blob).astype(np.int64)
            rows.append((run.version_id, labels, _run_row_dict(run, p, n, v)))
    return [(ids_of[vid], labels, summary) for vid, labels, summary in rows]


def show_run(store: Store, run_id: int, *, include_labels: bool = False) -> dict[str, Any]:
    """Everything recorded on a run."""
    with store.read() as s:
        run, p, n, v = _get_run(s, run_id)
        out = _run_row_dict(run, p, n, v)
        psv_ref = None
        if run.param_set_version_id is not None:
            from workspace.store.schema import ParamSet, ParamSetVersion

            psv = s.get(ParamSetVersion, run.param_set_version_id)
            ps = s.get(ParamSet, psv.param_set_id)
            psv_ref = f"{p}/{ps.name}@{psv.number}"
        # a few numbers: read without numpy, which `cutbook show RUN` then never loads
        eig = repo.get_values(s, run.eigenvalues_blob) if run.eigenvalues_blob else []
        comms = s.scalars(select(RunCommunity).where(RunCommunity.run_id == run_id)
                          .order_by(RunCommunity.community)).all()
        out.update({
            "params": json.loads(run.params_json), "param_set": psv_ref, "rerun_of": run.rerun_of,
            "error": run.error, "quality": json.loads(run.quality_json),
            "diagnostics": json.loads(run.diagnostics_json), "warnings": json.loads(run.warnings_json),
            "provenance": json.loads(run.provenance_json), "eigenvalues": eig,
            "communities": [{"community": c.community, "size": c.size, "volume": c.volume, "cut": c.cut,
                             "conductance": c.conductance, "stability": c.stability} for c in comms],
            "host": run.host, "pid": run.pid,
        })
        from workspace.services.annotations import current_for
        from workspace.services.tracking import shown_map

        out.update(current_for(s, "run", [run.id]).get(run.id, {"tags": [], "notes": []}))
        # what people see: the labels matched to the previous version's run (tracked runs), else the stored ones
        out["shown_labels"] = shown_map(s, run.id)
        shown = out["shown_labels"]["map"] if out["shown_labels"] else None
        for row in out["communities"]:
            c = row["community"]
            row["shown"] = shown[c] if shown is not None and 0 <= c < len(shown) else c
        if run.started_at and run.finished_at:
            out["wall_time_s"] = (run.finished_at - run.started_at).total_seconds()
        if include_labels and run.membership_blob:
            import numpy as np

            version = s.get(NetworkVersion, run.version_id)
            ids = repo.load_node_ids(s, version)
            labels = repo.get_array(s, run.membership_blob).astype(np.int64)
            out["membership"] = [{"node": i, "community": int(c)} for i, c in zip(ids.tolist(), labels.tolist())]
            if run.stability_blob:
                st = repo.get_array(s, run.stability_blob) / max(run.repeats, 1)
                for row, val in zip(out["membership"], st.tolist()):
                    row["stability"] = val
        return out


def write_atomically(target: str, body) -> None:
    """Write ``body`` (bytes, or an iterable of bytes-like chunks written one by one) beside
    ``target`` and rename it over: a full disk, a refused write or an error while the chunks are
    made leaves no partial file (an OSError names ``target``, not the temporary file)."""
    partial = os.path.join(os.path.dirname(os.path.abspath(target)),
                           f".{os.path.basename(target)}.partial-{os.getpid()}")
    try:
        with open(partial, "wb") as out:
            if isinstance(body, (bytes, bytearray, memoryview)):
                out.write(body)
            else:
                for chunk in body:
                    out.write(chunk)
        os.replace(partial, target)
    except BaseException as exc:
        try:
            os.unlink(partial)
        except OSError:
            pass
        if isinstance(exc, OSError) and exc.filename in (None, partial):
            exc.filename = target
        raise


def export_run(store: Store, run_id: int, path: str | os.PathLike, *, format: str = "csv",
               stream=None, align_to: int | None = None) -> dict[str, Any]:
    """Write a run's membership as CSV ``node,community``, or the network with it (node-link JSON, GraphML).

    JSON and GraphML carry every node of the run's network version, its edges with their
    weights, each node's community and the version's node attributes (its node table). ``stream`` (a
    text file object) receives the text instead of ``path`` (the CLI's ``-o -``). ``align_to`` (a run
    id) numbers the communities by their match in that run (see
    :func:`workspace.services.tracking.aligned_labels`).
    """
    # CSV is laid out from the stored UTF-8 bytes of the ids (no str per id, see
    # workspace.io.membership_csv); JSON and GraphML take the decoded ids
    node_ids, labels, summary = load_membership(store, run_id, packed=format == "csv")
    if align_to is not None:
        from workspace.services.tracking import aligned_labels

        labels = aligned_labels(store, run_id, align_to)
    graph = None
    attributes = None
    if format in ("json", "graphml"):
        from workspace.services.nodes import stored_attributes

        with store.read() as s:
            version_id = s.get(Run, run_id).version_id
            graph = repo.load_graph(s, s.get(NetworkVersion, version_id))
            attributes = stored_attributes(s, version_id)  # the version's node table, if it has one
    target = os.fspath(path)
    if format == "csv":
        from workspace.io.membership_csv import membership_csv

        # a file is written atomically, so its steps are checked as they are laid out (an error
        # removes the partial file); a stream is checked whole first, before anything is written
        count, chunks = membership_csv(node_ids, labels, path=target, check_first=stream is not None)
        if stream is not None:
            _write_chunks(stream, chunks)
        else:
            write_atomically(target, chunks)
        return {"run": run_id, "path": target, "format": format, "nodes": int(labels.shape[0]),
                "with_community": count, "edges": None, "membership_hash": summary["membership_hash"],
                "aligned_to": align_to}
    from workspace.io import membership_text  # pyarrow and the XML readers load with it

    text, count = membership_text(node_ids, labels, format, graph=graph, path=target, attributes=attributes)
    edges = None if graph is None else graph.n_edges
    if stream is not None:
        stream.write(text)
        stream.flush()
    else:
        write_atomically(target, text.encode("utf-8"))
    return {"run": run_id, "path": target, "format": format, "nodes": int(labels.shape[0]),
            "with_community": count, "edges": edges, "membership_hash": summary["membership_hash"],
            "aligned_to": align_to}


def _write_chunks(stream, chunks) -> None:
    """UTF-8 byte chunks to a text stream: through its byte buffer when it has one (standard
    output), else decoded (each chunk ends at a line end, so decodes alone)."""
    buffer = getattr(stream, "buffer", None)
    stream.flush()
    for chunk in chunks:
        if buffer is not None:
            buffer.write(chunk)
        else:
            stream.write(bytes(chunk).decode("utf-8"))
    if buffer is not None:
        buffer.flush()
    stream.flush()


def _networks_holding(store: Store, node: str, *, exclude: str) -> list[str]:
    """Names of the networks (other than ``exclude``) with a version that has the node."""
    import numpy as np

    held = []
    with store.read() as s:
        for project_name, net in s.execute(select(Project.name, Network).select_from(Network)
                                           .join(Network.project).order_by(Project.name, Network.name)).all():
            name = f"{project_name}/{net.name}"
            if name == exclude:
                continue
            for v in repo.list_versions(s, net.id):
                ids = repo.load_node_ids(s, v)
                pos = int(np.searchsorted(ids, node))
                if pos < ids.shape[0] and ids[pos] == node:
                    held.append(name)
                    break
    return held


def _named_node(store: Store, text: str, network: str | None) -> dict[str, Any] | None:
    """:func:`where_node` of the one node whose text attribute reads ``text`` (``found_by`` says which),
    None when no node is named so; NotFoundError listing them when several are."""
    from workspace.services.nodes import nodes_named

    hits = nodes_named(store, text, network)
    distinct = {(h["network"], h["node"]) for h in hits}
    if not distinct:
        return None
    if len(distinct) > 1:
        listed = "; ".join(f"{h['node']} in {h['network']} ({h['attribute']} {h['value']!r})" for h in hits[:6])
        raise NotFoundError(f"no node has the id {text!r}, and several are named so: {listed}"
                            f"{' …' if len(hits) > 6 else ''}; give one of their ids")
    hit = hits[0]
    out = where_node(store, hit["node"], hit["network"] if network is not None else None)
    out["found_by"] = {"attribute": hit["attribute"], "value": hit["value"], "typed": text}
    return out


def where_node(store: Store, node: str, network: str | None = None) -> dict[str, Any]:
    """That node's community (and its size) in every finished run of every version of a network.

    With ``network`` None every network of the store is searched. A node found
    nowhere by id may be named by a text attribute of a node table (a station's name): the one node so
    named is looked up (``found_by`` gives the attribute and value). Otherwise NotFoundError with
    case-insensitive and prefix suggestions, or with the nodes named so when there are several.
    """
    from workspace.services.suggest import MAX_SUGGESTIONS, close_node_ids, hint
    from workspace.services.tracking import shown_map

    vref = None
    if network is not None:
        vref = VersionRef.parse(network)
        if vref.version is not None:
            raise UsageError("--network takes project/network (every version is searched)")
    rows: list[dict[str, Any]] = []
    found_in: dict[str, list[int]] = {}
    near: list[str] = []
    with store.read() as s:
        if vref is not None:
            net = repo.find_network(s, vref.project, vref.network)
            if net is None:
                from workspace.services.networks import network_not_found

                raise network_not_found(s, vref.project, vref.network)
            nets = [(vref.project, net)]
        else:
            nets = list(s.execute(select(Project.name, Network).select_from(Network).join(Network.project)
                                  .order_by(Project.name, Network.name)).all())
        for project_name, net in nets:
            name = f"{project_name}/{net.name}"
            for v in repo.list_versions(s, net.id):
                # looked up in the ids as stored; decoded only for suggestions when it is not there
                ids = repo.load_packed_node_ids(s, v)
                at = ids.position(node)
                found = at is not None
                pos = at if found else 0
                if found:
                    found_in.setdefault(name, []).append(v.number)
                elif not found_in and len(near) < MAX_SUGGESTIONS:
                    near.extend(x for x in close_node_ids(node, ids.decode()) if x not in near)
                runs = s.scalars(select(Run).where(Run.version_id == v.id, Run.membership_blob.is_not(None))
                                 .order_by(Run.id)).all()
                for run in runs:
                    entry = {"run": run.id, "network": name, "version": v.number, "method": run.method,
                             "kind": run.kind, "label": run.label, "k": run.k, "present": found,
                             "community": None, "shown_community": None, "community_size": None, "stability": None}
                    if found:
                        labels = repo.get_array(s, run.membership_blob)
                        c = int(labels[pos])
                        entry["community"] = c if c >= 0 else None
                        shown = shown_map(s, run.id) if c >= 0 else None  # a tracked run's label as people see it
                        entry["shown_community"] = shown["map"][c] if shown and c < len(shown["map"]) else \
                            entry["community"]
                        if c >= 0:
                            entry["community_size"] = int((labels == c).sum())
                        if run.stability_blob:
                            entry["stability"] = float(repo.get_array(s, run.stability_blob)[pos]) / run.repeats
                    rows.append(entry)
    if not found_in:
        named = _named_node(store, node, network)
        if named is not None:
            return named
        if vref is not None:
            elsewhere = _networks_holding(store, node, exclude=f"{vref.project}/{vref.network}")
            if elsewhere:
                raise NotFoundError(f"node {node!r} is in no version of {vref.project}/{vref.network} but is in "
                                    f"{', '.join(elsewhere)} (leave out --network to search every network)")
        where = f"no version of {vref.project}/{vref.network}" if vref is not None else "no network of this store"
        raise NotFoundError(f"node {node!r} is in {where}{hint(near[:MAX_SUGGESTIONS])}")
    if vref is None:  # searching everywhere: only the networks that hold the node
        rows = [r for r in rows if r["network"] in found_in]
    out = {"node": node, "network": f"{vref.project}/{vref.network}" if vref is not None else None,
           "networks_with_node": [{"network": k, "versions": v} for k, v in found_in.items()], "runs": rows}
    if vref is not None:
        out["versions_with_node"] = found_in.get(out["network"], [])
    return out
