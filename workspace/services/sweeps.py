"""Sweeps: ordinary runs over a range of k, a parameter's values and seeds, read together.

A sweep is a recorded request (version, method, base parameters, k list,
optionally one varied parameter, seeds, perturbation) plus the runs made for it.
Its tasks are (value, repeat, k); each task is one ordinary run with full
provenance. Repeat 0 runs on the version's graph with the base seed; repeat
r >= 1 uses seed + r and, when ``perturb`` > 0, the graph with its edge weights
multiplied by seeded noise of that sd (quality is always measured on the
version's graph).

For the k-way spectral methods (njw, shi-malik, regularized, bethe) the
eigenvectors for the largest k are solved once per operator and graph and each
k takes its leading columns. Embeddings of a version's own graph are cached in
the store (table ``embeddings``, arrays as blobs) under a key over the version's
content hash and everything that determines the eigenvectors, so later runs and
sweeps reuse them; a run records the embedding it used in its provenance and
``rerun`` reproduces it bit for bit (from the cache, or solved again).

No write transaction is held while computing: every task inserts its run
(short transaction), computes, then records the outcome (short transaction).
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import socket
import time
from concurrent.futures import FIRST_COMPLETED, ThreadPoolExecutor, wait
from dataclasses import asdict, dataclass
from typing import Any, Callable

import numpy as np
from sqlalchemy import delete, func, select, text, update

from workspace.domain import VersionRef
from workspace.errors import Cancelled, ComputeError, CutbookError, NotFoundError, ParameterError, UsageError
from workspace.services import iso_time
from workspace.services import params as params_service
from workspace.services.liveness import _process_alive
from workspace.services import runs as runs_service
from workspace.store import repo
from workspace.store.db import Store
from workspace.store.schema import Embedding as EmbeddingRow
from workspace.store.schema import Network, NetworkVersion, Project, Run, Sweep, SweepRun

MAX_TASKS = 5000
MAX_SEEDS = 200
SweepProgress = Callable[[dict[str, Any]], None]


@dataclass(frozen=True)
class SweepSpec:
    """A validated sweep request (nothing recorded yet)."""

    version_ref: str
    version_id: int
    method: str
    params: dict[str, Any]
    ks: list            # ints, or [None] for methods that choose k themselves
    vary_name: str | None
    vary_values: list   # validated values, or [None]
    seed: int
    seeds: int
    perturb: float
    param_set_version_id: int | None = None

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


# --- preparing ------------------------------------------------------------------------------

def parse_vary(text_value: str | None) -> tuple[str | None, list[str] | None]:
    """``name=v1,v2,...`` to ``(name, [values as typed])``."""
    if text_value is None:
        return None, None
    name, sep, values = text_value.partition("=")
    name = name.strip()
    items = [v.strip() for v in values.split(",")] if sep else []
    if not name or not items or any(not v for v in items):
        raise UsageError(f"--vary takes name=value1,value2,... (got {text_value!r})")
    return name, items


def prepare_sweep(store: Store, ref: str, *, params_ref: str | None = None, method: str | None = None,
                  sets: dict[str, Any] | None = None, ks: Any = None, vary: str | None = None, seeds: int = 1,
                  seed: int = 0, perturb: float | None = None) -> SweepSpec:
    """Resolve and validate a sweep request; raises before anything is recorded.

    ``ks``: ``"2..16"``, ``"2,3,5,8"`` or a list; required for methods that take k, refused for those
    that choose k themselves (vary a parameter instead). ``perturb`` defaults to 0.5 when ``seeds`` > 1.
    """
    from workspace.spectral.methods import METHODS
    from workspace.spectral.sweep import parse_k_range

    base = runs_service.prepare_run(store, ref, params_ref=params_ref, method=method, sets=sets, seed=seed)
    info = METHODS[base.method]
    if not isinstance(seeds, int) or not 1 <= seeds <= MAX_SEEDS:
        raise ParameterError(f"seeds must be an integer from 1 to {MAX_SEEDS}, got {seeds!r}")
    if perturb is None:
        perturb = runs_service.DEFAULT_PERTURB if seeds > 1 else 0.0
    if not 0.0 <= float(perturb) <= 2.0:
        raise ParameterError(f"perturb (sd of the edge-weight noise per repeat) must be in [0, 2], got {perturb!r}")
    if float(perturb) > 0 and seeds == 1:
        raise ParameterError("perturb applies to repeats; give --seeds N (N >= 2) as well")
    if ks is None or ks == "":
        if info.accepts_k and info.fixed_k is None and vary is None:
            raise UsageError(f"give the k to sweep with --k (for example --k 2..16) or a parameter with --vary")
        k_list: list = [None] if not info.accepts_k else [params_service.k_argument(base.k)]
    else:
        if not info.accepts_k or info.fixed_k is not None:
            raise UsageError(f"{base.method} does not take a range of k"
                             + (" (it chooses k itself); vary a parameter instead" if not info.accepts_k
                                else f" (it always makes {info.fixed_k} parts)"))
        k_list = parse_k_range(ks)
    vary_name, raw_values = parse_vary(vary)
    values: list = [None]
    if vary_name is not None:
        if vary_name in ("k", "seed"):
            raise UsageError(f"use --k / --seeds for {vary_name}, not --vary")
        try:
            info.param(vary_name)
        except KeyError:
            raise ParameterError(f"{base.method}: unknown parameter {vary_name!r} for --vary; known: "
                                 + ", ".join(p.name for p in info.params)) from None
        values = []
        for raw in raw_values:
            converted = params_service.validate(base.method, None, {**base.params, vary_name: raw})[1][vary_name]
            if converted not in values:
                values.append(converted)
    tasks = len(k_list) * len(values) * seeds
    if tasks > MAX_TASKS:
        raise ParameterError(f"the sweep would make {tasks} runs; at most {MAX_TASKS}")
    return SweepSpec(version_ref=base.version_ref, version_id=base.version_id, method=base.method,
                     params=base.params, ks=k_list, vary_name=vary_name, vary_values=values, seed=seed,
                     seeds=seeds, perturb=float(perturb), param_set_version_id=base.param_set_version_id)


# --- the embedding cache ----------------------------------------------------------------------

def embedding_key(version_hash: str, fields: dict[str, Any]) -> str:
    """sha256 over the version's content hash and the fields that determine the eigenvectors."""
    doc = json.dumps({"version": version_hash, **fields}, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(doc.encode()).hexdigest()


def _load_embedding(s, row: EmbeddingRow):
    from workspace.spectral.embedding import Embedding

    values = repo.get_array(s, row.values_blob)
    flat = repo.get_array(s, row.vectors_blob)
    vectors = np.ascontiguousarray(flat.reshape(row.n_vectors, row.n_rows).T)
    info = json.loads(row.info_json)
    fields = json.loads(row.fields_json)
    return Embedding(operator=row.operator, operator_params=fields["operator_params"], values=values,
                     vectors=vectors, solver=row.solver, residual_norms=json.loads(row.residuals_json),
                     seed=int(fields["seed"]), extra_accuracy=info.pop("extra_accuracy", None), info=info)


def cached_embedding(store: Store, key: str):
    """The cached embedding under ``key``, or None."""
    with store.read() as s:
        row = s.get(EmbeddingRow, key)
        return None if row is None else _load_embedding(s, row)


def _store_embedding(store: Store, version_id: int, key: str, fields: dict[str, Any], emb) -> None:
    from workspace.store.blobs import encode_array

    enc_values = encode_array(np.asarray(emb.values, dtype=np.float64))
    enc_vectors = encode_array(np.ascontiguousarray(np.asarray(emb.vectors, dtype=np.float64).T).ravel())
    info = {**emb.info, "extra_accuracy": emb.extra_accuracy}
    with store.write() as s:
        if s.get(EmbeddingRow, key) is not None:
            return
        s.add(EmbeddingRow(key=key, version_id=version_id, operator=emb.operator,
                           fields_json=json.dumps(fields, sort_keys=True), n_rows=int(emb.vectors.shape[0]),
                           n_vectors=int(emb.vectors.shape[1]), values_blob=repo.put_encoded(s, enc_values),
                           vectors_blob=repo.put_encoded(s, enc_vectors), solver=emb.solver,
                           residuals_json=json.dumps([float(r) for r in emb.residual_norms]),
                           info_json=json.dumps(runs_service._json_floats(info), sort_keys=True),
                           created_at=repo.utcnow()))


def embedding_for(store: Store, version_id: int, graph, method: str, params: dict[str, Any], n_vectors: int,
                  seed: int, *, progress=None, cancel=None):
    """The embedding of a version's graph for a k-way method: from the cache, else solved and cached.

    Returns ``(embedding or None, provenance entry or None)``; None when the graph is partitioned as
    several components (each k is then solved on its own).
    """
    from workspace.spectral.embedding import embedding_fields
    from workspace.spectral.sweep import compute_embedding

    fields = embedding_fields(method, params, n_vectors, seed)
    with store.read() as s:
        version_hash = s.get(NetworkVersion, version_id).content_hash
    key = embedding_key(version_hash, fields)
    emb = cached_embedding(store, key)
    if emb is None:  # an embedding with more vectors and otherwise the same fields serves as well
        key = _wider_cached(store, version_id, fields) or key
        emb = cached_embedding(store, key)
    reused = emb is not None
    if emb is None:
        emb = compute_embedding(graph.adjacency(), method, n_vectors, seed=seed, progress=progress, cancel=cancel,
                                **params)
        if emb is None:
            return None, None
        _store_embedding(store, version_id, key, fields, emb)
    return emb, {"key": key, "cached": True, "reused_from_cache": reused, "n_vectors": emb.n_vectors,
                 "seed": int(seed), "operator": emb.operator}


def _wider_cached(store: Store, version_id: int, fields: dict[str, Any]) -> str | None:
    """Key of the narrowest cached embedding of this version with at least ``fields["n_vectors"]`` vectors
    and every other field equal (its first columns are what a solve for fewer would approximate)."""
    want = {k: v for k, v in fields.items() if k != "n_vectors"}
    best = None
    with store.read() as s:
        rows = s.execute(select(EmbeddingRow.key, EmbeddingRow.n_vectors, EmbeddingRow.fields_json)
                         .where(EmbeddingRow.version_id == version_id,
                                EmbeddingRow.n_vectors >= fields["n_vectors"])).all()
    for key, n_vectors, fields_json in rows:
        other = {k: v for k, v in json.loads(fields_json).items() if k != "n_vectors"}
        if other == want and (best is None or n_vectors < best[1]):
            best = (key, n_vectors)
    return None if best is None else best[0]


def embedding_for_rerun(store: Store, info: dict[str, Any]):
    """For ``rerun``: the cached embedding a run used (None when pruned: it is then solved again) and the
    provenance entry of the new run."""
    emb = cached_embedding(store, info["key"]) if info.get("cached") and info.get("key") else None
    entry = dict(info, reused_from_cache=emb is not None)
    return emb, {"embedding": entry}


def embedding_cache(store: Store) -> dict[str, Any]:
    """What the embedding cache holds: one row per embedding with its version and stored size."""

    with store.read() as s:
        q = (select(EmbeddingRow, Project.name, Network.name, NetworkVersion.number)
             .join(NetworkVersion, NetworkVersion.id == EmbeddingRow.version_id)
             .join(Network, Network.id == NetworkVersion.network_id)
             .join(Project, Project.id == Network.project_id).order_by(EmbeddingRow.created_at))
        rows = []
        for e, p, n, v in s.execute(q).all():
            size = repo.stored_size(s, [e.values_blob, e.vectors_blob])  # chunks included
            fields = json.loads(e.fields_json)
            rows.append({"key": e.key, "ref": f"{p}/{n}@{v}", "operator": e.operator,
                         "operator_params": fields["operator_params"], "n_rows": e.n_rows,
                         "n_vectors": e.n_vectors, "seed": fields["seed"], "solver": e.solver,
                         "stored_bytes": int(size or 0), "created": iso_time(e.created_at)})
    return {"embeddings": rows, "count": len(rows), "stored_bytes": sum(r["stored_bytes"] for r in rows)}


def prune_embeddings(store: Store, *, ref: str | None = None, keys: list[str] | None = None) -> dict[str, Any]:
    """Remove cached embeddings (all, those of a network/version ``ref``, or the given keys) and arrays no
    longer referenced. Runs that used them stay reproducible: ``rerun`` solves the embedding again."""
    from workspace.services.delete import _orphan_blobs_sql

    with store.write() as s:
        q = select(EmbeddingRow.key)
        if ref:
            vref = VersionRef.parse(ref)
            q = (q.join(NetworkVersion, NetworkVersion.id == EmbeddingRow.version_id)
                 .join(Network, Network.id == NetworkVersion.network_id)
                 .join(Project, Project.id == Network.project_id)
                 .where(Project.name == vref.project, Network.name == vref.network))
            if vref.version is not None:
                q = q.where(NetworkVersion.number == vref.version)
        if keys:
            q = q.where(EmbeddingRow.key.in_(keys))
        gone = list(s.scalars(q).all())
        if gone:
            s.execute(delete(EmbeddingRow).where(EmbeddingRow.key.in_(gone)))
        removed = s.execute(text(_orphan_blobs_sql())).rowcount if gone else 0
    return {"removed": len(gone), "keys": gone, "arrays_removed": removed}


# --- recording and running -----------------------------------------------------------------------

def create_sweep(store: Store, spec: SweepSpec) -> int:
    """Record the sweep (status ``running``) in one short transaction; returns its id."""
    pid = os.getpid()
    with store.write() as s:
        sw = Sweep(version_id=spec.version_id, param_set_version_id=spec.param_set_version_id, method=spec.method,
                   params_json=json.dumps(spec.params, sort_keys=True), ks_json=json.dumps(spec.ks),
                   vary_name=spec.vary_name, vary_values_json=json.dumps(spec.vary_values), seed=spec.seed,
                   seeds=spec.seeds, perturb=spec.perturb, status="running", started_at=repo.utcnow(),
                   host=socket.gethostname(), pid=pid, process_token=runs_service._process_token(pid))
        s.add(sw)
        s.flush()
        return sw.id


def _value_key(value: Any) -> str:
    return json.dumps(value)


def _spec_of(s, sw: Sweep) -> SweepSpec:
    v = s.get(NetworkVersion, sw.version_id)
    net = s.get(Network, v.network_id)
    proj = s.get(Project, net.project_id)
    return SweepSpec(version_ref=f"{proj.name}/{net.name}@{v.number}", version_id=v.id, method=sw.method,
                     params=json.loads(sw.params_json), ks=json.loads(sw.ks_json), vary_name=sw.vary_name,
                     vary_values=json.loads(sw.vary_values_json), seed=sw.seed, seeds=sw.seeds,
                     perturb=sw.perturb, param_set_version_id=sw.param_set_version_id)


def _done_tasks(s, sweep_id: int) -> set[tuple]:
    rows = s.execute(select(SweepRun.k, SweepRun.value_json, SweepRun.repeat)
                     .join(Run, Run.id == SweepRun.run_id)
                     .where(SweepRun.sweep_id == sweep_id, Run.status == "done")).all()
    return {(r.k, r.value_json, r.repeat) for r in rows}


def run_sweep(store: Store, sweep_id: int, *, progress: SweepProgress | None = None,
              cancel: Callable[[], bool] | None = None, workers: int | None = None,
              executor=None) -> dict[str, Any]:
    """Compute every task of a recorded sweep that has no finished run yet; returns :func:`show_sweep`.

    ``progress`` receives ``{"done", "total", "failed", "elapsed_s", "task", "stage"}`` dicts. Cancellation
    (``cancel()`` True, or Ctrl-C) keeps the finished runs, marks the sweep ``cancelled`` and raises
    :class:`workspace.errors.Cancelled`.

    ``workers`` (default: the CPUs available, at most 4) k of one embedding are assigned at a time in
    threads (numpy releases the GIL); every run is the same as computed alone, and all store writes stay
    in this thread.

    ``executor`` (:class:`workspace.jobs.executors.ExecutorSpec`, or its dict; default local) with kind
    ``dask`` hands each task to a Dask cluster instead (:func:`_run_on_dask`); the runs are the same
    bits, and only this process writes to the store. Each run's provenance records the executor and
    (Dask) the host and package versions of the worker that computed it.
    """
    from workspace.jobs.executors import ExecutorSpec, local_description
    from workspace.spectral.embedding import EMBEDDING_METHODS
    from workspace.spectral.sweep import compute_embedding, perturbed_adjacency

    with store.read() as s:
        sw = s.get(Sweep, sweep_id)
        if sw is None:
            raise NotFoundError(f"no sweep {sweep_id}")
        spec = _spec_of(s, sw)
        done = _done_tasks(s, sweep_id)
    with store.write() as s:
        s.execute(update(Sweep).where(Sweep.id == sweep_id).values(
            status="running", finished_at=None, error=None, pid=os.getpid(), host=socket.gethostname(),
            process_token=runs_service._process_token(os.getpid())))
    graph = runs_service._load_version_graph(store, spec.version_id)
    tasks = [(value, r, k) for value in spec.vary_values for r in range(spec.seeds) for k in spec.ks
             if (k, _value_key(value), r) not in done]
    total = len(tasks)
    t0 = time.monotonic()
    state: dict[str, Any] = {"done": 0, "task": "", "stage": ""}
    failures: list[str] = []

    def report(stage: str) -> None:
        if progress is not None:
            state["stage"] = stage
            progress({"done": state["done"], "total": total, "failed": len(failures),
                      "elapsed_s": time.monotonic() - t0, "task": state["task"], "stage": stage})

    def run_progress(stage: str, matvecs: int, total_: int | None = None) -> None:
        report(stage)

    halt = [False]

    def stopped() -> bool:
        return halt[0] or (cancel is not None and bool(cancel()))

    if isinstance(executor, dict):
        executor = ExecutorSpec(**executor)
    if executor is None:
        executor = ExecutorSpec(kind="local", workers=workers)
    if executor.kind == "local":   # (an open DaskCluster has kind "dask" too)
        workers = executor.workers if executor.workers is not None else workers
        if workers is None:
            from workspace.domain import available_cpus

            workers = min(available_cpus(), 4)
        workers = max(1, int(workers))
    # a directed version runs each task through partition (which symmetrises it) rather than a shared embedding
    use_embedding = (spec.method in EMBEDDING_METHODS and all(k is not None for k in spec.ks)
                     and not graph.directed)
    m = max(spec.ks) if use_embedding else None
    try:
        groups: dict[tuple, list] = {}
        for value, r, k in tasks:
            groups.setdefault((_value_key(value), r), []).append((value, r, k))
        if executor.kind == "dask":
            _run_on_dask(store, sweep_id, spec, graph, groups, use_embedding, m, executor, state=state,
                         report=report, failures=failures, stopped=stopped)
            groups = {}
        local_exec = {"executor": local_description(workers)} if executor.kind == "local" else {}
        for (_, r), items in groups.items():
            value = items[0][0]
            params = dict(spec.params)
            if spec.vary_name is not None:
                params[spec.vary_name] = value
            seed_r = spec.seed + r
            perturb = spec.perturb if r > 0 else 0.0
            emb = entry = None
            emb_seed = None
            if use_embedding:
                state["task"] = f"embedding ({m} vectors" + (f", {spec.vary_name}={value}" if spec.vary_name else "") \
                    + (f", repeat {r}" if perturb > 0 else "") + ")"
                report("embedding")
                if perturb > 0:
                    emb_seed = seed_r
                    emb = compute_embedding(perturbed_adjacency(graph.adjacency(), perturb, seed_r), spec.method, m,
                                            seed=emb_seed, progress=run_progress, cancel=cancel, **params)
                    entry = None if emb is None else {"cached": False, "n_vectors": emb.n_vectors,
                                                      "seed": emb_seed, "operator": emb.operator,
                                                      "perturbed_seed": seed_r}
                else:
                    emb_seed = spec.seed
                    emb, entry = embedding_for(store, spec.version_id, graph, spec.method, params, m, emb_seed,
                                               progress=run_progress, cancel=cancel)
            queue = [k for _, _, k in items]
            inflight: dict = {}
            with ThreadPoolExecutor(max_workers=workers) as pool:
                try:
                    while queue or inflight:
                        while queue and len(inflight) < workers and not stopped():
                            k = queue.pop(0)
                            label = (f"k={k}" if k is not None else "k chosen by the method") \
                                + (f" {spec.vary_name}={value}" if spec.vary_name else "") \
                                + (f" repeat {r}" if spec.seeds > 1 else "")
                            state["task"] = label
                            report("start")
                            run_spec = runs_service.RunSpec(
                                version_ref=spec.version_ref, version_id=spec.version_id, method=spec.method,
                                k=None if k is None else str(k), params=params, seed=seed_r, repeats=1,
                                perturb=perturb, param_set_version_id=spec.param_set_version_id,
                                embedding_vectors=emb.n_vectors if emb is not None else None,
                                embedding_seed=emb_seed if emb is not None else None)
                            extra = {"sweep": sweep_id, **local_exec}
                            if entry is not None:
                                extra["embedding"] = entry
                            run_id = runs_service._insert_running(
                                store, run_spec, provenance_extra=extra,
                                after_insert=lambda s, rid, k=k, value=value, r=r: s.add(SweepRun(
                                    sweep_id=sweep_id, run_id=rid, k=k, value_json=_value_key(value), repeat=r)))
                            fut = pool.submit(runs_service.compute, graph, run_spec, progress=run_progress,
                                              cancel=stopped, embedding=emb)
                            inflight[fut] = (run_id, label)
                        if not inflight:
                            break
                        finished, _ = wait(list(inflight), return_when=FIRST_COMPLETED)
                        for fut in sorted(finished, key=lambda f: inflight[f][0]):
                            run_id, label = inflight.pop(fut)
                            _record_task(store, run_id, fut, label, failures)
                            state["done"] += 1
                            state["task"] = label
                            report("stored")
                    if queue:                 # stopped before every task was handed out
                        raise Cancelled("sweep cancelled")
                except BaseException:
                    halt[0] = True            # workers stop at their next check; record what is in flight
                    for fut, (run_id, label) in list(inflight.items()):
                        try:
                            fut.result()
                        except BaseException:  # noqa: BLE001 - the run is recorded as cancelled below
                            pass
                        try:
                            runs_service._finish(store, run_id, "cancelled", error="cancelled by the user")
                        except ComputeError:
                            pass
                    inflight.clear()
                    raise
    except (Cancelled, KeyboardInterrupt):
        _close_running_runs(store, sweep_id, "cancelled", "cancelled by the user")
        _set_status(store, sweep_id, "cancelled", f"cancelled after {state['done']} of {total} tasks")
        raise Cancelled(f"sweep {sweep_id} cancelled after {state['done']} of {total} tasks; "
                        "finished runs are kept (extend the sweep to continue)") from None
    except BaseException as exc:
        _close_running_runs(store, sweep_id, "failed", f"the sweep stopped: {type(exc).__name__}: {exc}")
        _set_status(store, sweep_id, "failed", f"{type(exc).__name__}: {exc}")
        raise
    if failures:
        _set_status(store, sweep_id, "failed", f"{len(failures)} task(s) failed; first: {failures[0]}")
    else:
        _set_status(store, sweep_id, "done", None)
    return show_sweep(store, sweep_id)


def _record_task(store: Store, run_id: int, fut, label: str, failures: list[str]) -> None:
    """Record the outcome of one computed task (the error handling of :func:`runs.execute`)."""
    try:
        computed = fut.result()
    except (Cancelled, KeyboardInterrupt):
        runs_service._finish(store, run_id, "cancelled", error="cancelled by the user")
        raise Cancelled(f"run {run_id} cancelled") from None
    except CutbookError as exc:
        runs_service._finish(store, run_id, "failed", error=str(exc))
        failures.append(f"{label}: {exc}")
        return
    except (ArithmeticError, ValueError, RuntimeError, MemoryError, np.linalg.LinAlgError) as exc:
        runs_service._finish(store, run_id, "failed", error=f"{type(exc).__name__}: {exc}")
        failures.append(f"{label}: {type(exc).__name__}: {exc}")
        return
    runs_service._finish(store, run_id, "done", computed=computed)


def _task_label(spec: SweepSpec, k, value, r: int) -> str:
    return (f"k={k}" if k is not None else "k chosen by the method") \
        + (f" {spec.vary_name}={value}" if spec.vary_name else "") + (f" repeat {r}" if spec.seeds > 1 else "")


def _run_on_dask(store: Store, sweep_id: int, spec: SweepSpec, graph, groups: dict[tuple, list],
                 use_embedding: bool, m: int | None, executor, *, state: dict[str, Any], report, failures: list[str],
                 stopped: Callable[[], bool]) -> None:
    """Compute the sweep's tasks on a Dask cluster; this process records every run.

    The graph is sent once to every worker (a worker plugin; tasks name it by a token). For each
    (value, repeat) of a k-way method one task solves the shared embedding (unless the store's cache
    holds it: then the client sends the cached one), and the k tasks of that group take it as their
    input: it is solved once, and Dask moves it to the workers that run those k tasks. A task's run is
    inserted ``running`` just before it is submitted (about two tasks per worker thread outstanding)
    and its outcome recorded in one short transaction when it finishes. When a worker dies, Dask
    computes its tasks again on the others (each future still yields one result, so each run is
    recorded once); a task that raises records its run ``failed`` and the sweep goes on; cancelling
    cancels the outstanding futures and records their runs ``cancelled``.
    """
    from collections import deque

    from workspace.jobs import executors as ex
    from workspace.spectral.embedding import embedding_fields

    state["task"] = executor.label
    report("connecting")
    with (contextlib.nullcontext(executor) if isinstance(executor, ex.DaskCluster)
          else ex.DaskCluster(executor)) as cluster:
        client = cluster.client
        provenance_exec = cluster.describe()
        threads = cluster.threads()
        window = max(2, 2 * threads)
        graph_ref = cluster.install_graph(graph)     # once per worker (a worker plugin), not once per task
        with store.read() as s:
            version_hash = s.get(NetworkVersion, spec.version_id).content_hash
        todo = deque(groups.items())
        ready: deque = deque()        # (value, r, k, params, seed_r, perturb, emb_ref, emb_info, entry)
        emb_pending: dict = {}        # summary future -> (items, params, seed_r, perturb, emb future, key, fields)
        inflight: dict = {}           # task future -> (run id, label)

        def fail_group(items, params, seed_r, perturb, message: str) -> None:
            for value, r, k in items:
                run_spec = _run_spec(spec, k, params, seed_r, perturb, None, None)
                run_id = _insert_task_run(store, sweep_id, run_spec, k, value, r,
                                          {"sweep": sweep_id, "executor": provenance_exec})
                runs_service._finish(store, run_id, "failed", error=message)
                label = _task_label(spec, k, value, r)
                failures.append(f"{label}: {message}")
                state["done"] += 1
                state["task"] = label
                report("stored")

        def start_group(items) -> None:
            value, r = items[0][0], items[0][1]
            params = dict(spec.params)
            if spec.vary_name is not None:
                params[spec.vary_name] = value
            seed_r = spec.seed + r
            perturb = spec.perturb if r > 0 else 0.0
            if not use_embedding:
                ready.extend((value, r, k, params, seed_r, perturb, None, None, None) for _, _, k in items)
                return
            emb_seed = seed_r if perturb > 0 else spec.seed
            key = fields = None
            if perturb == 0:
                fields = embedding_fields(spec.method, params, m, emb_seed)
                key = embedding_key(version_hash, fields)
                cached_key = key if cached_embedding_exists(store, key) else _wider_cached(store, spec.version_id,
                                                                                            fields)
                if cached_key is not None:
                    emb = cached_embedding(store, cached_key)
                    entry = {"key": cached_key, "cached": True, "reused_from_cache": True,
                             "n_vectors": emb.n_vectors, "seed": int(emb_seed), "operator": emb.operator}
                    emb_ref = client.scatter(emb, broadcast=True, hash=False)   # survives a worker's loss
                    ready.extend((value, r, k, params, seed_r, perturb, emb_ref, (emb.n_vectors, emb_seed), entry)
                                 for _, _, k in items)
                    return
            emb_future = client.submit(ex.embedding_task, graph_ref, spec.method, m, emb_seed, params, perturb,
                                       seed_r if perturb > 0 else None, pure=False)
            summary = client.submit(ex.embedding_summary, emb_future, pure=False)
            emb_pending[summary] = (items, params, seed_r, perturb, emb_future, emb_seed, key, fields)

        def group_embedded(fut) -> None:
            items, params, seed_r, perturb, emb_future, emb_seed, key, fields = emb_pending.pop(fut)
            if fut.status != "finished":
                exc = fut.exception() if fut.status == "error" else None
                message = f"the shared embedding failed: {type(exc).__name__}: {exc}" if exc is not None \
                    else "the shared embedding was lost"
                fail_group(items, params, seed_r, perturb, message)
                return
            summary = fut.result()
            value, r = items[0][0], items[0][1]
            if summary is None:   # several components: each k is solved on its own
                ready.extend((value, r, k, params, seed_r, perturb, None, None, None) for _, _, k in items)
                return
            if perturb > 0:
                entry = {"cached": False, "n_vectors": summary["n_vectors"], "seed": emb_seed,
                         "operator": summary["operator"], "perturbed_seed": seed_r}
            else:   # the version's own graph: cache it, as the local executor does
                _store_embedding(store, spec.version_id, key, fields, emb_future.result())
                entry = {"key": key, "cached": True, "reused_from_cache": False, "n_vectors": summary["n_vectors"],
                         "seed": int(emb_seed), "operator": summary["operator"]}
            ready.extend((value, r, k, params, seed_r, perturb, emb_future, (summary["n_vectors"], emb_seed), entry)
                         for _, _, k in items)

        def submit_next() -> None:
            value, r, k, params, seed_r, perturb, emb_ref, emb_info, entry = ready.popleft()
            label = _task_label(spec, k, value, r)
            state["task"] = label
            report("start")
            run_spec = _run_spec(spec, k, params, seed_r, perturb, *(emb_info or (None, None)))
            extra = {"sweep": sweep_id, "executor": provenance_exec}
            if entry is not None:
                extra["embedding"] = entry
            run_id = _insert_task_run(store, sweep_id, run_spec, k, value, r, extra)
            fut = client.submit(ex.partition_task, graph_ref, run_spec.to_dict(), emb_ref, pure=False)
            inflight[fut] = (run_id, label)

        def record(fut) -> None:
            run_id, label = inflight.pop(fut)
            if fut.status == "finished":
                res = fut.result()
                if "error" in res:
                    runs_service._finish(store, run_id, "failed", error=res["error"])
                    failures.append(f"{label}: {res['error']}")
                else:
                    computed = res["computed"]
                    computed.extra["provenance"] = {"computed_on": res["worker"]}
                    runs_service._finish(store, run_id, "done", computed=computed)
            elif fut.status == "cancelled":
                runs_service._finish(store, run_id, "cancelled", error="cancelled")
            else:
                exc = fut.exception()
                message = f"{type(exc).__name__}: {exc}"
                runs_service._finish(store, run_id, "failed", error=message)
                failures.append(f"{label}: {message}")
            state["done"] += 1
            state["task"] = label
            report("stored")

        try:
            while True:
                if stopped():
                    raise Cancelled("sweep cancelled")
                while todo and len(ready) < window and len(emb_pending) <= threads:   # one queued beyond the busy
                    start_group(todo.popleft()[1])
                while ready and len(inflight) < window:
                    submit_next()
                if not inflight and not emb_pending and not ready and not todo:
                    break
                finished = [f for f in list(emb_pending) + list(inflight) if f.done()]
                if not finished:
                    time.sleep(0.02)
                    continue
                for fut in finished:
                    # a worker that dies while this batch is handled (its results gone with it) turns a
                    # finished future back to "lost": Dask computes it again, so it stays outstanding
                    if fut.status not in ("finished", "error", "cancelled"):
                        continue
                    if fut in emb_pending:
                        group_embedded(fut)
                    else:
                        record(fut)
        except BaseException:
            outstanding = list(inflight) + list(emb_pending) + [entry[4] for entry in emb_pending.values()]
            try:
                client.cancel(outstanding)
            except Exception:  # noqa: BLE001 - the runs are recorded as cancelled below either way
                pass
            for run_id, _ in inflight.values():
                try:
                    runs_service._finish(store, run_id, "cancelled", error="cancelled by the user")
                except ComputeError:
                    pass
            inflight.clear()
            raise


def cached_embedding_exists(store: Store, key: str) -> bool:
    with store.read() as s:
        return s.get(EmbeddingRow, key) is not None


def _run_spec(spec: SweepSpec, k, params: dict[str, Any], seed_r: int, perturb: float, emb_vectors, emb_seed):
    return runs_service.RunSpec(version_ref=spec.version_ref, version_id=spec.version_id, method=spec.method,
                                k=None if k is None else str(k), params=params, seed=seed_r, repeats=1,
                                perturb=perturb, param_set_version_id=spec.param_set_version_id,
                                embedding_vectors=emb_vectors, embedding_seed=emb_seed)


def _insert_task_run(store: Store, sweep_id: int, run_spec, k, value, r: int, extra: dict[str, Any]) -> int:
    return runs_service._insert_running(
        store, run_spec, provenance_extra=extra,
        after_insert=lambda s, rid: s.add(SweepRun(sweep_id=sweep_id, run_id=rid, k=k, value_json=_value_key(value),
                                                   repeat=r)))


def _close_running_runs(store: Store, sweep_id: int, status: str, error: str) -> None:
    """Runs of this sweep still ``running`` in this process (an interrupt while one was being recorded)
    get their outcome, so no run is left looking alive."""
    with store.write() as s:
        ids = select(SweepRun.run_id).where(SweepRun.sweep_id == sweep_id)
        s.execute(update(Run).where(Run.id.in_(ids), Run.status == "running", Run.pid == os.getpid())
                  .values(status=status, error=error, finished_at=repo.utcnow()))


def _set_status(store: Store, sweep_id: int, status: str, error: str | None) -> None:
    with store.write() as s:
        s.execute(update(Sweep).where(Sweep.id == sweep_id).values(status=status, error=error,
                                                                  finished_at=repo.utcnow()))


def sweep(store: Store, spec: SweepSpec, *, progress: SweepProgress | None = None,
          cancel: Callable[[], bool] | None = None, workers: int | None = None, executor=None) -> dict[str, Any]:
    """Record and compute a sweep; returns :func:`show_sweep`. A Dask cluster is reached (or started)
    before anything is recorded, so an unreachable scheduler leaves the store as it was."""
    with _connected(executor) as executor:
        sweep_id = create_sweep(store, spec)
        return run_sweep(store, sweep_id, progress=progress, cancel=cancel, workers=workers, executor=executor)


@contextlib.contextmanager
def _connected(executor):
    """``executor`` as given, or (Dask) an open :class:`workspace.jobs.executors.DaskCluster` for the block."""
    from workspace.jobs.executors import DaskCluster, ExecutorSpec

    if isinstance(executor, dict):
        executor = ExecutorSpec(**executor)
    if executor is None or isinstance(executor, DaskCluster) or executor.kind != "dask":
        yield executor
        return
    with DaskCluster(executor) as cluster:
        yield cluster


def extend_sweep(store: Store, sweep_id: int, *, ks: Any = None, seeds: int | None = None,
                 progress: SweepProgress | None = None, cancel: Callable[[], bool] | None = None,
                 workers: int | None = None, executor=None) -> dict[str, Any]:
    """Add k values and/or seeds (never fewer) and compute only the tasks without a finished run.

    Also resumes a cancelled or failed sweep when called without ``ks``/``seeds``.
    """
    from workspace.spectral.sweep import parse_k_range

    with store.read() as s:
        sw = s.get(Sweep, sweep_id)
        if sw is None:
            raise NotFoundError(f"no sweep {sweep_id}")
        if _effective_status(sw) == "running":
            raise UsageError(f"sweep {sweep_id} is still running (pid {sw.pid})")
        cur_ks = json.loads(sw.ks_json)
        cur_seeds = sw.seeds
        n_values = len(json.loads(sw.vary_values_json))
    new_ks = cur_ks
    if ks is not None and ks != "":
        if cur_ks == [None] or any(k is None for k in cur_ks):
            raise UsageError(f"sweep {sweep_id} lets the method choose k; it cannot be extended in k")
        new_ks = sorted(set(cur_ks) | set(parse_k_range(ks)))
    new_seeds = cur_seeds
    if seeds is not None:
        if not isinstance(seeds, int) or not cur_seeds <= seeds <= MAX_SEEDS:
            raise ParameterError(f"--seeds must be from {cur_seeds} (the sweep's current count) to {MAX_SEEDS}")
        new_seeds = seeds
    if len(new_ks) * n_values * new_seeds > MAX_TASKS:
        raise ParameterError(f"the sweep would make more than {MAX_TASKS} runs")
    with _connected(executor) as executor:
        with store.write() as s:
            s.execute(update(Sweep).where(Sweep.id == sweep_id).values(ks_json=json.dumps(new_ks), seeds=new_seeds))
        return run_sweep(store, sweep_id, progress=progress, cancel=cancel, workers=workers, executor=executor)


# --- reading ---------------------------------------------------------------------------------------

def _effective_status(sw: Sweep) -> str:
    if sw.status == "running" and sw.host == socket.gethostname() and sw.pid is not None and \
            not _process_alive(sw.pid, sw.process_token):
        return "interrupted"
    return sw.status


def _sweep_row(sw: Sweep, ref: str, counts: dict[str, int]) -> dict[str, Any]:
    return {"sweep": sw.id, "ref": ref, "method": sw.method, "ks": json.loads(sw.ks_json),
            "vary": ({"name": sw.vary_name, "values": json.loads(sw.vary_values_json)} if sw.vary_name else None),
            "seed": sw.seed, "seeds": sw.seeds, "perturb": sw.perturb, "status": _effective_status(sw),
            "error": sw.error, "created": iso_time(sw.started_at), "by": sw.created_by,
            "finished": iso_time(sw.finished_at) if sw.finished_at else None,
            "tasks": {"total": len(json.loads(sw.ks_json)) * len(json.loads(sw.vary_values_json)) * sw.seeds,
                      **counts}}


def _sweeps_query():
    return (select(Sweep, Project.name, Network.name, NetworkVersion.number)
            .join(NetworkVersion, NetworkVersion.id == Sweep.version_id)
            .join(Network, Network.id == NetworkVersion.network_id)
            .join(Project, Project.id == Network.project_id))


def _task_counts(s, sweep_id: int) -> dict[str, int]:
    rows = s.execute(select(Run.status, func.count()).join(SweepRun, SweepRun.run_id == Run.id)
                     .where(SweepRun.sweep_id == sweep_id).group_by(Run.status)).all()
    out = {st: 0 for st in ("done", "failed", "cancelled", "running", "interrupted")}
    out.update({st: int(c) for st, c in rows})
    return out


def list_sweeps(store: Store, ref: str | None = None) -> list[dict[str, Any]]:
    """Sweeps, newest first; ``ref`` narrows to a project, network or version."""
    q = runs_service.narrowed_to(_sweeps_query(), ref)
    with store.read() as s:
        return [_sweep_row(sw, f"{p}/{n}@{v}", _task_counts(s, sw.id))
                for sw, p, n, v in s.execute(q.order_by(Sweep.id.desc())).all()]


def _latest_done_runs(s, sweep_id: int) -> dict[tuple, Run]:
    rows = s.execute(select(SweepRun, Run).join(Run, Run.id == SweepRun.run_id)
                     .where(SweepRun.sweep_id == sweep_id, Run.status == "done").order_by(Run.id)).all()
    out: dict[tuple, Run] = {}
    for link, run in rows:
        out[(link.value_json, link.k, link.repeat)] = run   # newest wins
    return out


def show_sweep(store: Store, sweep_id: int, *, splits: bool = True) -> dict[str, Any]:
    """A sweep with its points (quality, eigengap and stability per k and value), the recommendation
    with its reasons, and the split view between consecutive k."""
    from workspace.compare.sweep import STABLE_ARI, recommend_k, split_view, stability
    from workspace.spectral.embedding import EMBEDDING_METHODS

    with store.read() as s:
        row = s.execute(_sweeps_query().where(Sweep.id == sweep_id)).first()
        if row is None:
            raise NotFoundError(f"no sweep {sweep_id}")
        sw, p, n, v = row
        out = _sweep_row(sw, f"{p}/{n}@{v}", _task_counts(s, sweep_id))
        out["params"] = json.loads(sw.params_json)
        runs = _latest_done_runs(s, sweep_id)
        labels = {key: repo.get_array(s, run.membership_blob).astype(np.int64) for key, run in runs.items()}
        eig = {key: (repo.get_array(s, run.eigenvalues_blob) if run.eigenvalues_blob else np.empty(0))
               for key, run in runs.items() if key[2] == 0}
        ks = json.loads(sw.ks_json)
        values = json.loads(sw.vary_values_json)
        points, recommendations, split_rows = [], [], []
        for value in values:
            vk = _value_key(value)
            value_points = []
            for k in ks:
                reps = [labels[(vk, k, r)] for r in range(sw.seeds) if (vk, k, r) in labels]
                first = runs.get((vk, k, 0))
                if first is None and not reps:
                    continue
                q = json.loads(first.quality_json) if first is not None else {}
                ev = eig.get((vk, k, 0), np.empty(0))
                kk = first.k if first is not None else None
                # the eigengap at k means something only for one operator's spectrum: the k-way methods on
                # one component (not recursive splits, modularity bisections or unions over components)
                diag = json.loads(first.diagnostics_json) if first is not None else {}
                gap = float(ev[k] - ev[k - 1]) if k is not None and ev.shape[0] > k and \
                    sw.method in EMBEDDING_METHODS and diag.get("components_partitioned", 1) == 1 else None
                st = stability(reps)
                point = {"k": k, "value": value, "run": first.id if first is not None else None,
                         "runs": [runs[(vk, k, r)].id for r in range(sw.seeds) if (vk, k, r) in runs],
                         "k_found": kk, "modularity": q.get("modularity"), "normalized_cut": q.get("normalized_cut"),
                         "conductance": q.get("conductance"), "coverage": q.get("coverage"), "eigengap": gap,
                         "repeats": st["repeats"], "ari_mean": st["ari_mean"], "ari_sd": st["ari_sd"],
                         "vi_mean": st["vi_mean"], "vi_sd": st["vi_sd"],
                         "stable": None if st["ari_mean"] is None else bool(st["ari_mean"] >= STABLE_ARI),
                         "embedding": (json.loads(first.provenance_json).get("embedding") or {}).get("key")
                         if first is not None else None}
                if sw.method == "bethe" and ev.size:
                    point["negative_eigenvalues"] = int(np.sum(ev < 0))
                value_points.append(point)
            points.extend(value_points)
            if value_points and all(pt["k"] is not None for pt in value_points):
                rec = recommend_k(value_points)
                recommendations.append({"value": value, **rec})
                if splits:
                    done_ks = [pt["k"] for pt in value_points if pt["run"] is not None]
                    for a, b in zip(done_ks, done_ks[1:]):
                        split_rows.append({"value": value, "from_k": a, "to_k": b,
                                           "communities": split_view(labels[(vk, a, 0)], labels[(vk, b, 0)])})
        out["points"] = points
        out["recommendations"] = recommendations
        out["recommended_k"] = recommendations[0]["recommended"] if len(recommendations) == 1 else None
        out["splits"] = split_rows
        out["stable_ari"] = STABLE_ARI
    return out


def sweep_splits(store: Store, sweep_id: int, from_k: int, to_k: int, value: Any = None) -> dict[str, Any]:
    """Split view between any two k of a sweep (repeat 0 of each)."""
    from workspace.compare.sweep import split_view

    with store.read() as s:
        if s.get(Sweep, sweep_id) is None:
            raise NotFoundError(f"no sweep {sweep_id}")
        runs = _latest_done_runs(s, sweep_id)
        vk = _value_key(value)
        missing = [k for k in (from_k, to_k) if (vk, k, 0) not in runs]
        if missing:
            raise NotFoundError(f"sweep {sweep_id} has no finished run for k={missing[0]}")
        a = repo.get_array(s, runs[(vk, from_k, 0)].membership_blob).astype(np.int64)
        b = repo.get_array(s, runs[(vk, to_k, 0)].membership_blob).astype(np.int64)
    return {"sweep": sweep_id, "value": value, "from_k": from_k, "to_k": to_k, "communities": split_view(a, b)}


def delete_sweep(store: Store, sweep_id: int) -> dict[str, Any]:
    """Remove a sweep record (its grouping). Its runs stay: runs are kept for good, like any run."""
    with store.write() as s:
        sw = s.get(Sweep, sweep_id)
        if sw is None:
            raise NotFoundError(f"no sweep {sweep_id}")
        if _effective_status(sw) == "running":
            raise UsageError(f"sweep {sweep_id} is still running (pid {sw.pid}); stop it first")
        count = s.scalar(select(func.count()).select_from(SweepRun).where(SweepRun.sweep_id == sweep_id))
        s.execute(delete(SweepRun).where(SweepRun.sweep_id == sweep_id))
        s.execute(delete(Sweep).where(Sweep.id == sweep_id))
    return {"sweep": sweep_id, "deleted": True, "runs_kept": int(count or 0)}


def diff_sweeps(store: Store, a: int, b: int) -> dict[str, Any]:
    """Two sweeps side by side: per (k, value) present in both, quality and stability of each and, on the
    same nodes, the ARI between their repeat-0 memberships; and both recommendations."""
    from workspace.compare.scores import adjusted_rand_index

    sa, sb = show_sweep(store, a, splits=False), show_sweep(store, b, splits=False)
    pa = {(json.dumps(p["value"]), p["k"]): p for p in sa["points"]}
    pb = {(json.dumps(p["value"]), p["k"]): p for p in sb["points"]}
    rows = []
    for key in sorted(set(pa) & set(pb), key=lambda t: (t[0], t[1] if t[1] is not None else -1)):
        x, y = pa[key], pb[key]
        row = {"k": x["k"], "value": x["value"], "run_a": x["run"], "run_b": y["run"]}
        for name in ("modularity", "normalized_cut", "conductance", "coverage", "eigengap", "ari_mean", "vi_mean"):
            row[name] = {"a": x[name], "b": y[name]}
        row["membership_ari"] = None
        if x["run"] is not None and y["run"] is not None:
            ids_a, la, _ = runs_service.load_membership(store, x["run"])
            ids_b, lb, _ = runs_service.load_membership(store, y["run"])
            if ids_a.shape == ids_b.shape and np.array_equal(ids_a, ids_b):
                row["membership_ari"] = float(adjusted_rand_index(la, lb))
        rows.append(row)
    brief = ("sweep", "ref", "method", "ks", "vary", "seeds", "perturb", "status", "recommended_k")
    return {"a": {k: sa[k] for k in brief}, "b": {k: sb[k] for k in brief}, "points": rows,
            "only_in_a": [{"k": k, "value": json.loads(v)} for v, k in sorted(set(pa) - set(pb), key=str)],
            "only_in_b": [{"k": k, "value": json.loads(v)} for v, k in sorted(set(pb) - set(pa), key=str)]}


def sweep_size(store: Store, sweep_id: int) -> dict[str, Any]:
    """Stored bytes of a sweep's runs (membership, eigenvalue and stability arrays, each counted once, plus
    their rows' JSON) and of the cached embeddings they used."""

    with store.read() as s:
        runs = list(s.scalars(select(Run).join(SweepRun, SweepRun.run_id == Run.id)
                              .where(SweepRun.sweep_id == sweep_id)).all())
        hashes = {h for r in runs for h in (r.membership_blob, r.eigenvalues_blob, r.stability_blob) if h}
        blob_bytes = repo.stored_size(s, hashes)  # chunks included
        json_bytes = sum(len(r.params_json) + len(r.quality_json) + len(r.diagnostics_json) + len(r.warnings_json)
                         + len(r.provenance_json) for r in runs)
        keys = {json.loads(r.provenance_json).get("embedding", {}).get("key") for r in runs} - {None}
        emb_bytes = 0
        for key in keys:
            e = s.get(EmbeddingRow, key)
            if e is not None:
                emb_bytes += repo.stored_size(s, [e.values_blob, e.vectors_blob])
    return {"runs": len(runs), "run_bytes": blob_bytes + json_bytes, "embedding_bytes": emb_bytes}
