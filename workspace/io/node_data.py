"""Node attribute tables: what the nodes are (names, districts, kinds), read beside the graph.

Sources: a CSV keyed by node id (header with a ``node`` or ``id`` column), GraphML
node data (``<key for="node">``), node-link JSON node fields (every field of a node
object except ``id``). Each column gets one type: ``boolean``, ``number`` or
``text``; a node without a value has ``None``.
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
from dataclasses import dataclass, field

from workspace.errors import InputError
from workspace.io._common import (
    check_utf8,
    feed_xml,
    format_by_name,
    normalise_newlines,
    read_bytes,
    strip_bom,
)
from workspace.io.node_link import _id_text

NODE_TABLE_FORMATS = ("csv", "graphml", "json")
ATTRIBUTE_TYPES = ("boolean", "number", "text")
_TRUE, _FALSE = {"true", "yes"}, {"false", "no"}
_GRAPHML_TYPES = {"boolean": "boolean", "int": "number", "long": "number", "float": "number",
                  "double": "number", "string": "text"}


@dataclass
class NodeTable:
    """Attribute columns by node id.

    Attributes
    ----------
    path : str
    ids : list of str
        Node ids in file order (each once).
    columns : dict
        name -> ``{"type": "boolean" | "number" | "text", "values": list}``,
        values aligned with ``ids`` (None where a node has no value).
    """

    path: str
    ids: list[str]
    columns: dict[str, dict] = field(default_factory=dict)

    def column(self, name: str) -> dict:
        """The column ``name`` (InputError listing the columns when there is none)."""
        if name not in self.columns:
            have = ", ".join(self.columns) or "none"
            raise InputError(f"no node attribute {name!r} (attributes: {have})", path=self.path)
        return self.columns[name]


def infer_type(texts: list[str | None]) -> tuple[str, list]:
    """Type of a column of strings, and the values converted to it.

    ``boolean`` when every value present is ``true``/``false`` (or ``yes``/``no``,
    any letter case); else ``number`` when every value parses as a finite
    float (Python ``float``); else ``text``. Empty strings and None are
    missing values and do not decide the type.

    Parameters
    ----------
    texts : list of str or None

    Returns
    -------
    type : {"boolean", "number", "text"}
    values : list of bool, float, str or None

    References
    ----------
    Common practice (spreadsheet and data-frame readers infer column types the same way).
    """
    present = [t.strip() for t in texts if t is not None and t.strip() != ""]
    lowered = {t.lower() for t in present}
    if present and lowered <= _TRUE | _FALSE:
        return "boolean", [None if t is None or t.strip() == "" else t.strip().lower() in _TRUE
                           for t in texts]
    try:
        numbers = [None if t is None or t.strip() == "" else float(t) for t in texts]
        if present and all(x is None or math.isfinite(x) for x in numbers):
            return "number", numbers
    except ValueError:
        pass
    return "text", [None if t is None or t == "" else t for t in texts]


def _format(path: str, format: str | None) -> str:
    return format_by_name(path, format, ((".csv", "csv"), (".graphml", "graphml"), (".xml", "graphml"),
                                         (".json", "json")), "node table", "--nodes-format")


def read_node_table(path: str | os.PathLike, *, format: str | None = None) -> NodeTable:
    """Read node attributes from a CSV, GraphML or node-link JSON file.

    Parameters
    ----------
    path : str or PathLike
    format : {"csv", "graphml", "json"} or None
        None: by extension.

    Returns
    -------
    NodeTable
        CSV: columns other than the key, types by :func:`infer_type`.
        GraphML: each ``<key for="node">`` (or ``for="all"``) by its
        ``attr.name``, typed by its ``attr.type`` (int/long/float/double ->
        number, boolean, string -> text), with the key's ``<default>`` for
        nodes without data (networkx keeps it in ``G.graph["node_default"]``). JSON: every
        node field but ``id``; JSON booleans -> boolean, numbers -> number,
        strings -> text; a field mixing kinds is text (values written as JSON).

    Raises
    ------
    InputError
        Unreadable or malformed file (with line where known), no key column,
        a node listed twice, a value GraphML's declared type cannot hold.

    References
    ----------
    RFC 4180 (2005); U. Brandes et al., "GraphML Progress Report" (2002);
    NetworkX developers, ``networkx.node_link_data`` (networkx 3.x, 2024).
    """
    path = os.fspath(path)
    fmt = _format(path, format)
    data = read_bytes(path)
    if fmt == "csv":
        return _read_csv(path, data)
    if fmt == "graphml":
        return _read_graphml(path, data)
    return _read_json(path, data)


def _read_csv(path: str, data: bytes) -> NodeTable:
    data = normalise_newlines(strip_bom(data))
    check_utf8(data, path)
    rows = csv.reader(io.StringIO(data.decode("utf-8"), newline=""))
    try:
        header = next(rows)
    except StopIteration:
        raise InputError("the node table is empty", path=path) from None
    except csv.Error as err:
        raise InputError(f"bad CSV: {err}", path=path, line=1) from None
    key = next((k for k in ("node", "id") if k in header), None)
    if key is None:
        raise InputError(f"a node table needs a 'node' (or 'id') column (found: {','.join(header)})",
                         path=path, line=1)
    k = header.index(key)
    names = [h for i, h in enumerate(header) if i != k]
    if len(set(names)) != len(names) or any(h == "" for h in names):
        raise InputError("column names must be unique and non-empty", path=path, line=1)
    ids: list[str] = []
    seen: dict[str, int] = {}
    cells: list[list[str | None]] = [[] for _ in names]
    try:
        for row in rows:
            line = rows.line_num
            if not row:
                continue
            if len(row) != len(header):
                raise InputError(f"expected {len(header)} fields, found {len(row)}", path=path, line=line)
            node = row[k]
            if node == "":
                raise InputError("empty node id", path=path, line=line)
            if node in seen:
                raise InputError(f"node {node!r} is listed twice (first at line {seen[node]})",
                                 path=path, line=line)
            seen[node] = line
            ids.append(node)
            rest = [v for i, v in enumerate(row) if i != k]
            for col, value in zip(cells, rest):
                col.append(value)
    except csv.Error as err:
        raise InputError(f"bad CSV: {err}", path=path, line=rows.line_num) from None
    columns = {}
    for name, col in zip(names, cells):
        kind, values = infer_type(col)
        columns[name] = {"type": kind, "values": values}
    return NodeTable(path, ids, columns)


class _NodeDataTarget:
    """GraphML node keys and the data of each top-level node, with lines."""

    def __init__(self, path: str) -> None:
        self.path = path
        self.expat = None
        self.keys: dict[str, dict] = {}
        self.current_key: dict | None = None
        self.ids: list[str] = []
        self.lines: list[int] = []
        self.node_data: list[dict[str, str]] = []
        self.stack: list[str] = []
        self.text: list[str] | None = None
        self.text_key: str | None = None
        self.graphs = 0

    def start(self, tag, attrib):
        name = tag.rsplit("}", 1)[-1]
        parent = self.stack[-1] if self.stack else None
        self.stack.append(name)
        if name == "graph":
            self.graphs += 1
        elif name == "key" and attrib.get("for", "all") in ("node", "all"):
            self.current_key = {"id": attrib.get("id", ""), "name": attrib.get("attr.name") or attrib.get("id", ""),
                                "type": attrib.get("attr.type", "string"), "default": None}
            self.keys[self.current_key["id"]] = self.current_key
        elif name == "default" and self.current_key is not None:
            self.text, self.text_key = [], None
        elif name == "node" and parent == "graph" and self.graphs == 1 and self.stack.count("graph") == 1:
            node_id = attrib.get("id")
            if node_id is None:
                raise InputError("<node> without an id attribute", path=self.path,
                                 line=int(self.expat.CurrentLineNumber))
            self.ids.append(node_id)
            self.lines.append(int(self.expat.CurrentLineNumber))
            self.node_data.append({})
        elif name == "data" and parent == "node" and self.stack.count("graph") == 1 and self.graphs == 1 \
                and attrib.get("key") in self.keys:
            self.text, self.text_key = [], attrib.get("key")

    def data(self, text):
        if self.text is not None:
            self.text.append(text)

    def end(self, tag):
        name = self.stack.pop()
        if name == "default" and self.text is not None and self.current_key is not None:
            self.current_key["default"] = "".join(self.text)
            self.text = None
        elif name == "data" and self.text is not None and self.text_key is not None:
            self.node_data[-1][self.text_key] = "".join(self.text)
            self.text, self.text_key = None, None
        elif name == "key":
            self.current_key = None

    def close(self):
        return None


def _graphml_value(kind: str, text: str, fail):
    text = text.strip() if kind != "string" else text
    if kind == "boolean":
        low = text.lower()
        if low in ("true", "1"):
            return True
        if low in ("false", "0"):
            return False
        raise fail(f"{text!r} is not a boolean")
    if kind in ("int", "long"):
        try:
            return float(int(text))
        except ValueError:
            raise fail(f"{text!r} is not an integer") from None
    if kind in ("float", "double"):
        try:
            return float(text)
        except ValueError:
            raise fail(f"{text!r} is not a number") from None
    return text


def _read_graphml(path: str, data: bytes) -> NodeTable:
    target = _NodeDataTarget(path)
    feed_xml(path, data, target)
    seen: dict[str, int] = {}
    for node, line in zip(target.ids, target.lines):
        if node in seen:
            raise InputError(f"node {node!r} is declared twice (first at line {seen[node]})", path=path, line=line)
        seen[node] = line
    columns = {}
    for key in target.keys.values():
        kind = key["type"]
        if kind not in _GRAPHML_TYPES:
            raise InputError(f"node key {key['name']!r}: attr.type {kind!r} is not a GraphML type", path=path)
        values = []
        for j, node_data in enumerate(target.node_data):
            text = node_data.get(key["id"], key["default"])

            def fail(message, j=j):
                return InputError(f"node {target.ids[j]!r}, attribute {key['name']!r}: {message}",
                                  path=path, line=target.lines[j])
            values.append(None if text is None else _graphml_value(kind, text, fail))
        columns[key["name"]] = {"type": _GRAPHML_TYPES[kind], "values": values}
    return NodeTable(path, list(target.ids), columns)


def _read_json(path: str, data: bytes) -> NodeTable:
    data = strip_bom(data)
    check_utf8(data, path)
    try:
        document = json.loads(data.decode("utf-8"))
    except json.JSONDecodeError as err:
        raise InputError(f"not valid JSON: {err.msg} (column {err.colno})", path=path, line=err.lineno) from None
    nodes = document.get("nodes") if isinstance(document, dict) else None
    if not isinstance(nodes, list):
        raise InputError('a node-link document needs a "nodes" array', path=path)
    ids: list[str] = []
    seen: dict[str, int] = {}
    names: list[str] = []
    for j, node in enumerate(nodes):
        node_id = _id_text(node.get("id")) if isinstance(node, dict) else None
        if node_id is None:
            raise InputError(f'each node must be an object whose "id" is a string or integer (nodes[{j}])',
                             path=path)
        if node_id in seen:
            raise InputError(f"node {node_id!r} is listed twice (nodes[{seen[node_id]}] and nodes[{j}])",
                             path=path)
        seen[node_id] = j
        ids.append(node_id)
        names.extend(k for k in node if k != "id" and k not in names)
    columns = {}
    for name in names:
        raw = [node.get(name) for node in nodes]
        kinds = {("boolean" if isinstance(v, bool) else "number" if isinstance(v, (int, float))
                  else "text") for v in raw if v is not None}
        if len(kinds) == 1 and kinds != {"text"}:
            kind = kinds.pop()
            values = [None if v is None else (v if kind == "boolean" else float(v)) for v in raw]
        else:
            kind = "text"
            values = [None if v is None else v if isinstance(v, str) else json.dumps(v, ensure_ascii=False)
                      for v in raw]
        columns[name] = {"type": kind, "values": values}
    return NodeTable(path, ids, columns)


def align_column(table: NodeTable, name: str, node_ids) -> tuple[str, list]:
    """Column ``name`` aligned to a network's node ids (None where the table has no row).

    Raises
    ------
    InputError
        No such column; a node of the table that the network does not have
        (named, so a mistyped id is found).
    """
    col = table.column(name)
    known = {str(n): i for i, n in enumerate(node_ids)}
    out: list = [None] * len(known)
    for node, value in zip(table.ids, col["values"]):
        i = known.get(node)
        if i is None:
            raise InputError(f"node {node!r} of the node table is not in the network", path=table.path)
        out[i] = value
    return col["type"], out
