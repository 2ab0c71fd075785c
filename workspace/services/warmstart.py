"""Warm starts: where a run's eigensolver start block comes from, and how it is rebuilt.

A k-way spectral run (njw, shi-malik, regularized, bethe) on a new version of a
network can start its eigensolver from what the previous version already
knows (see :func:`workspace.spectral.eigen.warm_start_vector`). Two sources,
in this order of preference for ``warm="auto"``:

1. ``embedding:<key>`` — a cached embedding (table ``embeddings``, written by
   sweeps) of the previous version with the same operator and operator
   parameters: its eigenvectors, row ``i`` being node ``embedded_nodes(A)[i]``
   of that version.
2. ``run:<id>`` — the newest finished run of the previous version with the
   same method, parameters and k. A run stores a membership, not
   eigenvectors, so the block has one column per community ``c``: the
   indicator of ``c`` scaled by :math:`\\sqrt{d_i}` for the normalised
   operators (the leading eigenvectors of :math:`D^{-1/2} A D^{-1/2}` on a
   graph of ``k`` loosely joined groups are close to
   :math:`D^{1/2}\\mathbf{1}_c`; von Luxburg 2007, Sec. 7) and unscaled for the
   Bethe Hessian, whose informative eigenvectors are close to group
   indicators (Saade, Krzakala & Zdeborová 2014).

Either way the block is mapped onto the new version's nodes by node id: rows
of nodes that are gone are dropped, nodes that are new get seeded uniform
noise (``default_rng([seed, 0x3E7])``) of each column's root-mean-square size.
The run records ``warm_from`` (the source) in its provenance and the block's
sha256 in its diagnostics, so ``rerun`` rebuilds the identical block or says
that it cannot. No store writes happen here.
"""

from __future__ import annotations

import hashlib
import json
from typing import Any

from sqlalchemy import select

from workspace.errors import NotFoundError, UsageError
from workspace.store import repo
from workspace.store.db import Store
from workspace.store.schema import Embedding as EmbeddingRow
from workspace.store.schema import Network, NetworkVersion, Project, Run

WARM_MODES = ("auto", "off")
MAX_COLUMNS = 64


def _version_ref(s, version_id: int) -> str:
    v = s.get(NetworkVersion, version_id)
    net = s.get(Network, v.network_id)
    proj = s.get(Project, net.project_id)
    return f"{proj.name}/{net.name}@{v.number}"


def warm_capable(spec) -> bool:
    """True for a single, unperturbed k-way run that solves its own eigenproblem."""
    from workspace.spectral.embedding import EMBEDDING_METHODS

    return (spec.method in EMBEDDING_METHODS and spec.repeats == 1 and not spec.perturb
            and spec.embedding_vectors is None)


def resolve(store: Store, spec, warm: Any) -> tuple[str | None, str]:
    """The warm-start source of a run request: ``(warm_from or None, why)``.

    ``warm``: ``"off"``/None (no warm start), ``"auto"`` (the previous version's cached embedding of
    the same operator, else its newest finished run of the same method, parameters and k; none found
    means a cold run) or a run id (that run's membership; it must be a finished k-way run whose method
    uses the same operator).
    """
    from workspace.spectral.embedding import operator_for

    if warm is None or warm == "off":
        return None, "off"
    explicit = None
    if warm != "auto":
        try:
            explicit = int(warm)
        except (TypeError, ValueError):
            raise UsageError(f"--warm takes auto, off or a run id (got {warm!r})") from None
    if not warm_capable(spec):
        if explicit is not None:
            raise UsageError(f"a warm start applies to single njw, shi-malik, regularized or bethe runs "
                             f"(not {spec.method}" + (" with repeats" if spec.repeats > 1 else "") + ")")
        return None, f"{spec.method} runs are not warm-started"
    operator = operator_for(spec.method, spec.params)
    with store.read() as s:
        if explicit is not None:
            run = s.get(Run, explicit)
            if run is None:
                raise NotFoundError(f"no run {explicit} to warm-start from")
            if run.membership_blob is None or run.status != "done":
                raise UsageError(f"run {explicit} has no membership (status {run.status}); it cannot be a warm start")
            try:
                other = operator_for(run.method, json.loads(run.params_json))
            except Exception:  # noqa: BLE001 - any method without the operator
                other = None
            if other != operator:
                raise UsageError(f"run {explicit} ({run.method}) does not use the operator of {spec.method} "
                                 f"{operator[0]} {operator[1]}; warm-start from a run of the same operator")
            return f"run:{explicit}", "given"
        version = s.get(NetworkVersion, spec.version_id)
        prev = s.scalars(select(NetworkVersion).where(NetworkVersion.network_id == version.network_id,
                                                      NetworkVersion.number < version.number)
                         .order_by(NetworkVersion.number.desc()).limit(1)).first()
        if prev is None:
            return None, "no previous version"
        rows = s.execute(select(EmbeddingRow.key, EmbeddingRow.n_vectors, EmbeddingRow.fields_json)
                         .where(EmbeddingRow.version_id == prev.id, EmbeddingRow.operator == operator[0])
                         .order_by(EmbeddingRow.n_vectors.desc(), EmbeddingRow.key)).all()
        for key, _, fields_json in rows:
            fields = json.loads(fields_json)
            if fields.get("operator_params") == operator[1] and \
                    fields.get("solver", {}).get("components") == spec.params.get("components"):
                return f"embedding:{key}", "cached embedding of the previous version"
        wanted = _result_params(spec.params)
        candidates = s.execute(select(Run.id, Run.params_json).where(
            Run.version_id == prev.id, Run.kind == "computed", Run.status == "done", Run.method == spec.method,
            Run.repeats == 1, Run.k_requested == spec.k, Run.membership_blob.is_not(None))
            .order_by(Run.id.desc())).all()
        for run_id, params_json in candidates:
            if _result_params(json.loads(params_json)) == wanted:
                return f"run:{run_id}", "run of the previous version"
    return None, "the previous version has no run or cached embedding of the same parameters"


#: Parameters that change how a run is computed, not its result: a run of the previous version that
#: differs only in these is still a warm start of the same parameters (threads: every output entry is
#: computed by one thread whatever their number; the default changed from 1 to 0 = automatic).
EXECUTION_PARAMS = ("threads", "time_limit_s")


def _result_params(params: dict) -> dict:
    return {key: value for key, value in params.items() if key not in EXECUTION_PARAMS}


def _map_rows(old_ids, rows, new_ids):
    """(position in ``rows`` of each new node's id among ``old_ids[rows]``, present mask), for
    canonical id lists, numpy or packed (``compare.align_nodes``: two stored versions a few ids
    apart are merged from their bytes; a string sort and search of 10M 40-character ids took
    seconds and 1.6 GB a version). A node absent from the old rows gets position 0 (masked)."""
    import numpy as np

    from workspace.compare import align_nodes

    al = align_nodes(old_ids, new_ids)
    old_index = np.zeros(al.n_b, dtype=np.int64)
    old_index[al.common_b] = al.common_a
    present = np.zeros(al.n_b, dtype=bool)
    present[al.common_b] = True
    if rows.shape[0] != al.n_a:        # some old nodes have no row (an embedding of some components)
        row_of = np.full(al.n_a, -1, dtype=np.int64)
        row_of[rows] = np.arange(rows.shape[0])
        old_index = row_of[old_index]
        present &= old_index >= 0
        old_index[~present] = 0
    return old_index, present


def start_block(store: Store, warm_from: str, graph, spec):
    """Rebuild the start block of ``warm_from`` for ``graph`` (the run's version).

    Returns ``(block, info)``: ``block`` float64 (n, c) in the graph's node order; ``info`` the JSON
    facts (source, version it came from, columns, mapped/new/dropped node counts, ``block_sha256``).

    Raises
    ------
    workspace.errors.NotFoundError
        The source (run or cached embedding) is no longer in the store.
    """
    import numpy as np

    kind, _, ident = warm_from.partition(":")
    new_ids = graph.node_ids
    n = len(new_ids)
    with store.read() as s:
        if kind == "run":
            run = s.get(Run, int(ident))
            if run is None or run.membership_blob is None:
                raise NotFoundError(f"the warm-start source run {ident} is no longer in the store; "
                                    "its start block cannot be rebuilt")
            old_version = s.get(NetworkVersion, run.version_id)
            old_ids = repo.load_packed_node_ids(s, old_version)
            labels = repo.get_array(s, run.membership_blob).astype(np.int64)
            rows = np.arange(len(old_ids))
            source_ref = _version_ref(s, run.version_id)
            vectors = None
        elif kind == "embedding":
            row = s.get(EmbeddingRow, ident)
            if row is None:
                raise NotFoundError(f"the warm-start source, cached embedding {ident[:12]}, is no longer in "
                                    "the store (pruned?); its start block cannot be rebuilt")
            from workspace.services.sweeps import _load_embedding

            emb = _load_embedding(s, row)
            old_version = s.get(NetworkVersion, row.version_id)
            old_graph = repo.load_graph(s, old_version, packed=True)
            old_ids = old_graph.node_ids
            fields = json.loads(row.fields_json)
            source_ref = _version_ref(s, row.version_id)
            vectors = emb.vectors
            labels = None
        else:
            raise UsageError(f"unknown warm-start source {warm_from!r}")
    if vectors is not None:
        if vectors.shape[0] == len(old_ids):
            rows = np.arange(len(old_ids))
        else:
            from workspace.spectral.sweep import embedded_nodes

            rows = embedded_nodes(old_graph.adjacency(), fields.get("solver", {}).get("components", "each"),
                                  directed=old_graph.directed)
            if rows is None or rows.shape[0] != vectors.shape[0]:
                raise NotFoundError(f"cached embedding {ident[:12]} no longer matches its version's graph")
        vectors = vectors[:, :MAX_COLUMNS]
    pos, present = _map_rows(old_ids, rows, new_ids)
    rng = np.random.default_rng([int(spec.seed), 0x3E7])
    if vectors is not None:
        block = np.zeros((n, vectors.shape[1]))
        block[present] = vectors[pos[present]]
    else:
        sizes = np.bincount(labels[labels >= 0])
        columns = np.argsort(-sizes, kind="stable")[:MAX_COLUMNS]     # largest communities first
        col_of = np.full(sizes.shape[0], -1, dtype=np.int64)
        col_of[columns] = np.arange(columns.shape[0])
        block = np.zeros((n, columns.shape[0]))
        lab_new = np.where(present, labels[pos], -1)
        col = np.where(lab_new >= 0, col_of[np.maximum(lab_new, 0)], -1)
        d = graph.degrees()
        from workspace.spectral.embedding import operator_for

        scale = np.ones(n) if operator_for(spec.method, spec.params)[0] == "bethe" else np.sqrt(d)
        has = col >= 0
        block[np.flatnonzero(has), col[has]] = scale[has]
    new = ~present
    if new.any():
        known = block[present]
        rms = np.sqrt(np.mean(known * known, axis=0)) if known.shape[0] else np.ones(block.shape[1])
        block[new] = rng.uniform(-1.0, 1.0, (int(new.sum()), block.shape[1])) * rms
    digest = hashlib.sha256(memoryview(np.ascontiguousarray(block)).cast("B")).hexdigest()   # no copy
    info = {"source": warm_from, "from_version": source_ref, "columns": int(block.shape[1]),
            "mapped_nodes": int(present.sum()), "new_nodes": int(new.sum()),
            "dropped_nodes": int(rows.shape[0] - present.sum()), "block_sha256": digest}
    return block, info
