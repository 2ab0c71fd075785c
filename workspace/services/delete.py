"""Deleting a whole project or network, or single runs: one transaction, nothing half-gone.

Versions, parameter-set versions and runs are never edited. Versions and
parameter sets are removed only with the project or network that holds them;
runs (cancelled or test runs, say) can also be removed one by one. Arrays no
longer referenced by anything are removed in the same transaction.
"""

from __future__ import annotations

from typing import Any

from sqlalchemy import delete, func, select, text
from sqlalchemy.exc import IntegrityError

from workspace.errors import ConflictError, NotFoundError, UsageError
from workspace.store import repo
from workspace.store.db import Store
from workspace.store.schema import Network, NetworkVersion, ParamSet, Project, Run

_BLOB_COLUMNS = (
    ("network_versions", ("node_offsets_blob", "node_bytes_blob", "edge_u_blob", "edge_v_blob", "weight_blob")),
    ("runs", ("membership_blob", "stability_blob", "eigenvalues_blob")),
    ("embeddings", ("values_blob", "vectors_blob")),
    ("node_table_columns", ("values_blob", "present_blob", "dictionary_offsets_blob", "dictionary_bytes_blob")),
)


def _orphan_blobs_sql() -> str:
    used = " UNION ".join(f"SELECT {col} FROM {table} WHERE {col} IS NOT NULL"
                          for table, cols in _BLOB_COLUMNS for col in cols)
    return f"DELETE FROM blobs WHERE hash NOT IN ({used})"


def describe_target(store: Store, target: str) -> dict[str, Any]:
    """What deleting ``target`` (``PROJECT`` or ``PROJECT/NETWORK``) would remove, without removing it."""
    project, _, network = target.partition("/")
    if not project or "@" in target or network.count("/"):
        raise UsageError(f"delete takes PROJECT or PROJECT/NETWORK, got {target!r} (versions and runs are kept "
                         "for good; delete their network instead)")
    with store.read() as s:
        proj = repo.find_project(s, project)
        if proj is None:
            from workspace.services.networks import project_not_found

            raise project_not_found(s, project)
        nets = select(Network.id).where(Network.project_id == proj.id)
        if network:
            net = repo.find_network(s, project, network)
            if net is None:
                from workspace.services.networks import network_not_found

                raise network_not_found(s, project, network)
            nets = select(Network.id).where(Network.id == net.id)
        versions = s.scalar(select(func.count(NetworkVersion.id)).where(NetworkVersion.network_id.in_(nets)))
        run_count = s.scalar(select(func.count(Run.id)).join(NetworkVersion, NetworkVersion.id == Run.version_id)
                             .where(NetworkVersion.network_id.in_(nets)))
        net_count = s.scalar(select(func.count()).select_from(nets.subquery()))
        params = 0 if network else s.scalar(select(func.count(ParamSet.id)).where(ParamSet.project_id == proj.id))
    return {"target": target, "kind": "network" if network else "project", "networks": net_count,
            "versions": versions, "runs": run_count, "parameter_sets": params}


def delete_target(store: Store, target: str) -> dict[str, Any]:
    """Delete a project (with its networks, versions, runs and parameter sets) or one network."""
    summary = describe_target(store, target)
    project, _, network = target.partition("/")
    with store.write() as s:
        if network:
            net = repo.find_network(s, project, network)
            if net is None:
                raise NotFoundError(f"no network {project}/{network}")
            s.execute(delete(Network).where(Network.id == net.id))
        else:
            proj = repo.find_project(s, project)
            if proj is None:
                raise NotFoundError(f"no project named {project!r}")
            s.execute(delete(Project).where(Project.id == proj.id))
        removed = s.execute(text(_orphan_blobs_sql())).rowcount
    return {**summary, "deleted": True, "arrays_removed": removed}


# --- single runs ----------------------------------------------------------------------------

def _run_ids(run_ids) -> list[int]:
    ids: list[int] = []
    for r in run_ids:
        try:
            rid = int(r)
        except (TypeError, ValueError):
            raise UsageError(f"not a run id: {r!r}") from None
        if rid not in ids:
            ids.append(rid)
    if not ids:
        raise UsageError("give at least one run id")
    return ids


def describe_runs(store: Store, run_ids) -> dict[str, Any]:
    """What deleting these runs would remove; refuses (nothing removed) when it cannot be done.

    A run still ``running`` cannot be deleted (its process would try to record
    its outcome); a run that another run was repeated from (``rerun_of``) can be
    deleted only together with those reruns, so no record points at nothing.
    """
    ids = _run_ids(run_ids)
    with store.read() as s:
        rows = s.execute(select(Run.id, Run.status, Run.kind, Run.method, Run.label, NetworkVersion.number,
                                Network.name, Project.name.label("project"))
                         .join(NetworkVersion, NetworkVersion.id == Run.version_id)
                         .join(Network, Network.id == NetworkVersion.network_id)
                         .join(Project, Project.id == Network.project_id)
                         .where(Run.id.in_(ids))).all()
        found = {r.id: r for r in rows}
        missing = [i for i in ids if i not in found]
        if missing:
            raise NotFoundError(f"no run {', '.join(map(str, missing))}; nothing deleted")
        running = [i for i in ids if found[i].status == "running"]
        if running:
            raise ConflictError(f"run {', '.join(map(str, running))} is still running: cancel it (Ctrl-C in its "
                                "terminal, or the UI's cancel) and delete it afterwards; nothing deleted")
        reruns = s.execute(select(Run.id, Run.rerun_of).where(Run.rerun_of.in_(ids), Run.id.not_in(ids))).all()
        if reruns:
            pairs = ", ".join(f"run {r.id} repeats run {r.rerun_of}" for r in reruns)
            raise ConflictError(f"{pairs}: delete them together (cutbook delete-run "
                                f"{' '.join(map(str, ids + sorted({r.id for r in reruns})))}); nothing deleted")
    runs = []
    for i in ids:
        r = found[i]
        runs.append({"run": i, "status": r.status, "kind": r.kind,
                     "method": r.method if r.kind == "computed" else f"attached:{r.label}",
                     "ref": f"{r.project}/{r.name}@{r.number}"})
    return {"runs": runs}


def delete_runs(store: Store, run_ids) -> dict[str, Any]:
    """Delete runs (with their community tables, measures and annotations) in one transaction.

    Arrays no other record uses are removed in the same transaction. The checks
    of :func:`describe_runs` are repeated inside it, so a run that started being
    depended on in between is not deleted.
    """
    ids = _run_ids(run_ids)
    summary = describe_runs(store, ids)
    with store.write() as s:
        if s.scalar(select(func.count(Run.id)).where(Run.id.in_(ids), Run.status != "running")) != len(ids) or \
                s.scalar(select(func.count(Run.id)).where(Run.rerun_of.in_(ids), Run.id.not_in(ids))):
            raise ConflictError("the runs changed while deleting (one is running or was repeated); nothing deleted")
        try:
            s.execute(delete(Run).where(Run.id.in_(ids)))
            s.flush()
        except IntegrityError as exc:
            raise ConflictError(f"run {', '.join(map(str, ids))} is referred to by other records "
                                f"({exc.orig}); nothing deleted") from None
        removed = s.execute(text(_orphan_blobs_sql())).rowcount
    return {**summary, "deleted": True, "arrays_removed": removed}
