"""Node attribute tables stored with a network version: read, store, add as a new version, look up.

A table is read from a CSV keyed by node id, GraphML node data or node-link JSON node fields
(``workspace.io.node_data``), aligned to the version's canonical node order, and stored column by
column as blobs (zstandard-compressed like every array, content-addressed, so an unchanged column
is stored once). Its ``attributes_hash`` is kept apart from the graph's content hash: a version
that only changes attributes shares the graph's arrays and content hash with its parent.

Reading and encoding happen before any write transaction; the write is one short transaction.
"""

from __future__ import annotations

import hashlib
import json
import os
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from workspace.domain import VersionRef
from workspace.errors import InputError, NotFoundError, UsageError
from workspace.services import iso_time

if TYPE_CHECKING:
    import numpy as np

    from workspace.store.db import Store

#: Column names read as latitude / longitude (any letter case) when named by ``--coords``.
LATITUDE_NAMES = ("lat", "latitude")
LONGITUDE_NAMES = ("lon", "lng", "long", "longitude")
_ARRAYS = ("values_blob", "present_blob", "dictionary_offsets_blob", "dictionary_bytes_blob")


@dataclass(frozen=True)
class PreparedNodeTable:
    """A node table read, aligned to a graph's node order and encoded: all it needs before the store."""

    source_name: str
    n_rows: int
    columns: list[dict[str, Any]]          # name, type, arrays (EncodedArray or None per _ARRAYS)
    coords: dict[str, str] | None
    attributes_hash: str
    summary: list[dict[str, Any]] = field(default_factory=list)

    def describe(self) -> dict[str, Any]:
        return {"source": self.source_name, "rows": self.n_rows, "attributes_hash": self.attributes_hash,
                "coords": self.coords, "columns": self.summary}


def parse_coords(text: str | None) -> tuple[str, str] | None:
    """``"x,y"`` -> ("x", "y"); None stays None. UsageError unless two non-empty names."""
    if text is None:
        return None
    parts = [p.strip() for p in text.split(",")]
    if len(parts) != 2 or not all(parts) or parts[0] == parts[1]:
        raise UsageError(f"--coords takes two column names, X,Y or LAT,LON (got {text!r})")
    return parts[0], parts[1]


def _coords_spec(names: tuple[str, str] | None, columns: dict[str, dict], path: str) -> dict[str, str] | None:
    """Which columns hold positions: x and y, or longitude and latitude (either order)."""
    if names is None:
        return None
    for name in names:
        if name not in columns:
            have = ", ".join(columns) or "none"
            raise InputError(f"no node attribute {name!r} for --coords (attributes: {have})", path=path)
        if columns[name]["type"] != "number":
            raise InputError(f"--coords column {name!r} holds {columns[name]['type']}, not numbers", path=path)
    low = [n.lower() for n in names]
    if low[0] in LATITUDE_NAMES and low[1] in LONGITUDE_NAMES:
        return {"x": names[1], "y": names[0], "kind": "geographic"}
    if low[0] in LONGITUDE_NAMES and low[1] in LATITUDE_NAMES:
        return {"x": names[0], "y": names[1], "kind": "geographic"}
    return {"x": names[0], "y": names[1], "kind": "plane"}


def _encode_column(kind: str, values: list) -> dict[str, Any]:
    """Arrays of one aligned column (see ``store.schema.NodeTableColumn``), encoded."""
    import numpy as np

    from workspace.domain import encode_node_ids
    from workspace.store.blobs import encode_array

    present = np.array([v is not None for v in values], dtype=bool)
    arrays: dict[str, Any] = dict.fromkeys(_ARRAYS)
    if kind == "number":
        arr = np.array([0.0 if v is None else float(v) for v in values], dtype=np.float64)
    elif kind == "boolean":
        arr = np.array([bool(v) if v is not None else False for v in values], dtype=bool)
    else:
        dictionary = sorted({v for v in values if v is not None})
        code = {v: i for i, v in enumerate(dictionary)}
        arr = np.array([-1 if v is None else code[v] for v in values], dtype=np.int32)
        offsets, data = encode_node_ids(np.array(dictionary, dtype=np.str_) if dictionary
                                        else np.zeros(0, dtype="<U1"))
        arrays["dictionary_offsets_blob"] = encode_array(offsets)
        arrays["dictionary_bytes_blob"] = encode_array(data)
    arrays["values_blob"] = encode_array(arr)
    arrays["present_blob"] = encode_array(present)
    return arrays


def attributes_hash(columns: list[dict[str, Any]], coords: dict[str, str] | None) -> str:
    """sha256 over the tag ``cutbook-nodes-1``, each column's name, type and array hashes, and the coordinates.

    Independent of the graph's content hash (which never covers attributes).
    """
    h = hashlib.sha256(b"cutbook-nodes-1\0")
    for col in columns:
        h.update(f"{col['name']}\0{col['type']}\0".encode("utf-8"))
        for key in _ARRAYS:
            enc = col["arrays"].get(key)
            h.update(((enc.hash if enc is not None else "-") + "\0").encode("ascii"))
    h.update(json.dumps(coords, sort_keys=True).encode("utf-8"))
    return h.hexdigest()


def prepare_node_table(path: str | os.PathLike, node_ids, *, format: str | None = None,
                       coords: tuple[str, str] | None = None, source_label: str | None = None,
                       optional: bool = False, numeric_ids: bool = False) -> PreparedNodeTable | None:
    """Read a node table, align it to ``node_ids`` (a version's canonical order) and encode it.

    Parameters
    ----------
    path : str or PathLike
        CSV keyed by a ``node``/``id`` column, GraphML, or node-link JSON.
    node_ids : ndarray of str
        The network's node ids (nodes without a row get no value).
    format : {"csv", "graphml", "json"} or None
    coords : (str, str) or None
        Two number columns holding positions (x, y; or latitude and longitude by name).
    optional : bool, default False
        True when reading attributes from the network file itself: a file with no node
        attribute gives None instead of a table.
    numeric_ids : bool, default False
        The import read node ids as integers (``--numeric-ids``): table ids are read the same
        way (``"007"`` -> ``"7"``; blanks and a leading ``+`` dropped) before they are matched.

    Raises
    ------
    InputError
        What ``read_node_table`` raises; a row for a node the network does not have (named);
        a ``--coords`` column that is missing or not numeric.
    """
    from workspace.io.node_data import read_node_table

    path = os.fspath(path)
    table = read_node_table(path, format=format)
    # attributes no node has a value for (a GraphML key declared for "all" that only edges use)
    table.columns = {k: c for k, c in table.columns.items() if any(v is not None for v in c["values"])}
    if optional and not table.columns:
        return None
    if not table.columns:
        raise InputError("the node table has no attribute columns", path=path)
    known = {str(n): i for i, n in enumerate(node_ids.tolist() if hasattr(node_ids, "tolist") else node_ids)}
    rows = []
    for node in table.ids:
        if numeric_ids:
            text = node.strip().removeprefix("+")
            try:
                node = str(int(text))
            except ValueError:
                pass  # not an integer: named below as not in the network
        i = known.get(node)
        if i is None:
            raise InputError(f"node {node!r} of the node table is not in the network", path=path)
        rows.append(i)
    spec = _coords_spec(coords, table.columns, path)
    columns, summary = [], []
    for name, col in table.columns.items():
        aligned: list = [None] * len(known)
        for i, value in zip(rows, col["values"]):
            aligned[i] = value
        columns.append({"name": name, "type": col["type"], "arrays": _encode_column(col["type"], aligned)})
        summary.append({"name": name, "type": col["type"], "present": sum(v is not None for v in aligned)})
    return PreparedNodeTable(source_label or os.path.basename(path), len(rows), columns, spec,
                             attributes_hash(columns, spec), summary)


def insert_node_table(s, version_id: int, prepared: PreparedNodeTable) -> None:
    """Add ``prepared`` as the node table of a version (inside the caller's write transaction)."""
    from workspace.store import repo
    from workspace.store.schema import NodeTable, NodeTableColumn

    row = NodeTable(version_id=version_id, attributes_hash=prepared.attributes_hash, n_rows=prepared.n_rows,
                    source_name=prepared.source_name, coords_json=json.dumps(prepared.coords, sort_keys=True),
                    created_at=repo.utcnow())
    s.add(row)
    s.flush()
    for position, col in enumerate(prepared.columns):
        blobs = {key: (repo.put_encoded(s, enc) if enc is not None else None) for key, enc in col["arrays"].items()}
        s.add(NodeTableColumn(table_id=row.id, position=position, name=col["name"], type=col["type"], **blobs))
    s.flush()


def table_row(s, version_id: int):
    """The ``NodeTable`` row of a version, or None."""
    from sqlalchemy import select

    from workspace.store.schema import NodeTable

    return s.scalar(select(NodeTable).where(NodeTable.version_id == version_id))


def table_hash(s, version_id: int) -> str | None:
    row = table_row(s, version_id)
    return row.attributes_hash if row is not None else None


def _column_rows(s, table_id: int):
    from sqlalchemy import select

    from workspace.store.schema import NodeTableColumn

    return list(s.scalars(select(NodeTableColumn).where(NodeTableColumn.table_id == table_id)
                          .order_by(NodeTableColumn.position)))


def _decode_column(s, col) -> tuple[str, list]:
    """(type, values aligned to node order with None where missing) of a stored column."""
    from workspace.domain import decode_node_ids
    from workspace.store import repo

    values = repo.get_array(s, col.values_blob)
    present = repo.get_array(s, col.present_blob).astype(bool)
    if col.type == "text":
        dictionary = decode_node_ids(repo.get_array(s, col.dictionary_offsets_blob),
                                     repo.get_array(s, col.dictionary_bytes_blob)).tolist()
        out = [dictionary[c] if ok else None for c, ok in zip(values.tolist(), present.tolist())]
    elif col.type == "boolean":
        out = [bool(v) if ok else None for v, ok in zip(values.tolist(), present.tolist())]
    else:
        out = [float(v) if ok else None for v, ok in zip(values.tolist(), present.tolist())]
    return col.type, out


def stored_column(s, version_id: int, name: str) -> tuple[str, list] | None:
    """(type, aligned values) of attribute ``name`` of a version's table; None when it has no table.

    Raises NotFoundError naming the attributes when the table has no such column.
    """
    row = table_row(s, version_id)
    if row is None:
        return None
    cols = _column_rows(s, row.id)
    for col in cols:
        if col.name == name:
            return _decode_column(s, col)
    have = ", ".join(c.name for c in cols) or "none"
    raise NotFoundError(f"no node attribute {name!r} on this version (attributes: {have})")


def require_column(s, version_id: int, name: str, what: str) -> tuple[str, list]:
    """Like :func:`stored_column`, but a version without a table is a NotFoundError too."""
    got = stored_column(s, version_id, name)
    if got is None:
        raise NotFoundError(f"{what} has no node attribute table (add one: cutbook nodes add REF FILE, "
                            "or import with --nodes FILE)")
    return got


def node_labels(s, version_id: int, node_ids, attribute: str | None) -> list[str] | None:
    """Display label per node: the value of ``attribute`` as text, the node id where it has none.

    None when ``attribute`` is None.
    """
    if attribute is None:
        return None
    from workspace.store.schema import NetworkVersion

    v = s.get(NetworkVersion, version_id)
    kind, values = require_column(s, version_id, attribute, f"version {v.number}")
    ids = node_ids.tolist() if hasattr(node_ids, "tolist") else list(node_ids)
    return [str(node) if value is None else _text(value) for node, value in zip(ids, values)]


def _text(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value)


def coordinates(s, version_id: int) -> tuple[np.ndarray, dict[str, str]] | None:
    """Node positions (n, 2) from the version's coordinate columns, and their spec; None without them.

    Geographic positions are projected equirectangularly: ``x = lon · cos(φ0)``, ``y = lat`` with
    ``φ0`` the mean latitude (so distances near ``φ0`` keep their proportions). Nodes without a
    value sit at the mean of the others. Reference: J. P. Snyder, "Map Projections — A Working
    Manual", USGS Professional Paper 1395 (1987), equidistant cylindrical projection.
    """
    import numpy as np

    row = table_row(s, version_id)
    if row is None:
        return None
    spec = json.loads(row.coords_json or "null")
    if not spec:
        return None
    _, xs = stored_column(s, version_id, spec["x"])
    _, ys = stored_column(s, version_id, spec["y"])
    x = np.array([np.nan if v is None else v for v in xs], dtype=float)
    y = np.array([np.nan if v is None else v for v in ys], dtype=float)
    if spec.get("kind") == "geographic":
        phi0 = np.deg2rad(np.nanmean(y)) if np.isfinite(y).any() else 0.0
        x = x * np.cos(phi0)
    for arr in (x, y):
        arr[~np.isfinite(arr)] = np.nanmean(arr) if np.isfinite(arr).any() else 0.0
    return np.column_stack([x, y]), spec


def describe_table(s, version_id: int, *, examples: int = 3) -> dict[str, Any] | None:
    """What a version's node table holds: source, rows, hash, coordinates and per-column summary."""
    row = table_row(s, version_id)
    if row is None:
        return None
    columns = []
    for col in _column_rows(s, row.id):
        kind, values = _decode_column(s, col)
        present = [v for v in values if v is not None]
        entry = {"name": col.name, "type": kind, "present": len(present), "missing": len(values) - len(present),
                 "distinct": len(set(present)), "examples": list(dict.fromkeys(present))[:examples]}
        if kind == "number" and present:
            entry["min"], entry["max"] = min(present), max(present)
        columns.append(entry)
    return {"source": row.source_name, "rows": row.n_rows, "attributes_hash": row.attributes_hash,
            "coords": json.loads(row.coords_json or "null"), "columns": columns,
            "created": iso_time(row.created_at)}


def show_node_table(store: Store, ref: str | VersionRef) -> dict[str, Any]:
    """The node table of a version (latest when the reference names none)."""
    from workspace.services.networks import resolve_version

    ref = VersionRef.parse(ref) if isinstance(ref, str) else ref
    with store.read() as s:
        v = resolve_version(s, ref)
        info = describe_table(s, v.id)
        return {"ref": f"{ref.project}/{ref.network}@{v.number}", "version": v.number,
                "content_hash": v.content_hash, "table": info}


def node_values(store: Store, ref: str | VersionRef, attribute: str) -> dict[str, Any]:
    """Every node's value of one attribute: ``{"ref", "attribute", "type", "nodes": [[id, value], ...]}``."""
    from workspace.services.networks import resolve_version
    from workspace.store import repo

    ref = VersionRef.parse(ref) if isinstance(ref, str) else ref
    with store.read() as s:
        v = resolve_version(s, ref)
        kind, values = require_column(s, v.id, attribute, f"{ref.project}/{ref.network}@{v.number}")
        ids = repo.load_node_ids(s, v).tolist()
    return {"ref": f"{ref.project}/{ref.network}@{v.number}", "attribute": attribute, "type": kind,
            "nodes": [[node, value] for node, value in zip(ids, values)]}


def add_node_table(store: Store, ref: str | VersionRef, path: str | os.PathLike, *, format: str | None = None,
                   coords: tuple[str, str] | None = None, message: str = "") -> dict[str, Any]:
    """Record a node table on a network as its next version, sharing the graph's arrays.

    The new version (number latest + 1, parent the latest) has exactly the graph of ``ref``
    (latest when the reference names no version): its five array columns name the same blobs
    (nothing is copied) and its content hash is the same. A table equal to the latest version's,
    on the same graph, makes no version (``new_version`` False). The file is read and checked
    before the store is written; a bad file leaves the store as it was.
    """
    from workspace.services.networks import resolve_version
    from workspace.store import repo
    from workspace.store.blobs import GRAPH_ARRAYS
    from workspace.store.schema import NetworkVersion

    ref = VersionRef.parse(ref) if isinstance(ref, str) else ref
    with store.read() as s:
        base = resolve_version(s, ref)
        base_id, base_hash = base.id, base.content_hash
        node_ids = repo.load_node_ids(s, base)
    prepared = prepare_node_table(path, node_ids, format=format, coords=coords)
    name = f"{ref.project}/{ref.network}"
    with store.write() as s:
        base = s.get(NetworkVersion, base_id)
        latest = repo.latest_version(s, base.network_id)
        if latest.content_hash == base_hash and table_hash(s, latest.id) == prepared.attributes_hash:
            return {"ref": f"{name}@{latest.number}", "version": latest.number, "new_version": False,
                    "based_on": base.number, "content_hash": base_hash, "table": prepared.describe()}
        v = NetworkVersion(
            network_id=base.network_id, number=latest.number + 1, parent_id=latest.id,
            content_hash=base.content_hash, n_nodes=base.n_nodes, n_edges=base.n_edges,
            total_weight=base.total_weight,
            message=message or f"node attributes from {prepared.source_name} (graph of version {base.number})",
            source_name=prepared.source_name, source_format=base.source_format,
            policy_json=base.policy_json, report_json=base.report_json,
            **{column: getattr(base, column) for column in GRAPH_ARRAYS},
            created_at=repo.utcnow())
        s.add(v)
        s.flush()
        insert_node_table(s, v.id, prepared)
        number, based_on = v.number, base.number
    return {"ref": f"{name}@{number}", "version": number, "new_version": True, "based_on": based_on,
            "content_hash": base_hash, "table": prepared.describe()}


def carried_table(s, parent_id: int, node_ids) -> PreparedNodeTable | None:
    """The parent version's table re-aligned to a new node order (nodes gone drop, new nodes get no value).

    None when the parent has no table. Used when a new graph is imported without a table of its own.
    """
    from workspace.store import repo
    from workspace.store.schema import NetworkVersion

    row = table_row(s, parent_id)
    if row is None:
        return None
    parent_ids = repo.load_node_ids(s, s.get(NetworkVersion, parent_id)).tolist()
    new_ids = node_ids.tolist() if hasattr(node_ids, "tolist") else list(node_ids)
    at = {node: i for i, node in enumerate(parent_ids)}
    index = [at.get(node) for node in new_ids]
    columns, summary = [], []
    for col in _column_rows(s, row.id):
        kind, values = _decode_column(s, col)
        aligned = [None if i is None else values[i] for i in index]
        columns.append({"name": col.name, "type": kind, "arrays": _encode_column(kind, aligned)})
        summary.append({"name": col.name, "type": kind, "present": sum(v is not None for v in aligned)})
    coords = json.loads(row.coords_json or "null")
    n_rows = sum(i is not None for i in index)
    return PreparedNodeTable(row.source_name, n_rows, columns, coords, attributes_hash(columns, coords), summary)


# --- display labels (--label-by) ---------------------------------------------------------------

def run_labels(store: Store, run_id: int, attribute: str) -> dict[str, Any]:
    """Display labels of a run's nodes: ``{"attribute", "ids": list, "labels": list}`` in node order.

    A node without a value is labelled by its id. NotFoundError when the run's version has no
    node table or no such attribute.
    """
    from workspace.store import repo
    from workspace.store.schema import NetworkVersion, Run

    with store.read() as s:
        run = s.get(Run, run_id)
        if run is None:
            raise NotFoundError(f"no run {run_id}")
        v = s.get(NetworkVersion, run.version_id)
        ids = repo.load_node_ids(s, v)
        labels = node_labels(s, v.id, ids, attribute)
    return {"attribute": attribute, "ids": ids.tolist(), "labels": labels}


def labels_of(store: Store, run_ids: list[int], attribute: str, nodes: list[str]) -> dict[str, str]:
    """Labels of some nodes, looked up in the versions of ``run_ids`` (later runs first).

    Nodes found in none of the versions' tables keep their id. NotFoundError when none of the
    versions has the attribute.
    """
    import numpy as np

    from workspace.store import repo
    from workspace.store.schema import NetworkVersion, Run

    wanted = set(nodes)
    found: dict[str, str] = {}
    any_table = False
    errors = []
    with store.read() as s:
        for run_id in reversed(run_ids):
            run = s.get(Run, run_id)
            if run is None:
                raise NotFoundError(f"no run {run_id}")
            v = s.get(NetworkVersion, run.version_id)
            try:
                got = stored_column(s, v.id, attribute)
            except NotFoundError as err:
                errors.append(err)
                continue
            if got is None:
                continue
            any_table = True
            ids = repo.load_node_ids(s, v)
            todo = sorted(wanted - found.keys())
            if not todo:
                break
            pos = np.searchsorted(ids, np.array(todo, dtype=ids.dtype if ids.size else np.str_))
            values = got[1]
            for node, p in zip(todo, pos.tolist()):
                if p < ids.shape[0] and ids[p] == node and values[p] is not None:
                    found[node] = _text(values[p])
    if not any_table:
        if errors:
            raise errors[0]
        raise NotFoundError("--label-by: the runs' versions have no node attribute table (add one: "
                            "cutbook nodes add REF FILE)")
    return {node: found.get(node, node) for node in nodes}


def label_attributes(store: Store, run_ids: list[int]) -> list[str]:
    """Text attributes that can name the nodes of some runs: the text columns of their versions'
    node tables, later runs' tables first, each name once, in table order (empty without tables)."""
    from workspace.store.schema import Run

    names: list[str] = []
    with store.read() as s:
        for run_id in reversed(run_ids):
            run = s.get(Run, run_id)
            if run is None:
                raise NotFoundError(f"no run {run_id}")
            row = table_row(s, run.version_id)
            if row is None:
                continue
            names += [c.name for c in _column_rows(s, row.id) if c.type == "text" and c.name not in names]
    return names


def labels_in_versions(store: Store, version_ids: list[int], attribute: str, node: str) -> dict[int, str | None]:
    """The label of one node in each version (None where the version has no such attribute or node)."""
    import numpy as np

    from workspace.store import repo
    from workspace.store.schema import NetworkVersion

    out: dict[int, str | None] = {}
    with store.read() as s:
        for vid in dict.fromkeys(version_ids):
            out[vid] = None
            try:
                got = stored_column(s, vid, attribute)
            except NotFoundError:
                continue
            if got is None:
                continue
            ids = repo.load_node_ids(s, s.get(NetworkVersion, vid))
            p = int(np.searchsorted(ids, node))
            if p < ids.shape[0] and ids[p] == node and got[1][p] is not None:
                out[vid] = _text(got[1][p])
    return out


def stored_attributes(s, version_id: int) -> list[tuple[str, str, list]] | None:
    """Every column of a version's node table as ``(name, type, aligned values)``; None without a table."""
    row = table_row(s, version_id)
    if row is None:
        return None
    return [(col.name, *_decode_column(s, col)) for col in _column_rows(s, row.id)]


def node_attributes(store: Store, network: str, node: str) -> dict[str, Any] | None:
    """One node's attributes from the newest version of ``network`` whose node table has the node.

    Returns ``{"ref": "P/N@V", "version": V, "attributes": [[name, type, value], ...]}`` (``value`` None
    where the node has none), or None when no version's table holds the node.
    """
    import numpy as np

    from workspace.services.networks import network_not_found
    from workspace.store import repo

    ref = VersionRef.parse(network)
    with store.read() as s:
        net = repo.find_network(s, ref.project, ref.network)
        if net is None:
            raise network_not_found(s, ref.project, ref.network)
        for v in reversed(repo.list_versions(s, net.id)):
            if table_row(s, v.id) is None:
                continue
            ids = repo.load_node_ids(s, v)
            p = int(np.searchsorted(ids, node))
            if p >= ids.shape[0] or ids[p] != node:
                continue
            columns = stored_attributes(s, v.id) or []
            return {"ref": f"{ref.project}/{ref.network}@{v.number}", "version": v.number,
                    "attributes": [[name, kind, values[p]] for name, kind, values in columns]}
    return None


def _rows_reading(s, col, wanted: str) -> tuple[list[int], list[str]]:
    """Rows of a stored text column whose value equals ``wanted`` once stripped and case-folded, and
    those values: matched in the column's dictionary of distinct values, then found among the codes."""
    import numpy as np

    from workspace.domain import decode_node_ids
    from workspace.store import repo

    dictionary = decode_node_ids(repo.get_array(s, col.dictionary_offsets_blob),
                                 repo.get_array(s, col.dictionary_bytes_blob)).tolist()
    codes = [c for c, value in enumerate(dictionary) if value.strip().casefold() == wanted]
    if not codes:
        return [], []
    values = repo.get_array(s, col.values_blob)
    present = repo.get_array(s, col.present_blob).astype(bool)
    rows = np.flatnonzero(np.isin(values, codes) & present).tolist()
    return rows, [dictionary[int(values[r])] for r in rows]


def nodes_named(store: Store, text: str, network: str | None = None, *, limit: int = 10) -> list[dict[str, Any]]:
    """Nodes whose value of a text attribute equals ``text`` (ignoring case and outer spaces), in the
    newest node table of ``network`` (``P/N``) or of every network: ``[{"network", "node",
    "attribute", "value"}, ...]``, at most ``limit``. Lets people name a node as they know it (a
    station's name) where an id is asked for.
    """
    from sqlalchemy import select

    from workspace.store import repo
    from workspace.store.schema import Network, Project

    wanted = text.strip().casefold()
    out: list[dict[str, Any]] = []
    if not wanted:
        return out
    with store.read() as s:
        q = select(Project.name, Network).select_from(Network).join(Network.project).order_by(Project.name,
                                                                                               Network.name)
        if network is not None:
            ref = VersionRef.parse(network)
            q = q.where(Project.name == ref.project, Network.name == ref.network)
        for project_name, net in s.execute(q).all():
            for v in reversed(repo.list_versions(s, net.id)):
                row = table_row(s, v.id)
                if row is None:
                    continue
                ids = None
                for col in _column_rows(s, row.id):
                    if col.type != "text":
                        continue
                    rows, values = _rows_reading(s, col, wanted)
                    if rows and ids is None:
                        ids = repo.load_node_ids(s, v)
                    for i, value in zip(rows, values):
                        out.append({"network": f"{project_name}/{net.name}", "node": str(ids[i]),
                                    "attribute": col.name, "value": value})
                        if len(out) >= limit:
                            return out
                break   # the newest table of each network
    return out
