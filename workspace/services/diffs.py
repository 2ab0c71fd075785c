"""Membership diffs between runs (any versions of a network) and chains of runs."""

from __future__ import annotations

from contextlib import contextmanager
from typing import Any, Iterator

from sqlalchemy import select

from workspace.errors import NotFoundError, UsageError
from workspace.services import runs as runs_service
from workspace.services.params import parse_params_ref
from workspace.store.db import Store
from workspace.store.schema import Network, NetworkVersion, ParamSet, ParamSetVersion, Project, Run


def diff_runs(store: Store, run_a: int, run_b: int, *, nodes: str = "common",
              nmi_normalization: str = "arithmetic", moved_limit: int | None = None,
              dense_table: bool = False, moved_rows: bool = False) -> dict[str, Any]:
    """Scores, matched communities, events, moved nodes and the contingency table of two runs.

    The contingency comes sparse (``cells``: ``[a, b, count]`` per non-zero cell); with
    ``dense_table`` also as a dense ``counts`` list of lists, for tables of at most
    ``workspace.compare.diff.DENSE_LIMIT`` cells (ParameterError otherwise). ``moved_rows``
    gives ``moved_nodes`` as ``[node, from, to, from_match]`` rows (the JSON form) instead of
    dicts.
    """
    from workspace.compare import compare_memberships

    if nodes not in ("common", "all"):
        raise UsageError("--nodes takes 'common' or 'all'")
    (ids_a, labels_a, sa), (ids_b, labels_b, sb) = runs_service.load_memberships(store, [run_a, run_b])
    if sa["network"] != sb["network"]:
        # different networks can still be compared by node id; say so rather than refuse
        note = f"runs belong to different networks ({sa['network']} and {sb['network']}); aligned by node id"
    else:
        note = None
    with paused_gc():
        d = compare_memberships(ids_a, labels_a, ids_b, labels_b, nodes=nodes,
                                nmi_normalization=nmi_normalization, moved_limit=moved_limit)
        out = {"a": _brief(sa), "b": _brief(sb), "nodes": nodes,
               **d.to_dict(dense=dense_table, moved_rows=moved_rows)}
    out["shown_labels"] = _shown_labels(store, run_a, run_b, labels_a, labels_b, d)
    if note:
        out.setdefault("notes", []).append(note)
    return out


def _shown_labels(store: Store, run_a: int, run_b: int, labels_a, labels_b, d) -> dict[str, Any]:
    """The labels people see on each side (see :func:`workspace.services.tracking.shown_for_diff`):
    moved-node listings show both sides in one numbering, so a node never seems to move from 3 to 3."""
    from workspace.services.tracking import shown_for_diff

    k_a = int(labels_a.max()) + 1 if labels_a.size and labels_a.max() >= 0 else 0
    k_b = int(labels_b.max()) + 1 if labels_b.size and labels_b.max() >= 0 else 0
    with store.read() as s:
        return shown_for_diff(s, run_a, run_b, k_a, k_b, [(m.a, m.b) for m in d.matches])


@contextmanager
def paused_gc() -> Iterator[None]:
    """Pause the cyclic garbage collector while a result of many small lists and dicts is built.

    A diff of fine partitions builds ~10^5 small containers (cells, moved nodes); each batch of
    new containers triggers a collection that walks all of them again, which costs several times
    the building itself. They hold no reference cycles, so nothing is lost by pausing.
    """
    import gc

    was = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was:
            gc.enable()


def _brief(summary: dict[str, Any]) -> dict[str, Any]:
    return {k: summary[k] for k in ("run", "kind", "method", "label", "ref", "k", "membership_hash")}


def track_runs_of_params(store: Store, params_ref: str, network: str | None = None) -> list[int]:
    """For a parameter set: the latest finished run on each version (oldest version first)."""
    project, name, version = parse_params_ref(params_ref)
    with store.read() as s:
        q = (select(Run.id, NetworkVersion.network_id, NetworkVersion.number, Network.name)
             .join(ParamSetVersion, ParamSetVersion.id == Run.param_set_version_id)
             .join(ParamSet, ParamSet.id == ParamSetVersion.param_set_id)
             .join(Project, Project.id == ParamSet.project_id)
             .join(NetworkVersion, NetworkVersion.id == Run.version_id)
             .join(Network, Network.id == NetworkVersion.network_id)
             .where(Project.name == project, ParamSet.name == name, Run.status == "done")
             .order_by(NetworkVersion.number, Run.id))
        if version is not None:
            q = q.where(ParamSetVersion.number == version)
        if network is not None:
            q = q.where(Network.name == network.split("/", 1)[-1])
        rows = s.execute(q).all()
    if not rows:
        raise NotFoundError(f"no finished run uses parameter set {params_ref}")
    nets = {r.network_id for r in rows}
    if len(nets) > 1:
        raise UsageError(f"parameter set {params_ref} has runs on several networks; name one with --network")
    latest: dict[int, int] = {}
    for r in rows:
        latest[r.number] = r.id  # rows are ordered by run id: the last one wins
    return [latest[v] for v in sorted(latest)]


def track(store: Store, run_ids: list[int], *, nmi_normalization: str = "arithmetic",
          moved_limit: int | None = None, moved_rows: bool = False) -> dict[str, Any]:
    """Step-by-step diffs of a chain of runs and how communities continue along it
    (``moved_rows`` as in :func:`diff_runs`)."""
    from workspace.compare import track_memberships

    if len(run_ids) < 2:
        raise UsageError("a track needs at least two runs")
    seq, briefs = [], []
    for rid, (ids, labels, summary) in zip(run_ids, runs_service.load_memberships(store, run_ids)):
        seq.append((str(rid), ids, labels))
        briefs.append(_brief(summary))
    with paused_gc():
        doc = track_memberships(seq, nmi_normalization=nmi_normalization,
                                moved_limit=moved_limit).to_dict(moved_rows=moved_rows)
    doc["run_details"] = briefs
    return doc
