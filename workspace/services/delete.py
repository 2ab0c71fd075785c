"""Deleting a whole project or network: one transaction, nothing half-gone.

Versions, parameter-set versions and runs are never edited; the only way to
remove them is with the project or network that holds them. Arrays no longer
referenced by anything are removed in the same transaction.
"""

from __future__ import annotations

from typing import Any

from sqlalchemy import delete, func, select, text

from workspace.errors import NotFoundError, UsageError
from workspace.store import repo
from workspace.store.db import Store
from workspace.store.schema import Blob, Network, NetworkVersion, ParamSet, Project, Run

_BLOB_COLUMNS = (
    ("network_versions", ("node_offsets_blob", "node_bytes_blob", "edge_u_blob", "edge_v_blob", "weight_blob")),
    ("runs", ("membership_blob", "stability_blob", "eigenvalues_blob")),
    ("embeddings", ("values_blob", "vectors_blob")),
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
            raise NotFoundError(f"no project named {project!r}")
        nets = select(Network.id).where(Network.project_id == proj.id)
        if network:
            net = repo.find_network(s, project, network)
            if net is None:
                raise NotFoundError(f"no network {project}/{network}")
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
