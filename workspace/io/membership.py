"""Membership files: which community each node belongs to.

Formats: CSV with the header ``node,community`` (RFC 4180 quoting), JSON
``{"nodes": [{"id": ..., "community": ...}]}`` and GraphML whose nodes carry a
``community`` attribute. Community labels read back are renumbered by first
appearance in canonical node order, the numbering the rest of the package uses.
"""

from __future__ import annotations

import json
import os
import re
from xml.sax.saxutils import escape, quoteattr

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from workspace.errors import InputError, ParameterError
from workspace.io._common import (
    check_utf8,
    feed_xml,
    format_by_name,
    id_strings,
    normalise_newlines,
    read_bytes,
    string_array,
    strip_bom,
)
from workspace.io.delimited import WHITESPACE, _Csv, _delimiter_hint, resolve_delimiter
from workspace.io.node_link import _id_text

MEMBERSHIP_FORMATS = ("csv", "json", "graphml")
_XML_FORBIDDEN = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")


def _membership_format(path: str, format: str | None) -> str:
    return format_by_name(path, format, ((".csv", "csv"), (".tsv", "csv"), (".txt", "csv"), (".json", "json"),
                                         (".graphml", "graphml"), (".xml", "graphml")), "membership", "--format")


def _node_positions(path: str, known: pa.Array, nodes: pa.Array, locate) -> np.ndarray:
    """The position of every record's node among the network's ids (``known``); InputError for a
    node not in the network or listed twice (the earliest such record)."""
    index = pc.index_in(nodes, value_set=known)
    if index.null_count:
        i = int(np.flatnonzero(index.is_null().to_numpy(zero_copy_only=False))[0])
        line, label = locate(i)
        raise InputError(f"node {nodes[i].as_py()!r} is not in the network"
                         + (f" ({label})" if label else ""), path=path, line=line)
    index = index.to_numpy().astype(np.int64)
    if index.size:
        order = np.argsort(index, kind="stable")
        repeat = np.flatnonzero(index[order][1:] == index[order][:-1]) + 1
        if repeat.size:
            p = repeat[np.argmin(order[repeat])]
            i, first = int(order[p]), int(order[p - 1])
            line, label = locate(i)
            first_line, first_label = locate(first)
            where = f"line {first_line}" if first_line is not None else first_label
            raise InputError(f"node {nodes[i].as_py()!r} is listed twice (first at {where})"
                             + (f" ({label})" if label else ""), path=path, line=line)
    return index


def _labels(path: str, node_ids, nodes: pa.Array, communities: pa.Array,
            locate) -> tuple[np.ndarray, dict]:
    """Records (node id, community name) -> labels by node index + info."""
    n = len(node_ids)
    known = id_strings(node_ids)
    if known.type != nodes.type:
        nodes = nodes.cast(known.type)
    if len(nodes) == n and nodes.null_count == 0 and nodes.equals(known):
        # every node of the network, in its canonical order (a membership exported by cutbook,
        # read back): record i is node i, with no lookup and no duplicate to look for (10M
        # 40-character ids: Arrow's hash set of the ids and the duplicate check's sort skipped)
        index = np.arange(n, dtype=np.int64)
    else:
        index = _node_positions(path, known, nodes, locate)
    lengths = pc.binary_length(communities)
    if len(communities) and pc.min(lengths).as_py() == 0:
        i = pc.index(lengths, 0).as_py()
        line, label = locate(i)
        raise InputError(f"node {nodes[i].as_py()!r} has an empty community"
                         + (f" ({label})" if label else ""), path=path, line=line)
    encoded = pc.dictionary_encode(communities)
    codes = encoded.indices.to_numpy(zero_copy_only=False).astype(np.int64)
    names = encoded.dictionary.to_pylist()
    by_node = np.full(n, -1, dtype=np.int64)
    by_node[index] = codes
    present = by_node >= 0
    seen, first_at = np.unique(by_node[present], return_index=True)
    order = seen[np.argsort(first_at)]
    relabel = np.full(len(names), -1, dtype=np.int64)
    relabel[order] = np.arange(order.size)
    labels = np.where(present, relabel[np.maximum(by_node, 0)], -1).astype(np.int64)
    info = {
        "records": int(len(nodes)),
        "missing": int(n - np.count_nonzero(present)),
        "communities": {int(relabel[c]): names[c] for c in order.tolist()},
    }
    return labels, info


def read_membership(path: str | os.PathLike, node_ids: np.ndarray, *,
                    format: str | None = None, delimiter: str | None = None) -> tuple[np.ndarray, dict]:
    """Read a membership file against a network's canonical node ids.

    Community names (any string) become integers by first appearance in
    canonical node order: with ``c(i)`` the name of node ``i``, label
    ``L(i) = |{c(j) : j < first index of c(i)}|``, i.e. the first node's
    community is 0, the next new community 1, and so on.

    Parameters
    ----------
    path : str or PathLike
        ``.csv`` (header with columns ``node`` and ``community``; other
        columns ignored), ``.json`` or ``.graphml`` (node attribute
        ``community``), unless ``format`` says otherwise.
    node_ids : ndarray of str, shape (n,), or domain.PackedNodeIds
        The network's canonical node ids (packed: matched on their UTF-8 bytes, never
        decoded).
    format : {"csv", "json", "graphml"} or None, default None
        None means by file extension (``.tsv`` and ``.txt`` are read as CSV).
    delimiter : str or None, default None
        CSV field separator (one character, or ``tab``, ``semicolon``, …);
        None means ``,`` (tab for a ``.tsv`` file).

    Returns
    -------
    labels : ndarray of int64, shape (n,)
        Label of node ``node_ids[i]``; -1 where the file does not list it.
    info : dict
        ``records`` (int), ``missing`` (nodes not in the file), ``communities``
        (dict label -> community name as written in the file).

    Raises
    ------
    InputError
        Missing/unreadable file, missing ``node,community`` header, a node
        that is not in the network, a node listed twice, an empty community,
        wrong field counts, invalid UTF-8 - with file and 1-based line
        (JSON: the ``nodes[i]`` index).

    Notes
    -----
    A file written by :func:`write_membership` reads back to exactly the
    labels written when those are numbered by first appearance (the
    package's canonical numbering); otherwise to the same partition.

    References
    ----------
    Y. Shafranovich, "Common Format and MIME Type for Comma-Separated Values
    (CSV) Files", RFC 4180 (2005).
    """
    path = os.fspath(path)
    fmt = _membership_format(path, format)
    data = read_bytes(path)
    if fmt == "csv":
        if delimiter is None and path.lower().removesuffix(".gz").endswith(".tsv"):
            delimiter = "tab"
        return _read_csv(path, data, node_ids, resolve_delimiter("csv", delimiter))
    if fmt == "json":
        return _read_json(path, data, node_ids)
    return _read_graphml(path, data, node_ids)


def _read_csv(path: str, data: bytes, node_ids: np.ndarray, delimiter: str = ","):
    data = normalise_newlines(strip_bom(data))
    check_utf8(data, path)
    if delimiter == WHITESPACE:
        raise ParameterError("a membership file needs a one-character delimiter such as ',', ';' or tab")
    reader = _Csv(path, data, delimiter, quoting=delimiter != "\t")
    if reader.lines.n_rows == 0:
        raise InputError("the membership file is empty", path=path)
    begin = int(reader.lines.starts[0])
    end = data.find(b"\n", begin)
    first = reader.read(data[begin:] if end < 0 else data[begin:end + 1], None, None,
                        threads=False)
    header = [first.column(i)[0].as_py() for i in range(first.num_columns)] \
        if first.num_rows else []
    if "node" not in header or "community" not in header:
        sep = "tab" if delimiter == "\t" else delimiter
        raise InputError(f"a membership CSV needs the header line node{sep}community (found: "
                         f"{sep.join(map(str, header))})"
                         + (_delimiter_hint(data[begin:] if end < 0 else data[begin:end], delimiter)
                            if len(header) == 1 else ""), path=path, line=reader.lines.line(0))
    columns = [header.index("node"), header.index("community")]
    table = reader.read(data, len(header), columns, threads=True)
    nodes = table.column(0).slice(1).combine_chunks()
    communities = table.column(1).slice(1).combine_chunks()
    return _labels(path, node_ids, nodes, communities,
                   lambda i: (reader.lines.line(i + 1), None))


def _read_json(path: str, data: bytes, node_ids: np.ndarray):
    data = strip_bom(data)
    check_utf8(data, path)
    try:
        document = json.loads(data.decode("utf-8"))
    except json.JSONDecodeError as err:
        raise InputError(f"not valid JSON: {err.msg}", path=path, line=err.lineno) from None
    if not isinstance(document, dict) or not isinstance(document.get("nodes"), list):
        raise InputError('a membership JSON needs {"nodes": [{"id": ..., "community": ...}]}',
                         path=path)
    # a node-link export lists nodes without a community too (no "community" field): skipped
    entries = [e for e in document["nodes"] if not (isinstance(e, dict) and "community" not in e)]
    ids = [_id_text(e.get("id")) if isinstance(e, dict) else None for e in entries]
    names = [_id_text(e.get("community")) if isinstance(e, dict) else None for e in entries]
    for values, what in ((ids, "id"), (names, "community")):
        if None in values:
            j = values.index(None)
            raise InputError(f"nodes[{j}]: {what} must be a string or integer", path=path)
    return _labels(path, node_ids, string_array(ids), string_array(names),
                   lambda i: (None, f"nodes[{i}]"))


class _CommunityTarget:
    """Node ids and their ``community`` data values from GraphML, with lines."""

    def __init__(self) -> None:
        self.expat = None
        self.keys: set[str] = set()
        self.ids: list[str] = []
        self.values: list[str | None] = []
        self.lines: list[int] = []
        self.text: list[str] | None = None
        self.depth = 0
        self.node_depth: int | None = None

    def start(self, tag, attrib):
        name = tag.rsplit("}", 1)[-1]
        self.depth += 1
        if name == "key" and attrib.get("attr.name") == "community" \
                and attrib.get("for", "all") in ("node", "all"):
            self.keys.add(attrib.get("id", ""))
        elif name == "node" and self.node_depth is None:
            self.node_depth = self.depth
            self.ids.append(attrib.get("id"))
            self.values.append(None)
            self.lines.append(int(self.expat.CurrentLineNumber))
        elif name == "data" and self.node_depth == self.depth - 1 \
                and attrib.get("key") in self.keys:
            self.text = []

    def data(self, text):
        if self.text is not None:
            self.text.append(text)

    def end(self, tag):
        name = tag.rsplit("}", 1)[-1]
        if name == "data" and self.text is not None:
            self.values[-1] = "".join(self.text).strip()
            self.text = None
        if name == "node" and self.node_depth == self.depth:
            self.node_depth = None
        self.depth -= 1

    def close(self):
        return None


def _read_graphml(path: str, data: bytes, node_ids: np.ndarray):
    target = _CommunityTarget()
    feed_xml(path, data, target)
    if None in target.ids:
        j = target.ids.index(None)
        raise InputError("<node> without an id attribute", path=path, line=target.lines[j])
    kept = [j for j, value in enumerate(target.values) if value is not None]
    lines = [target.lines[j] for j in kept]
    return _labels(path, node_ids, string_array([target.ids[j] for j in kept]),
                   string_array([target.values[j] for j in kept]),
                   lambda i: (lines[i], None))


def write_membership(path: str | os.PathLike, node_ids: np.ndarray, labels: np.ndarray,
                     format: str = "csv", *, graph=None) -> int:
    """Write node -> community labels; nodes labelled -1 are left out.

    Parameters
    ----------
    path : str or PathLike
        Output file (overwritten).
    node_ids : ndarray of str, shape (n,)
    labels : ndarray of int, shape (n,)
        Community of each node, -1 for none.
    format : {"csv", "json", "graphml"}, default "csv"
        See :func:`membership_text`.
    graph : GraphData or None, default None
        JSON and GraphML: also write the network's edges with their weights.

    Returns
    -------
    int
        Number of nodes written with a community.

    Raises
    ------
    ParameterError, InputError
        As :func:`membership_text`.

    References
    ----------
    RFC 4180 (2005); U. Brandes et al., "GraphML Progress Report" (2002).
    """
    path = os.fspath(path)
    if format == "csv":
        count, chunks = _csv_chunks(node_ids, labels, path)
        with open(path, "wb") as out:
            for chunk in chunks:
                out.write(chunk)
        return count
    text, count = membership_text(node_ids, labels, format, graph=graph, path=path)
    with open(path, "w", encoding="utf-8", newline="") as out:
        out.write(text)
    return count


def _csv_chunks(node_ids, labels, path: str | None):
    """Count and byte chunks of a membership CSV of str node ids (see :mod:`membership_csv`)."""
    from workspace.domain import PackedNodeIds, encode_node_ids
    from workspace.io.membership_csv import membership_csv

    labels = np.asarray(labels)
    if not isinstance(node_ids, PackedNodeIds):
        node_ids = np.asarray(node_ids)
        if node_ids.shape != labels.shape or node_ids.ndim != 1:
            raise ParameterError("node_ids and labels must be 1-D arrays of the same length")
        node_ids = PackedNodeIds(*encode_node_ids(node_ids))
    return membership_csv(node_ids, labels, path=path)


def membership_text(node_ids: np.ndarray, labels: np.ndarray, format: str = "csv", *,
                    graph=None, path: str | None = None,
                    attributes: list[tuple[str, str, list]] | None = None) -> tuple[str, int]:
    """The text of a membership file, and how many nodes it gives a community.

    Parameters
    ----------
    node_ids : ndarray of str, shape (n,)
    labels : ndarray of int, shape (n,)
        Community of each node, -1 for none.
    format : {"csv", "json", "graphml"}, default "csv"
        CSV: header ``node,community``, RFC 4180 quoting, UTF-8, ``\\n``; nodes
        labelled -1 are left out. JSON without ``graph``: ``{"nodes": [{"id",
        "community"}]}`` (nodes labelled -1 left out); with ``graph``, the node-link layout ``{"directed",
        "multigraph", "graph", "nodes": [{"id", "community"}], "links":
        [{"source", "target", "weight"}]}`` (every node; one labelled -1 has
        no ``community``). GraphML: ``<key
        attr.name="community" attr.type="int" for="node">`` and, with
        ``graph``, ``<key attr.name="weight" attr.type="double" for="edge">``;
        every node is written, a node labelled -1 has no community data.
    graph : GraphData or None, default None
        JSON and GraphML: also write its edges (arcs when directed) with
        their weights, so the file carries the network with the partition.
        Weights are written with Python's shortest round-trip repr.
    path : str or None
        Named in errors.
    attributes : list of (name, type, values) or None
        Node attributes to write with ``graph`` (JSON and GraphML): ``type`` one of
        ``boolean``, ``number``, ``text``; ``values`` aligned with ``node_ids``, None where a
        node has none (left out). JSON: node fields; GraphML: one ``<key for="node">`` each
        (``attr.type`` boolean / double / string). Names ``id`` and ``community`` are not
        written (they would clash).

    Returns
    -------
    text : str
    count : int
        Nodes given a community.

    Raises
    ------
    ParameterError
        Unknown format, lengths that differ, ``graph`` whose ids differ.
    InputError
        An id that the format cannot carry (a line break in CSV, an XML
        control character in GraphML).

    References
    ----------
    RFC 4180 (2005); U. Brandes et al., "GraphML Progress Report" (2002);
    NetworkX developers, ``networkx.node_link_data`` (networkx 3.x, 2024).
    """
    if format not in MEMBERSHIP_FORMATS:
        raise ParameterError(f"membership format must be one of "
                             f"{', '.join(MEMBERSHIP_FORMATS)}, not {format!r}")
    node_ids = np.asarray(node_ids)
    labels = np.asarray(labels)
    if node_ids.shape != labels.shape or node_ids.ndim != 1:
        raise ParameterError("node_ids and labels must be 1-D arrays of the same length")
    if graph is not None and not np.array_equal(graph.node_ids, node_ids):
        raise ParameterError("graph node ids differ from node_ids")
    if format == "csv":  # RFC 4180 minimal quoting, built from the ids' UTF-8 bytes
        count, chunks = _csv_chunks(node_ids, labels, path)
        return b"".join(chunks).decode("utf-8"), count
    keep = np.flatnonzero(labels >= 0)
    ids = node_ids[keep].tolist()
    values = labels[keep].astype(np.int64).tolist()
    all_ids = node_ids.tolist()
    label_of = labels.astype(np.int64).tolist()
    if format == "json" and graph is None:
        document = {"nodes": [{"id": i, "community": c} for i, c in zip(ids, values)]}
        return json.dumps(document, ensure_ascii=False, indent=None) + "\n", len(ids)
    attributes = [a for a in (attributes or []) if a[0] not in ("id", "community")] if graph is not None else []
    if format == "json":
        nodes = [{"id": i, "community": c} if c >= 0 else {"id": i}
                 for i, c in zip(all_ids, label_of)]
        for name, _kind, values in attributes:
            for node, value in zip(nodes, values):
                if value is not None:
                    node[name] = value
        document = {"directed": bool(graph.directed) if graph is not None else False,
                    "multigraph": False, "graph": {}, "nodes": nodes}
        if graph is not None:
            names = graph.node_ids
            document["links"] = [{"source": a, "target": b, "weight": w} for a, b, w in
                                 zip(names[graph.edge_u].tolist(), names[graph.edge_v].tolist(),
                                     graph.weight.tolist())]
        return json.dumps(document, ensure_ascii=False, indent=None) + "\n", len(ids)
    bad = next((x for x in all_ids if _XML_FORBIDDEN.search(x)), None)
    if bad is not None:
        raise InputError(f"node id {bad!r} holds a character XML cannot carry; write "
                         "json", path=path)
    edgedefault = "directed" if graph is not None and graph.directed else "undirected"
    parts = ['<?xml version="1.0" encoding="UTF-8"?>\n',
             '<graphml xmlns="http://graphml.graphdrawing.org/xmlns">\n',
             '  <key id="community" for="node" attr.name="community" attr.type="int"/>\n']
    if graph is not None:
        parts.append('  <key id="weight" for="edge" attr.name="weight" '
                     'attr.type="double"/>\n')
    graphml_type = {"boolean": "boolean", "number": "double", "text": "string"}
    for j, (name, kind, values) in enumerate(attributes):
        bad = next((v for v in values if isinstance(v, str) and _XML_FORBIDDEN.search(v)), None)
        if bad is not None or _XML_FORBIDDEN.search(name):
            raise InputError(f"node attribute {name!r} holds a character XML cannot carry; write json", path=path)
        parts.append(f'  <key id="n{j}" for="node" attr.name={quoteattr(name)} '
                     f'attr.type="{graphml_type[kind]}"/>\n')

    def xml_value(value) -> str:
        if isinstance(value, bool):
            return "true" if value else "false"
        if isinstance(value, float):
            return repr(value)
        return escape(str(value))

    parts.append(f'  <graph id="G" edgedefault="{edgedefault}">\n')
    for i, (node, label) in enumerate(zip(all_ids, label_of)):
        data = [f'<data key="community">{label}</data>'] if label >= 0 else []
        data += [f'<data key="n{j}">{xml_value(values[i])}</data>' for j, (_, _, values) in enumerate(attributes)
                 if values[i] is not None]
        if data:
            parts.append(f'    <node id={quoteattr(node)}>{"".join(data)}</node>\n')
        else:
            parts.append(f'    <node id={quoteattr(node)}/>\n')
    if graph is not None:
        names = graph.node_ids
        for a, b, w in zip(names[graph.edge_u].tolist(), names[graph.edge_v].tolist(),
                           graph.weight.tolist()):
            parts.append(f'    <edge source={quoteattr(a)} target={quoteattr(b)}>'
                         f'<data key="weight">{w!r}</data></edge>\n')
    parts.append("  </graph>\n</graphml>\n")
    return "".join(parts), len(ids)
