"""Read-only queries for browsing front ends (the terminal workspace).

Each function runs one read transaction and returns plain dicts/lists. They
complement :mod:`workspace.services.runs` with what a browser needs to stay
fast on large stores: a filtered count (so a virtual list knows its length
without loading rows) and the whole project/network/version outline with run
counts in a handful of grouped queries.
"""

from __future__ import annotations

from typing import Any

from sqlalchemy import func, select

from workspace.domain import VersionRef
from workspace.store.db import Store
from workspace.store.schema import Network, NetworkVersion, ParamSet, ParamSetVersion, Project, Run


def _scope(q, scope: str | None):
    """Narrow a runs query joined to versions/networks/projects to ``P``, ``P/N`` or ``P/N@V``."""
    if not scope:
        return q
    if "/" in scope:
        ref = VersionRef.parse(scope)
        q = q.where(Project.name == ref.project, Network.name == ref.network)
        if ref.version is not None:
            q = q.where(NetworkVersion.number == ref.version)
        return q
    return q.where(Project.name == scope)


def count_runs_in(store: Store, scope: str | None = None, *, status: str | None = None) -> int:
    """Number of runs in a scope (``None`` = whole store; ``P``; ``P/N``; ``P/N@V``), optionally of one status.

    The same narrowing as :func:`workspace.services.runs.list_runs`, so
    ``count_runs_in(s, x)`` rows can be paged with ``list_runs(s, x, limit=, offset=)``.
    """
    q = select(func.count(Run.id))
    if scope:
        q = (q.join(NetworkVersion, NetworkVersion.id == Run.version_id)
             .join(Network, Network.id == NetworkVersion.network_id)
             .join(Project, Project.id == Network.project_id))
        q = _scope(q, scope)
    if status:
        q = q.where(Run.status == status)
    with store.read() as s:
        return int(s.scalar(q) or 0)


def outline(store: Store) -> list[dict[str, Any]]:
    """Projects -> networks -> versions, each version with its node/edge counts and number of runs.

    Returns ``[{"project", "networks": [{"network", "versions": [{"version", "ref", "nodes",
    "edges", "message", "runs"}]}], "param_sets": int}]`` sorted by name / number.
    """
    with store.read() as s:
        projects = s.execute(select(Project.id, Project.name).order_by(Project.name)).all()
        nets = s.execute(select(Network.id, Network.project_id, Network.name).order_by(Network.name)).all()
        versions = s.execute(select(NetworkVersion.id, NetworkVersion.network_id, NetworkVersion.number,
                                    NetworkVersion.n_nodes, NetworkVersion.n_edges, NetworkVersion.message)
                             .order_by(NetworkVersion.number)).all()
        run_counts = dict(s.execute(select(Run.version_id, func.count(Run.id)).group_by(Run.version_id)).all())
        ps_counts = dict(s.execute(select(ParamSet.project_id, func.count(ParamSetVersion.id))
                                   .join(ParamSetVersion, ParamSetVersion.param_set_id == ParamSet.id)
                                   .group_by(ParamSet.project_id)).all())
    by_net: dict[int, list[dict[str, Any]]] = {}
    net_names = {n.id: (n.project_id, n.name) for n in nets}
    proj_names = {p.id: p.name for p in projects}
    for v in versions:
        pid, nname = net_names[v.network_id]
        by_net.setdefault(v.network_id, []).append({
            "version": v.number, "ref": f"{proj_names[pid]}/{nname}@{v.number}", "nodes": v.n_nodes,
            "edges": v.n_edges, "message": v.message, "runs": int(run_counts.get(v.id, 0))})
    out = []
    for p in projects:
        out.append({"project": p.name, "param_sets": int(ps_counts.get(p.id, 0)),
                    "networks": [{"network": n.name, "ref": f"{p.name}/{n.name}", "versions": by_net.get(n.id, [])}
                                 for n in nets if n.project_id == p.id]})
    return out
