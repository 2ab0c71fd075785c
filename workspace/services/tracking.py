"""Tracked analyses and updates: the parameter sets a network re-runs on each new version, the runs
of one update, the change report against the previous version, and community labels that stay put.

An *update* runs every tracked set of a network on one version (after an import of a new version,
or on request) through the ordinary run path (:func:`workspace.services.runs.launch`: a ``running``
record, compute with no transaction open, the outcome; progress and cancellation as for any run).
Each tracked run is then compared with the previous version's run of the same parameter-set version
by :func:`workspace.services.diffs.diff_runs`, the function behind ``cutbook diff``, so the change
report holds exactly what ``diff`` gives on the same two runs.

*Shown labels.* A stored membership keeps its canonical numbering (labels by first appearance in
node order; the membership hash is over it). What people see is renumbered: each community of the
new run takes the shown label of the previous run's community it is matched to (maximum total
overlap, Kuhn 1955, as the diff matches), and every unmatched community a fresh number never used
before along that chain. The renumbering of a tracked run is stored with its update
(``tracked_update_runs.labels_json``), so tables, exports and the report agree and can be revisited.
"""

from __future__ import annotations

import json
import os
import socket
from typing import TYPE_CHECKING, Any, Callable

from sqlalchemy import select

from workspace.domain import VersionRef
from workspace.errors import Cancelled, ConflictError, CutbookError, NotFoundError, UsageError
from workspace.services import iso_time
from workspace.services.liveness import _process_alive, _process_token
from workspace.store.db import Store
from workspace.store.schema import (
    Network, NetworkVersion, ParamSet, ParamSetVersion, Project, Run, TrackedSet, TrackedUpdate,
    TrackedUpdateRun,
)

if TYPE_CHECKING:
    import numpy as np

    from workspace.services.runs import RunSpec

Progress = Callable[[str, int, int | None], None]
#: Event kinds a change report counts (those of ``workspace.compare.events``).
EVENT_KINDS = ("split", "merged", "dissolved", "new", "grown", "shrunk", "kept")


# --- tracked sets ------------------------------------------------------------------------------------

def _network_of(s, ref: str) -> tuple[VersionRef, Network]:
    from workspace.services.networks import network_not_found
    from workspace.store import repo

    vref = VersionRef.parse(ref)
    if vref.version is not None:
        raise UsageError(f"tracked sets belong to a network: give PROJECT/NETWORK, not {ref!r}")
    net = repo.find_network(s, vref.project, vref.network)
    if net is None:
        raise network_not_found(s, vref.project, vref.network)
    return vref, net


def _params_ref(s, psv_id: int) -> str:
    psv = s.get(ParamSetVersion, psv_id)
    ps = s.get(ParamSet, psv.param_set_id)
    proj = s.get(Project, ps.project_id)
    return f"{proj.name}/{ps.name}@{psv.number}"


def _tracked_row(s, t: TrackedSet) -> dict[str, Any]:
    psv = s.get(ParamSetVersion, t.param_set_version_id)
    return {"params": _params_ref(s, t.param_set_version_id), "method": psv.method, "k": psv.k,
            "values": json.loads(psv.values_json), "added": iso_time(t.created_at),
            "by": t.created_by}


def add_tracked(store: Store, network: str, params_ref: str) -> dict[str, Any]:
    """Track a parameter-set version on a network (``P/NAME`` tracks its latest version, pinned).

    Raises ConflictError when it is tracked already, UsageError when the set belongs to another project.
    """
    from workspace.services.params import find_params

    with store.write() as s:
        vref, net = _network_of(s, network)
        project, name, psv = find_params(s, params_ref)
        if project != vref.project:
            raise UsageError(f"parameter set {params_ref} belongs to project {project!r}, not {vref.project!r}")
        if s.scalar(select(TrackedSet.id).where(TrackedSet.network_id == net.id,
                                                TrackedSet.param_set_version_id == psv.id)) is not None:
            raise ConflictError(f"{project}/{name}@{psv.number} is tracked on {network} already")
        from workspace.store import repo

        t = TrackedSet(network_id=net.id, param_set_version_id=psv.id, created_at=repo.utcnow())
        s.add(t)
        s.flush()
        return {"network": f"{vref.project}/{vref.network}", "added": _tracked_row(s, t),
                "tracked": _tracked_rows(s, net.id)}


def remove_tracked(store: Store, network: str, params_ref: str) -> dict[str, Any]:
    """Stop tracking a parameter-set version (``P/NAME`` without ``@V``: every tracked version of it).
    Runs and updates made so far are kept."""
    from workspace.services.params import parse_params_ref

    project, name, number = parse_params_ref(params_ref)
    with store.write() as s:
        vref, net = _network_of(s, network)
        q = (select(TrackedSet).join(ParamSetVersion, ParamSetVersion.id == TrackedSet.param_set_version_id)
             .join(ParamSet, ParamSet.id == ParamSetVersion.param_set_id)
             .join(Project, Project.id == ParamSet.project_id)
             .where(TrackedSet.network_id == net.id, Project.name == project, ParamSet.name == name))
        if number is not None:
            q = q.where(ParamSetVersion.number == number)
        found = s.scalars(q).all()
        if not found:
            raise NotFoundError(f"{params_ref} is not tracked on {vref.project}/{vref.network}")
        removed = [_params_ref(s, t.param_set_version_id) for t in found]
        for t in found:
            s.delete(t)
        s.flush()
        return {"network": f"{vref.project}/{vref.network}", "removed": removed,
                "tracked": _tracked_rows(s, net.id)}


def _tracked_rows(s, network_id: int) -> list[dict[str, Any]]:
    rows = s.scalars(select(TrackedSet).where(TrackedSet.network_id == network_id).order_by(TrackedSet.id)).all()
    return [_tracked_row(s, t) for t in rows]


def list_tracked(store: Store, network: str) -> dict[str, Any]:
    """The tracked parameter-set versions of a network, in the order they were added."""
    with store.read() as s:
        vref, net = _network_of(s, network)
        return {"network": f"{vref.project}/{vref.network}", "tracked": _tracked_rows(s, net.id)}


# --- one update --------------------------------------------------------------------------------------

def _tracked_spec(store: Store, version_ref: str, params_ref: str) -> RunSpec:
    """The run spec of one tracked set on one version: the ONE place every tracked run is prepared.

    Warm-started (``warm="auto"``): the eigensolver starts from the previous version's cached
    embedding of the same operator, else from its run of the same parameters, mapped by node id; a
    cold solve when there is neither (see :mod:`workspace.services.warmstart`).
    """
    from workspace.services.runs import prepare_run

    return prepare_run(store, version_ref, params_ref=params_ref, warm="auto")


def _previous_run(s, network_id: int, number: int, psv_id: int) -> tuple[int | None, int | None]:
    """(run id, version id) of the newest finished run of this parameter-set version on the newest
    earlier version of the network that has one; (None, None) when there is none."""
    row = s.execute(select(Run.id, NetworkVersion.id)
                    .join(NetworkVersion, NetworkVersion.id == Run.version_id)
                    .where(NetworkVersion.network_id == network_id, NetworkVersion.number < number,
                           Run.param_set_version_id == psv_id, Run.status == "done",
                           Run.membership_blob.is_not(None))
                    .order_by(NetworkVersion.number.desc(), Run.id.desc()).limit(1)).first()
    return (row[0], row[1]) if row else (None, None)


def shown_map(s, run_id: int) -> dict[str, Any] | None:
    """The stored renumbering of a run made by an update (``aligned_to``, ``map``, ``next``), or None."""
    text = s.scalar(select(TrackedUpdateRun.labels_json).where(TrackedUpdateRun.run_id == run_id,
                                                              TrackedUpdateRun.labels_json.is_not(None))
                    .order_by(TrackedUpdateRun.update_id.desc()).limit(1))
    return json.loads(text) if text else None


def shown_labels_of(store: Store, run_id: int) -> dict[str, Any] | None:
    """:func:`shown_map` in its own read."""
    with store.read() as s:
        return shown_map(s, run_id)


def aligned_map(matches: list[tuple[int, int]], k_new: int, shown_ref: dict[int, int], next_label: int
                ) -> tuple[list[int], int]:
    """Shown labels of a new run's communities 0..k_new-1 from its matching to a reference run.

    .. math:: s_B(b) = s_A(a) \\text{ if } (a, b) \\text{ matched, else the next fresh number}

    Parameters
    ----------
    matches : list of (int, int)
        Matched pairs (reference community a, new community b), canonical labels, as the diff's
        maximum-overlap matching gives them (Kuhn 1955).
    k_new : int
        Communities of the new run.
    shown_ref : dict int -> int
        Shown label of each reference community (identity for a run never renumbered).
    next_label : int
        First fresh number: above every label shown so far along the chain.

    Returns
    -------
    (list of int, int)
        Shown label per new community, and the next fresh number after them. Unmatched new
        communities take fresh numbers in order of their canonical label, so a community never
        takes the number of one it is not matched to, and a node never appears to move between
        two communities with the same shown label.
    """
    out = [-1] * k_new
    for a, b in matches:
        if 0 <= b < k_new and a in shown_ref:
            out[b] = shown_ref[a]
    nxt = max([next_label, *(v + 1 for v in shown_ref.values())])
    for b in range(k_new):
        if out[b] < 0:
            out[b] = nxt
            nxt += 1
    return out, nxt


def _ref_shown(s, run_id: int, k: int) -> tuple[dict[int, int], int]:
    """(shown label per community, next fresh number) of a reference run."""
    stored = shown_map(s, run_id)
    if stored is None:
        return {c: c for c in range(k)}, k
    return {c: int(v) for c, v in enumerate(stored["map"])}, int(stored.get("next", len(stored["map"])))


def _summary(d: dict[str, Any]) -> dict[str, Any]:
    kinds: dict[str, int] = {}
    for e in d.get("events") or []:
        kinds[e["kind"]] = kinds.get(e["kind"], 0) + 1
    return {"ari": d["ari"], "nmi": d["nmi"], "vi_nats": d["vi_nats"], "vi_bits": d["vi_bits"],
            "moved": d["moved"], "nodes_removed": d["only_in_a"], "nodes_added": d["only_in_b"],
            "k_previous": d["k_a"], "k_new": d["k_b"],
            "events": {k: kinds[k] for k in EVENT_KINDS if k in kinds}}


def run_update(store: Store, ref: str, *, trigger: str = "request", progress: Progress | None = None,
               cancel: Callable[[], bool] | None = None,
               say: Callable[[str], None] | None = None) -> dict[str, Any]:
    """Run every tracked set of the network on version ``ref`` and record the update with its report.

    Each tracked run goes through :func:`workspace.services.runs.launch`. A set that cannot be
    prepared or whose run fails is recorded as failed and the others still run; the update is then
    ``failed`` (the version and every finished run stay). Cancelling stops the update: the run in
    progress is recorded ``cancelled``, the sets not reached are recorded ``skipped``, the update
    ``cancelled``, and :class:`Cancelled` is raised. Returns :func:`show_update` (summaries only).
    """
    from workspace.services import runs as runs_service
    from workspace.services.networks import resolve_version
    from workspace.store import repo

    if trigger not in ("import", "request"):
        raise UsageError(f"unknown update trigger {trigger!r}")
    vref = VersionRef.parse(ref)
    with store.read() as s:
        v = resolve_version(s, vref)
        net_id, number, version_id = v.network_id, v.number, v.id
        version_ref = f"{vref.project}/{vref.network}@{number}"
        tracked = s.scalars(select(TrackedSet).where(TrackedSet.network_id == net_id)
                            .order_by(TrackedSet.id)).all()
        if not tracked:
            raise NotFoundError(f"{vref.project}/{vref.network} tracks no parameter set; add one with "
                                f"`cutbook track add {vref.project}/{vref.network} {vref.project}/NAME`")
        plan = []
        for t in tracked:
            prev_run, prev_version = _previous_run(s, net_id, number, t.param_set_version_id)
            plan.append((t.param_set_version_id, _params_ref(s, t.param_set_version_id), prev_run, prev_version))
        prev_versions = [p[3] for p in plan if p[3] is not None]
        parent = s.get(NetworkVersion, v.parent_id) if v.parent_id else None
        previous_version_id = max(prev_versions, default=None) or (parent.id if parent else None)
    with store.write() as s:
        pid = os.getpid()
        upd = TrackedUpdate(network_id=net_id, version_id=version_id, previous_version_id=previous_version_id,
                            trigger=trigger, status="running", started_at=repo.utcnow(),
                            host=socket.gethostname(), pid=pid, process_token=_process_token(pid))
        s.add(upd)
        s.flush()
        update_id = upd.id
    failed = cancelled = False
    for position, (psv_id, params_ref, prev_run, _) in enumerate(plan):
        row = {"update_id": update_id, "position": position, "params_ref": params_ref,
               "param_set_version_id": psv_id, "previous_run_id": prev_run, "run_id": None,
               "status": "done", "error": None, "summary_json": "{}", "labels_json": None}
        if cancelled:
            row.update(status="skipped", error="the update was cancelled before this set ran")
            _record_set(store, row)
            continue
        try:
            spec = _tracked_spec(store, version_ref, params_ref)
            out = runs_service.launch(store, spec, progress=progress, cancel=cancel,
                                      provenance_extra={"update": {"update": update_id, "tracked": params_ref}})
            row["run_id"] = out["run"]
            if say:
                say(f"run {out['run']}: {params_ref} on {version_ref} -> k={out['k']}")
            if prev_run is not None:
                _compare_into(store, row, prev_run, out["run"])
        except Cancelled as exc:
            cancelled = True
            row.update(status="cancelled", error=str(exc), run_id=_cancelled_run(store, update_id, params_ref))
        except runs_service.RunFailed as exc:
            failed = True
            row.update(status="failed", error=str(exc), run_id=exc.run_id)
        except CutbookError as exc:
            failed = True
            row.update(status="failed", error=str(exc))
        if row["status"] != "done" and say:
            say(f"{params_ref} on {version_ref}: {row['status']}: {row['error']}")
        _record_set(store, row)
    status = "cancelled" if cancelled else ("failed" if failed else "done")
    with store.write() as s:
        upd = s.get(TrackedUpdate, update_id)
        upd.status = status
        upd.finished_at = repo.utcnow()
    if cancelled:
        raise Cancelled(f"update {update_id} of {version_ref} cancelled; finished runs are kept")
    return show_update(store, update_id)


def _cancelled_run(store: Store, update_id: int, params_ref: str) -> int | None:
    """The run a cancelled tracked set left (recorded ``cancelled`` by the run path), found by its provenance."""
    with store.read() as s:
        for run_id, prov in s.execute(select(Run.id, Run.provenance_json).where(Run.status == "cancelled")
                                      .order_by(Run.id.desc()).limit(20)).all():
            info = json.loads(prov or "{}").get("update") or {}
            if info.get("update") == update_id and info.get("tracked") == params_ref:
                return run_id
    return None


def _compare_into(store: Store, row: dict[str, Any], prev_run: int, new_run: int) -> None:
    """Fill ``row`` with the summary of ``diff prev_run new_run`` and the new run's shown labels."""
    from workspace.services.diffs import diff_runs

    d = diff_runs(store, prev_run, new_run, moved_limit=0)
    row["summary_json"] = json.dumps(_clean_floats(_summary(d)), sort_keys=True)
    with store.read() as s:
        shown_ref, nxt = _ref_shown(s, prev_run, int(d["k_a"]))
        k_new = s.get(Run, new_run).k or 0
    mapping, nxt = aligned_map([(m["a"], m["b"]) for m in d["matches"]], k_new, shown_ref, nxt)
    row["labels_json"] = json.dumps({"aligned_to": prev_run, "map": mapping, "next": nxt})


def _clean_floats(d: dict[str, Any]) -> dict[str, Any]:
    import math

    return {k: (None if isinstance(v, float) and not math.isfinite(v) else v) for k, v in d.items()}


def _record_set(store: Store, row: dict[str, Any]) -> None:
    with store.write() as s:
        s.add(TrackedUpdateRun(**row))


def update_after_import(store: Store, outcome, *, track: bool = True, progress: Progress | None = None,
                        cancel: Callable[[], bool] | None = None,
                        say: Callable[[str], None] | None = None) -> dict[str, Any] | None:
    """After an import: run the network's tracked sets on the new version (``track=False`` opts out).

    None when nothing is to run: no new version was made, the network tracks nothing, or opted out.
    """
    if not track or not outcome.new_version:
        return None
    vref = VersionRef.parse(outcome.ref)
    with store.read() as s:
        _, net = _network_of(s, f"{vref.project}/{vref.network}")
        if s.scalar(select(TrackedSet.id).where(TrackedSet.network_id == net.id).limit(1)) is None:
            return None
    return run_update(store, outcome.ref, trigger="import", progress=progress, cancel=cancel, say=say)


# --- reading updates ---------------------------------------------------------------------------------

def _update_head(s, u: TrackedUpdate) -> dict[str, Any]:
    net = s.get(Network, u.network_id)
    proj = s.get(Project, net.project_id)
    name = f"{proj.name}/{net.name}"
    v = s.get(NetworkVersion, u.version_id)
    prev = s.get(NetworkVersion, u.previous_version_id) if u.previous_version_id else None
    status = u.status
    if status == "running" and u.host == socket.gethostname() and u.pid is not None \
            and not _process_alive(u.pid, u.process_token):
        status = "interrupted"  # its process is gone (as for runs; read-only: the record is not rewritten)
    return {"update": u.id, "network": name, "ref": f"{name}@{v.number}", "version": v.number,
            "previous": f"{name}@{prev.number}" if prev else None, "trigger": u.trigger, "status": status,
            "started": iso_time(u.started_at),
            "finished": iso_time(u.finished_at) if u.finished_at else None,
            "by": u.created_by}


def _set_row(r: TrackedUpdateRun) -> dict[str, Any]:
    labels = json.loads(r.labels_json) if r.labels_json else None
    return {"params": r.params_ref, "status": r.status, "error": r.error, "run": r.run_id,
            "previous_run": r.previous_run_id, "summary": json.loads(r.summary_json or "{}") or None,
            "shown_labels": labels}


def list_updates(store: Store, network: str | None = None, *, limit: int | None = None) -> list[dict[str, Any]]:
    """Updates, latest first (of one network, or of every network), with each set's summary."""
    with store.read() as s:
        q = select(TrackedUpdate).order_by(TrackedUpdate.id.desc())
        if network is not None:
            _, net = _network_of(s, network)
            q = q.where(TrackedUpdate.network_id == net.id)
        if limit is not None:
            q = q.limit(limit)
        out = []
        for u in s.scalars(q).all():
            head = _update_head(s, u)
            sets = s.scalars(select(TrackedUpdateRun).where(TrackedUpdateRun.update_id == u.id)
                             .order_by(TrackedUpdateRun.position)).all()
            head["sets"] = [_set_row(r) for r in sets]
            out.append(head)
        return out


def show_update(store: Store, update_id: int) -> dict[str, Any]:
    """One update with each set's summary (no diffs; see :func:`change_report`)."""
    with store.read() as s:
        u = s.get(TrackedUpdate, update_id)
        if u is None:
            raise NotFoundError(f"no update {update_id}")
        head = _update_head(s, u)
        sets = s.scalars(select(TrackedUpdateRun).where(TrackedUpdateRun.update_id == u.id)
                         .order_by(TrackedUpdateRun.position)).all()
        head["sets"] = [_set_row(r) for r in sets]
        return head


def latest_update_id(store: Store, network: str | None = None) -> int:
    rows = list_updates(store, network, limit=1)
    if not rows:
        raise NotFoundError("no update yet" + (f" of {network}" if network else "")
                            + " (import a new version of a network that tracks parameter sets, or `cutbook update`)")
    return rows[0]["update"]


def change_report(store: Store, update_id: int, *, moved_limit: int | None = None,
                  moved_rows: bool = False) -> dict[str, Any]:
    """The change report of an update: per tracked set, its summary and the full diff of the previous
    version's run against the new run — :func:`workspace.services.diffs.diff_runs` on the same two
    runs, the document ``cutbook diff`` prints (``diff`` is null when either run is missing)."""
    from workspace.services.diffs import diff_runs

    out = show_update(store, update_id)
    for entry in out["sets"]:
        entry["diff"] = None
        if entry["run"] is not None and entry["previous_run"] is not None and entry["status"] == "done":
            entry["diff"] = diff_runs(store, entry["previous_run"], entry["run"], moved_limit=moved_limit,
                                      moved_rows=moved_rows)
    return out


# --- shown labels for tables and exports --------------------------------------------------------------

def shown_for_diff(s, run_a: int, run_b: int, k_a: int, k_b: int, matches: list[tuple[int, int]]
                   ) -> dict[str, Any]:
    """Shown labels of both sides of a diff: A's own (stored renumbering, else canonical), B's by its
    match in A (B's stored renumbering when it was made against A). Lists of ``[community, shown]``."""
    shown_a, nxt = _ref_shown(s, run_a, k_a)
    stored_b = shown_map(s, run_b)
    if stored_b is not None and stored_b.get("aligned_to") == run_a and len(stored_b["map"]) == k_b:
        map_b = [int(x) for x in stored_b["map"]]
    else:
        map_b, _ = aligned_map(matches, k_b, shown_a, nxt)
    return {"a": [[c, shown_a[c]] for c in sorted(shown_a)], "b": [[c, v] for c, v in enumerate(map_b)],
            "b_numbered_by": "match in A"}


def aligned_labels(store: Store, run_id: int, align_to: int) -> np.ndarray:
    """The run's membership with every community numbered by its match in run ``align_to``
    (that run's shown labels; unmatched communities get fresh numbers above them); -1 stays -1."""
    import numpy as np

    from workspace.compare import compare_memberships
    from workspace.services.runs import load_memberships

    (ids_r, lab_r, _), (ids_n, lab_n, _) = load_memberships(store, [align_to, run_id])
    d = compare_memberships(ids_r, lab_r, ids_n, lab_n, moved_limit=0)
    k_ref = int(lab_r.max()) + 1 if lab_r.size and lab_r.max() >= 0 else 0
    k_new = int(lab_n.max()) + 1 if lab_n.size and lab_n.max() >= 0 else 0
    with store.read() as s:
        shown_ref, nxt = _ref_shown(s, align_to, k_ref)
    mapping, _ = aligned_map([(m.a, m.b) for m in d.matches], k_new, shown_ref, nxt)
    table = np.asarray(mapping + [-1], dtype=np.int64)  # index -1 keeps unassigned nodes at -1
    return table[lab_n]
