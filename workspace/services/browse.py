"""Read-only queries for browsing front ends (the terminal workspace).

Each function runs one read transaction and returns plain dicts/lists. They
complement :mod:`workspace.services.runs` with what a browser needs to stay
fast on large stores: a filtered count (so a virtual list knows its length
without loading rows) and the whole project/network/version outline with run
counts in a handful of grouped queries.
"""

from __future__ import annotations

import json
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


# --- the ledger: runs with quality and parameter set, sorted and filtered --------------------------------

#: scalar quality measures a ledger row carries (and can be sorted by), in display order
from workspace.services.quickread import LEDGER_MEASURES  # noqa: E402 - one list for both read paths
#: sort keys besides the measures: key -> (column, newest/largest first by default)
LEDGER_SORTS = ("run", "started", "status", "method", "version", "k", "param_set") + LEDGER_MEASURES
#: sort keys whose natural order is descending (higher is the interesting end)
DESCENDING_BY_DEFAULT = {"run", "started", "k", "modularity", "coverage"}


def _ledger_query(columns, scope: str | None, status: str | None, text: str | None, *, sets: bool = True):
    """Runs joined to version/network/project and (outer, when ``sets``) to their parameter set, narrowed."""
    from sqlalchemy import and_, func, or_

    q = (select(*columns).select_from(Run)
         .join(NetworkVersion, NetworkVersion.id == Run.version_id)
         .join(Network, Network.id == NetworkVersion.network_id)
         .join(Project, Project.id == Network.project_id))
    if sets or text:
        q = (q.outerjoin(ParamSetVersion, ParamSetVersion.id == Run.param_set_version_id)
             .outerjoin(ParamSet, ParamSet.id == ParamSetVersion.param_set_id))
    q = _scope(q, scope)
    if status:
        q = q.where(Run.status == status)
    words = (text or "").lower().split()
    if words:
        ref = func.lower(Project.name + "/" + Network.name + "@" + func.cast(NetworkVersion.number, _text_type()))
        fields = [func.lower(Run.method), func.lower(func.coalesce(Run.label, "")), ref, func.lower(Run.status),
                  func.lower(func.coalesce(ParamSet.name, "")), func.lower(Run.kind)]
        conds = []
        for w in words:
            if w.isdigit():  # a number also finds that run id or k
                conds.append(or_(*(f.contains(w, autoescape=True) for f in fields), Run.id == int(w),
                                 Run.k == int(w)))
            else:
                conds.append(or_(*(f.contains(w, autoescape=True) for f in fields)))
        q = q.where(and_(*conds))
    return q


def _text_type():
    from sqlalchemy import String

    return String()


def _measure(name: str):
    """A scalar quality measure read from the run's JSON (``json_extract`` / ``->>`` per dialect)."""
    from sqlalchemy import JSON, type_coerce

    return type_coerce(Run.quality_json, JSON)[name].as_float()


def count_ledger_runs(store: Store, scope: str | None = None, *, status: str | None = None,
                      text: str | None = None) -> int:
    """How many rows :func:`ledger_runs` pages through for the same ``scope``, ``status`` and ``text``."""
    if not scope and not text:  # the whole store: no joins needed to count
        q = select(func.count(Run.id))
        if status:
            q = q.where(Run.status == status)
    else:
        q = _ledger_query([func.count(Run.id)], scope, status, text, sets=False)
    with store.read() as s:
        return int(s.scalar(q) or 0)


def check_scope(store: Store, scope: str | None) -> None:
    """Raise NotFoundError (with a 'did you mean') when ``scope`` (``P``, ``P/N`` or ``P/N@V``)
    names a project, network or version the store does not hold; None is the whole store."""
    if scope is None:
        return
    from workspace.services.networks import project_not_found, resolve_version
    from workspace.store import repo

    with store.read() as s:
        if "/" not in scope:
            if repo.find_project(s, scope) is None:
                raise project_not_found(s, scope)
            return
        resolve_version(s, VersionRef.parse(scope))


def ledger_runs(store: Store, scope: str | None = None, *, status: str | None = None, text: str | None = None,
                sort: str = "run", descending: bool | None = None, limit: int | None = None,
                offset: int = 0) -> list[dict[str, Any]]:
    """Runs for a ledger: the run record plus its parameter set and scalar quality measures.

    Parameters
    ----------
    store : Store
    scope : str or None
        ``None`` (whole store), ``P``, ``P/N`` or ``P/N@V``.
    status : str or None
        Only runs of this status.
    text : str or None
        Case-insensitive words, each of which must occur in the method, the
        attached label, ``project/network@version``, the status, the parameter
        set name or the kind; a whole number also matches that run id or k.
    sort : str
        One of :data:`LEDGER_SORTS` (a measure sorts by its recorded value;
        runs without it come last in either direction).
    descending : bool or None
        None picks the natural direction: newest / largest first for run,
        started, k, modularity and coverage, ascending otherwise (smaller cut,
        conductance and normalized cut are better). Ties fall back to the run id,
        newest first.
    limit, offset : int
        One page of rows (SQL ``LIMIT/OFFSET``).

    Returns
    -------
    list of dict
        The keys of :func:`workspace.services.runs.list_runs` plus ``param_set``
        (``P/NAME@V`` or None) and ``quality`` (``{measure: float}`` for the
        measures of :data:`LEDGER_MEASURES` the run recorded).
    """
    from workspace.errors import UsageError
    from workspace.services.runs import _run_row_dict, _with_tags

    if sort not in LEDGER_SORTS:
        raise UsageError(f"cannot sort runs by {sort!r}; choose one of: {', '.join(LEDGER_SORTS)}")
    if descending is None:
        descending = sort in DESCENDING_BY_DEFAULT
    q = _ledger_query([Run, Project.name, Network.name, NetworkVersion.number, ParamSet.name,
                       ParamSetVersion.number], scope, status, text)
    key = {"run": Run.id, "started": Run.started_at, "status": Run.status, "method": Run.method,
           "version": Project.name + "/" + Network.name, "k": Run.k, "param_set": ParamSet.name}.get(sort)
    if key is None:
        key = _measure(sort)
    # runs without the value last, whichever the direction (run ids and start times are never missing,
    # and leaving the test out lets SQLite walk the primary key instead of sorting every run)
    order = [] if sort in ("run", "started", "status", "method", "version") else [key.is_(None)]
    if sort == "run":
        order.append(Run.id.desc() if descending else Run.id.asc())
    else:
        order.append(key.desc() if descending else key.asc())
    if sort == "version":
        order.append(NetworkVersion.number.desc() if descending else NetworkVersion.number.asc())
    order.append(Run.id.desc())
    q = q.order_by(*order).offset(offset)
    if limit is not None:
        q = q.limit(limit)
    out = []
    with store.read() as s:
        for run, project, network, number, ps_name, ps_number in s.execute(q).all():
            row = _run_row_dict(run, project, network, number)
            row["param_set"] = f"{project}/{ps_name}@{ps_number}" if ps_name else None
            try:
                quality = json.loads(run.quality_json or "{}")
            except ValueError:
                quality = {}
            row["quality"] = {m: float(quality[m]) for m in LEDGER_MEASURES
                              if isinstance(quality.get(m), (int, float)) and not isinstance(quality.get(m), bool)}
            out.append(row)
        _with_tags(s, "run", out, "run")
    return out


def adjacent_run(store: Store, run_id: int, step: int) -> int | None:
    """The id of the nearest stored run after (``step`` > 0) or before (``step`` < 0) ``run_id``; None at the end.

    Run ids can have gaps (a run deleted, a write rolled back), so stepping is by
    the stored ids, not by arithmetic.
    """
    q = select(Run.id)
    q = q.where(Run.id > run_id).order_by(Run.id.asc()) if step > 0 else q.where(Run.id < run_id).order_by(
        Run.id.desc())
    with store.read() as s:
        return s.scalar(q.limit(1))
