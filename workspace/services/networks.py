"""Networks and their versions: import, listing, showing, structural changes.

Importing this module loads neither numpy nor SQLAlchemy: reading a file
(:func:`prepare_import`) needs only the readers, and the store modules load
with the first function that touches the store.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Callable

from workspace.domain import ImportPolicy, VersionRef
from workspace.errors import NotFoundError, UsageError
from workspace.services import iso_time

if TYPE_CHECKING:
    from workspace.domain import GraphData
    from workspace.store.db import Store
    from workspace.store.schema import Network, NetworkVersion

Progress = Callable[[str, int, int | None], None]


@dataclass(frozen=True)
class ImportOutcome:
    ref: str
    version: int
    nodes: int
    edges: int
    content_hash: str
    new_version: bool
    report: dict[str, Any]
    policy: dict[str, Any] = field(default_factory=dict)
    node_table: dict[str, Any] | None = None  # what the version's node attribute table holds (or None)

    def to_dict(self) -> dict[str, Any]:
        return {"ref": self.ref, "version": self.version, "nodes": self.nodes, "edges": self.edges,
                "content_hash": self.content_hash, "new_version": self.new_version,
                "report": self.report, "policy": self.policy, "node_table": self.node_table}


def _check_name(kind: str, name: str) -> str:
    if not name or any(c in name for c in "/@") or name != name.strip() or any(c.isspace() for c in name):
        raise UsageError(f"{kind} name {name!r} must be non-empty, without spaces, '/' or '@'")
    return name


def check_names(project: str, network: str) -> None:
    """UsageError unless both names are valid (see :func:`import_network`)."""
    _check_name("project", project)
    _check_name("network", network)


def version_summary(v: NetworkVersion, project: str, network: str) -> dict[str, Any]:
    return {
        "ref": f"{project}/{network}@{v.number}", "project": project, "network": network,
        "version": v.number, "nodes": v.n_nodes, "edges": v.n_edges, "total_weight": v.total_weight,
        "content_hash": v.content_hash, "message": v.message, "source": v.source_name,
        "format": v.source_format, "created": iso_time(v.created_at),
        "by": v.created_by,
    }


#: The store layer, which an import needs only for its final write. A front end may load it on
#: a background thread while :func:`prepare_import` runs, and must wait for that thread before
#: it opens the store (so that no two threads import the same package at once).
IMPORT_LATER_MODULES = ("workspace.services.store", "workspace.services.runs",
                        "workspace.store.repo")


def load_readers() -> None:
    """Import the file readers (numpy, pyarrow) now, before other modules load beside them."""
    import workspace.io.canonical  # noqa: F401
    import workspace.io.delimited  # noqa: F401


@dataclass(frozen=True)
class PreparedImport:
    """A file read, canonicalised, hashed and encoded: everything an import does before the store."""

    path: str
    graph: GraphData
    report: dict[str, Any]
    policy: dict[str, Any]
    format: str
    content_hash: str
    arrays: dict
    node_table: Any = None  # services.nodes.PreparedNodeTable, or None


def prepare_import(path: str | os.PathLike, *, format: str | None = None,
                   policy: ImportPolicy | None = None, progress: Progress | None = None,
                   source_label: str | None = None, nodes: str | os.PathLike | None = None,
                   nodes_format: str | None = None, coords: tuple[str, str] | None = None) -> PreparedImport:
    """Read ``path`` into canonical form, hash it and compress its arrays; touches no store.

    Raises what :func:`workspace.io.read_network` raises. ``source_label`` replaces the path
    in the report. Node attributes: ``nodes`` names a node table file (CSV / GraphML /
    node-link JSON, see ``services.nodes.prepare_node_table``); without it, a GraphML or
    node-link JSON network file's own node data is read when it has any. ``coords`` names two
    of its number columns as positions.
    """
    import threading

    from workspace.domain import encode_node_ids
    from workspace.io import read_network

    policy = policy or ImportPolicy()
    done: dict[str, Any] = {}
    threads: list[threading.Thread] = []

    def start(target, *args, name: str) -> threading.Thread:
        thread = threading.Thread(target=target, args=args, name=name, daemon=True)
        thread.start()
        threads.append(thread)
        return thread

    def hash_and_compress(graph: GraphData, encoded_ids=None) -> None:
        # runs beside the report (components, degrees, weight summary) on the other core
        try:
            from workspace.store.blobs import encode_graph_arrays  # numpy and zstandard only

            if encoded_ids is None:  # once, for the hash and the blobs
                encoded_ids = encode_node_ids(graph.node_ids)

            def content_hash() -> None:
                try:
                    done["hash"] = graph.content_hash(encoded_ids=encoded_ids)
                except BaseException as exc:  # noqa: BLE001 - re-raised on the caller's thread
                    done["error"] = exc

            # sha256 and zstd both release the interpreter lock: hash while compressing
            hasher = threading.Thread(target=content_hash, name="cutbook-content-hash",
                                      daemon=True)
            hasher.start()
            done["arrays"] = encode_graph_arrays(graph, encoded_ids)
            hasher.join()
        except BaseException as exc:  # noqa: BLE001 - re-raised on the caller's thread
            done["error"] = exc

    def on_graph(graph: GraphData, encoded_ids) -> None:
        done["thread"] = start(hash_and_compress, graph, encoded_ids, name="cutbook-hash")

    try:
        graph, report = read_network(path, format=format, policy=policy, progress=progress,
                                     on_graph=on_graph)
    except BaseException:
        for thread in threads:  # a failed read leaves no thread behind importing or hashing
            thread.join()
        raise
    report_dict = report.as_dict()
    if source_label is not None:
        report_dict["source"] = source_label
    if progress:
        progress("store", 0, None)
    if "thread" not in done:  # a reader that never called back: do it here
        hash_and_compress(graph)
    else:
        done["thread"].join()
    if "error" in done:
        raise done["error"]
    content_hash, arrays = done["hash"], done["arrays"]
    from workspace.services.nodes import prepare_node_table

    if nodes is not None:
        node_table = prepare_node_table(nodes, graph.node_ids, format=nodes_format, coords=coords,
                                        numeric_ids=policy.numeric_ids)
    elif report.format in ("graphml", "json"):
        node_table = prepare_node_table(path, graph.node_ids, format=report.format, coords=coords,
                                        source_label=source_label, optional=coords is None,
                                        numeric_ids=policy.numeric_ids)
    elif coords is not None:
        raise UsageError("--coords names columns of a node table: give --nodes FILE (or a GraphML / "
                         "node-link JSON network with node data)")
    else:
        node_table = None
    return PreparedImport(os.fspath(path), graph, report_dict, policy.as_dict(), report.format,
                          content_hash, arrays, node_table)


def import_network(store: Store, path: str | os.PathLike, *, project: str, network: str,
                   format: str | None = None, policy: ImportPolicy | None = None, message: str = "",
                   progress: Progress | None = None, source_label: str | None = None,
                   prepared: PreparedImport | None = None) -> ImportOutcome:
    """Read ``path``, canonicalise it, and record it as the next version of ``project/network``.

    Reading and hashing happen outside any transaction (``prepared``, from
    :func:`prepare_import` on the same arguments, skips them); the write is one short
    transaction. ``source_label`` replaces the path in the stored report (the
    path as given is kept otherwise). Content equal to the latest version creates nothing:
    the outcome then names that version (``new_version=False``) but its ``report`` and
    ``policy`` are those of the file just read, never the stored version's (which may come
    from another file). A failed read leaves the store untouched (no project, network or
    version is created).
    """
    from workspace.services import nodes as node_tables
    from workspace.store import repo

    _check_name("project", project)
    _check_name("network", network)
    if prepared is None:
        prepared = prepare_import(path, format=format, policy=policy, progress=progress,
                                  source_label=source_label)
    graph, content_hash = prepared.graph, prepared.content_hash
    report_dict, policy_dict = prepared.report, prepared.policy
    table = prepared.node_table
    carried = None
    if table is None:
        # a new graph without a table of its own keeps its parent's attributes (re-aligned), read
        # and encoded here, before the write transaction
        with store.read() as s:
            net = repo.find_network(s, project, network)
            latest = repo.latest_version(s, net.id) if net is not None else None
            if latest is not None and latest.content_hash != content_hash:
                carried = (latest.id, node_tables.carried_table(s, latest.id, graph.node_ids))
    with store.write(needed=sum(a.stored_size for a in prepared.arrays.values())) as s:
        proj = repo.get_or_create_project(s, project)
        net = repo.get_or_create_network(s, proj, network)
        latest = repo.latest_version(s, net.id)
        same_table = table is None or (latest is not None and
                                       node_tables.table_hash(s, latest.id) == table.attributes_hash)
        if latest is not None and latest.content_hash == content_hash and same_table:
            # report what was just read (its name, columns, notes); the stored version keeps its own
            return ImportOutcome(f"{project}/{network}@{latest.number}", latest.number, graph.n_nodes,
                                 graph.n_edges, content_hash, False, report_dict, policy_dict,
                                 table.describe() if table is not None else None)
        v = repo.add_version(s, net, graph, parent=latest, content_hash=content_hash, message=message,
                             source_name=source_label or os.path.basename(os.fspath(path)),
                             source_format=prepared.format,
                             policy_json=json.dumps(policy_dict, sort_keys=True),
                             report_json=json.dumps(report_dict, sort_keys=True),
                             arrays=prepared.arrays)
        if table is None and carried is not None and latest is not None and carried[0] == latest.id:
            table = carried[1]
        if table is not None:
            node_tables.insert_node_table(s, v.id, table)
        number = v.number
    if progress:
        progress("store", 1, 1)
    return ImportOutcome(f"{project}/{network}@{number}", number, graph.n_nodes, graph.n_edges,
                         content_hash, True, report_dict, policy_dict,
                         table.describe() if table is not None else None)


def list_projects(store: Store) -> list[dict[str, Any]]:
    from workspace.store import repo

    with store.read() as s:
        return [{"project": r.name, "networks": r.networks, "created": iso_time(r.created_at)}
                for r in repo.list_projects(s)]


def list_networks(store: Store, project: str | None = None) -> list[dict[str, Any]]:
    from workspace.store import repo

    with store.read() as s:
        if project is not None and repo.find_project(s, project) is None:
            raise project_not_found(s, project)
        return [{"project": r.project, "network": r.network, "latest_version": r.latest,
                 "created": iso_time(r.created_at)} for r in repo.list_networks(s, project)]


def _network(s, ref: VersionRef) -> Network:
    from workspace.store import repo

    net = repo.find_network(s, ref.project, ref.network)
    if net is None:
        raise network_not_found(s, ref.project, ref.network)
    return net


def network_not_found(s, project: str, network: str) -> NotFoundError:
    """``no network P/N`` with a 'did you mean' among the store's project/network names."""
    from workspace.services.suggest import close_names, hint
    from workspace.store import repo

    names = [f"{r.project}/{r.network}" for r in repo.list_networks(s)]
    return NotFoundError(f"no network {project}/{network}{hint(close_names(f'{project}/{network}', names))}")


def project_not_found(s, project: str) -> NotFoundError:
    """``no project named 'P'`` with a 'did you mean' among the store's project names."""
    from workspace.services.suggest import close_names, hint
    from workspace.store import repo

    names = [r.name for r in repo.list_projects(s)]
    return NotFoundError(f"no project named {project!r}{hint(close_names(project, names))}")


def resolve_version(s, ref: VersionRef) -> NetworkVersion:
    """The version row ``ref`` names (latest when it names none). For services only."""
    from workspace.store import repo

    net = _network(s, ref)
    v = repo.find_version(s, net.id, ref.version)
    if v is None:
        what = f"version {ref.version}" if ref.version is not None else "any version"
        latest = repo.latest_version(s, net.id)
        have = f" (its versions are 1 to {latest.number})" if latest is not None else ""
        raise NotFoundError(f"network {ref.project}/{ref.network} has no {what}{have}")
    return v


def list_versions(store: Store, ref: str | VersionRef) -> list[dict[str, Any]]:
    from workspace.store import repo

    ref = VersionRef.parse(ref) if isinstance(ref, str) else ref
    with store.read() as s:
        net = _network(s, ref)
        from workspace.services.annotations import current_for

        versions = repo.list_versions(s, net.id)
        ann = current_for(s, "version", [v.id for v in versions])
        return [{**version_summary(v, ref.project, ref.network), "tags": ann.get(v.id, {}).get("tags", [])}
                for v in versions]


#: ``show_version`` compares a version with its parent only while the two hold at most this many edges
#: together, unless asked for every size (``cutbook show --changes``): two 1M-node planted versions hold
#: 15M and compare in about 3 s; two 10M-node ones took 35 s and 11 GB. The terminal UI's Ledger
#: asks on every version selected, in a worker thread that runs to its end even when superseded.
#: (The help of ``cutbook show --changes`` names the value.)
PARENT_CHANGES_MAX_EDGES = 20_000_000


def show_version(store: Store, ref: str | VersionRef, *, change_limit: int = 20,
                 changes_up_to_edges: int | None = -1) -> dict[str, Any]:
    """Everything recorded on a version, plus its structural change from its parent.

    ``changes_up_to_edges``: compute that change only when the two versions hold at most this many
    edges together (-1, the default: :data:`PARENT_CHANGES_MAX_EDGES`, read at each call; None: at
    every size); above it ``changes_from_parent`` is None and ``changes_not_computed`` says why and
    names the command that lists them. A version whose graph has its parent's content hash (a node
    table added, a graph that came back) has no change, found without loading either graph."""
    from workspace.store.schema import NetworkVersion

    ref = VersionRef.parse(ref) if isinstance(ref, str) else ref
    with store.read() as s:
        v = resolve_version(s, ref)
        out = version_summary(v, ref.project, ref.network)
        from workspace.services.annotations import current_for

        out.update(current_for(s, "version", [v.id]).get(v.id, {"tags": [], "notes": []}))
        out["policy"] = json.loads(v.policy_json)
        out["report"] = json.loads(v.report_json)
        from workspace.services.nodes import describe_table

        out["node_table"] = describe_table(s, v.id)
        out["parent"] = None
        out["changes_from_parent"] = None
        if v.parent_id is not None:
            parent = s.get(NetworkVersion, v.parent_id)
            out["parent"] = f"{ref.project}/{ref.network}@{parent.number}"
            bound = PARENT_CHANGES_MAX_EDGES if changes_up_to_edges == -1 else changes_up_to_edges
            if parent.content_hash != v.content_hash and bound is not None \
                    and parent.n_edges + v.n_edges > bound:
                out["changes_not_computed"] = (
                    f"not compared here: {parent.n_edges + v.n_edges:,} edges in the two versions; "
                    f"cutbook changes {out['parent']} {ref.project}/{ref.network}@{v.number} lists them")
                return out
            out["changes_from_parent"] = _changes_between(s, parent, v, change_limit)
        return out


def _changes_between(s, va, vb, limit: int | None) -> dict[str, Any]:
    """``structural_changes`` of two stored versions, their ids packed; versions of one content hash
    (a version against itself, a node table added, a graph that came back) answer without a graph
    loaded (two 10M-node versions took 76 s and 15 GB to find no change)."""
    from workspace.io.changes import no_changes, structural_changes
    from workspace.store import repo

    if va.content_hash == vb.content_hash:
        return no_changes()
    return structural_changes(repo.load_graph(s, va, packed=True), repo.load_graph(s, vb, packed=True), limit=limit)


def load_graph(store: Store, ref: str | VersionRef) -> tuple[dict[str, Any], GraphData]:
    from workspace.store import repo

    ref = VersionRef.parse(ref) if isinstance(ref, str) else ref
    with store.read() as s:
        v = resolve_version(s, ref)
        return version_summary(v, ref.project, ref.network), repo.load_graph(s, v)


def version_changes(store: Store, ref_a: str | VersionRef, ref_b: str | VersionRef, *,
                    limit: int | None = None) -> dict[str, Any]:
    """Nodes and edges added/removed and weights changed from version A to version B."""

    ra = VersionRef.parse(ref_a) if isinstance(ref_a, str) else ref_a
    rb = VersionRef.parse(ref_b) if isinstance(ref_b, str) else ref_b
    with store.read() as s:
        va, vb = resolve_version(s, ra), resolve_version(s, rb)
        out = _changes_between(s, va, vb, limit)
        out = {"a": f"{ra.project}/{ra.network}@{va.number}", "b": f"{rb.project}/{rb.network}@{vb.number}", **out}
        return out
