"""GraphML reader on ``defusedxml.ElementTree``'s parser (expat with guards).

The parser is fed the file and calls a small target object per element, so
each node and edge keeps the line it starts on. Entity declarations (the
"billion laughs" expansion) and external entities are refused by defusedxml
before anything is expanded.
"""

from __future__ import annotations

import numpy as np
import pyarrow as pa

from workspace.domain import ImportPolicy
from workspace.errors import InputError, ParameterError
from workspace.io._common import (
    EdgeRecords,
    Progress,
    feed_xml,
    string_array,
    weights_from_strings,
)

GRAPHML_NAMESPACE = "http://graphml.graphdrawing.org/xmlns"


def _local(tag: str) -> str:
    return tag.rsplit("}", 1)[-1]


class _GraphMLTarget:
    """Collects keys, the first top-level graph's nodes and edges, with lines."""

    def __init__(self, path: str, weight_name: str | None) -> None:
        self.path = path
        self.weight_name = weight_name
        self.expat = None  # set after the parser exists
        self.stack: list[str] = []
        self.keys: list[dict] = []
        self.weight_keys: set[str] | None = None
        self.weight_default: str | None = None
        self.graph_depth: int | None = None
        self.in_graph = False
        self.graphs_seen = 0
        self.edgedefault = "undirected"
        self.node_ids: list[str] = []
        self.node_lines: list[int] = []
        self.sources: list[str] = []
        self.targets: list[str] = []
        self.edge_lines: list[int] = []
        self.edge_directed: list[bool | None] = []
        self.edge_weight: list[str | None] = []
        self.text: list[str] | None = None
        self.text_goal: str | None = None
        self.current_key: dict | None = None
        self.root_checked = False

    def _line(self) -> int:
        return int(self.expat.CurrentLineNumber)

    def _fail(self, message: str) -> InputError:
        return InputError(message, path=self.path, line=self._line())

    def _resolve_weight_key(self) -> None:
        if self.weight_keys is not None or self.weight_name is None:
            return
        edge_keys = [k for k in self.keys if k["for"] in ("edge", "all")]
        chosen = [k for k in edge_keys if k["name"] == self.weight_name]
        if not chosen:
            chosen = [k for k in edge_keys if k["id"] == self.weight_name]
        if not chosen:
            names = ", ".join(sorted({k["name"] or k["id"] for k in edge_keys})) or "none"
            raise InputError(f"no edge attribute named {self.weight_name!r} "
                             f"(edge attributes declared: {names})", path=self.path)
        self.weight_keys = {k["id"] for k in chosen}
        self.weight_default = chosen[0]["default"]

    def start(self, tag: str, attrib: dict) -> None:
        name = _local(tag)
        depth = len(self.stack)
        self.stack.append(name)
        if not self.root_checked:
            self.root_checked = True
            if name != "graphml":
                raise self._fail(f"not GraphML: the root element is <{name}>, not <graphml>")
            return
        if self.in_graph:
            self._inside_graph(name, depth - self.graph_depth, attrib)
            return
        if name == "graph":
            self.graphs_seen += 1
            if self.graphs_seen == 1:
                self.in_graph = True
                self.graph_depth = depth
                self.edgedefault = attrib.get("edgedefault", "undirected")
                self._resolve_weight_key()
        elif name == "key":
            self.current_key = {"id": attrib.get("id", ""), "for": attrib.get("for", "all"),
                                "name": attrib.get("attr.name"), "default": None}
            self.keys.append(self.current_key)
        elif name == "default" and self.current_key is not None:
            self.text, self.text_goal = [], "default"

    def _inside_graph(self, name: str, inner: int, attrib: dict) -> None:
        if name == "graph":
            raise self._fail("nested graphs (a <graph> inside a node or edge) are not "
                             "supported")
        if name == "hyperedge":
            raise self._fail("hyperedges are not supported; use plain <edge> elements")
        if inner == 2 and name == "data" and self.stack[-2] == "edge" \
                and self.weight_keys is not None and attrib.get("key") in self.weight_keys:
            self.text, self.text_goal = [], "weight"
        if inner != 1:
            return
        if name == "node":
            node_id = attrib.get("id")
            if node_id is None:
                raise self._fail("<node> without an id attribute")
            self.node_ids.append(node_id)
            self.node_lines.append(self._line())
        elif name == "edge":
            source, target = attrib.get("source"), attrib.get("target")
            if source is None or target is None:
                raise self._fail("<edge> without source and target attributes")
            self.sources.append(source)
            self.targets.append(target)
            self.edge_lines.append(self._line())
            flag = attrib.get("directed")
            self.edge_directed.append(None if flag is None else flag.strip().lower() == "true")
            self.edge_weight.append(None)

    def data(self, text: str) -> None:
        if self.text is not None:
            self.text.append(text)

    def end(self, tag: str) -> None:
        name = self.stack.pop()
        if self.text is not None and name in ("data", "default"):
            value = "".join(self.text)
            if self.text_goal == "weight":
                self.edge_weight[-1] = value
            elif self.text_goal == "default" and self.current_key is not None:
                self.current_key["default"] = value
            self.text = self.text_goal = None
        if name == "key":
            self.current_key = None
        if name == "graph" and self.in_graph and len(self.stack) == self.graph_depth:
            self.in_graph = False

    def close(self) -> None:
        return None


def read_graphml(path: str, data: bytes, policy: ImportPolicy,
                 progress: Progress = None) -> EdgeRecords:
    """Read GraphML (the first top-level ``<graph>``) into :class:`EdgeRecords`.

    Parameters
    ----------
    path : str
    data : bytes
        File content; the XML declaration's encoding is honoured by expat.
    policy : ImportPolicy
        ``weight`` names an edge attribute (``attr.name`` of a ``<key>``, or
        the key id); None reads every edge with weight 1.
    progress : callable or None, default None

    Returns
    -------
    EdgeRecords
        Declared ``<node>`` ids become ``extra_nodes`` (isolated nodes stay).

    Raises
    ------
    InputError
        Malformed XML (with its line), entity declarations or external
        references (refused by defusedxml), missing ``graphml`` root or
        ``<graph>``, nested graphs, hyperedges, edges without endpoints,
        missing or bad weights (line of the ``<edge>``).
    ParameterError
        A column index given as weight.

    Notes
    -----
    ``edgedefault="directed"`` or any edge with ``directed="true"`` makes the
    input directed; in a mixed graph an undirected edge counts as two arcs of
    the same weight. A missing ``edgedefault`` reads as undirected, as in
    ``networkx.read_graphml``. Edges may name undeclared nodes.

    References
    ----------
    U. Brandes et al., "GraphML Progress Report", Graph Drawing 2001 (2002).
    """
    if policy.weight is not None and not isinstance(policy.weight, str):
        raise ParameterError("for GraphML, weight names an edge attribute, not a column index")
    target = _GraphMLTarget(path, policy.weight)
    feed_xml(path, data, target, progress)
    if not target.root_checked:
        raise InputError("not GraphML: no elements", path=path)
    if target.graph_depth is None:
        raise InputError("no <graph> element", path=path)
    notes = ["GraphML"]
    if target.graphs_seen > 1:
        notes.append(f"only the first of {target.graphs_seen} top-level graphs was read")
    default_directed = target.edgedefault.strip().lower() == "directed"
    directed_flags = np.array([default_directed if d is None else d
                               for d in target.edge_directed], dtype=bool)
    any_directed = bool(directed_flags.any())
    mixed = any_directed and not bool(directed_flags.all())
    m = len(target.sources)
    edge_lines = np.asarray(target.edge_lines, dtype=np.int64)
    node_lines = target.node_lines

    if policy.weight is not None:
        texts = [target.weight_default if t is None else t for t in target.edge_weight]
        if any(t is None for t in texts):
            i = next(i for i, t in enumerate(texts) if t is None)
            raise InputError(f"edge has no {policy.weight!r} value and the key declares no "
                             "default", path=path, line=int(edge_lines[i]))

        def fail(i: int, message: str) -> InputError:
            return InputError(message, path=path, line=int(edge_lines[i]))

        weight = weights_from_strings(string_array(texts), fail) if m else np.zeros(0)
        notes.append(f"weights from edge attribute {policy.weight!r}")
    else:
        weight = np.ones(m, dtype=np.float64)
        if any(k["name"] == "weight" and k["for"] in ("edge", "all") for k in target.keys):
            notes.append("edge attribute 'weight' present but no weight chosen; edges weigh 1")

    sources = string_array(target.sources)
    targets = string_array(target.targets)
    edge_of_record = np.arange(m, dtype=np.int64)
    if mixed:
        undirected = np.flatnonzero(~directed_flags)
        sources = pa.concat_arrays([sources, targets.take(pa.array(undirected))])
        targets = pa.concat_arrays([targets, string_array(target.sources).take(
            pa.array(undirected))])
        weight = np.concatenate([weight, weight[undirected]])
        edge_of_record = np.concatenate([edge_of_record, undirected])
        notes.append(f"mixed graph: {undirected.size} undirected edge(s) read as two arcs")
    if any_directed:
        notes.append("input declares directed edges")

    def locate(i: int):
        return int(edge_lines[edge_of_record[i]]), None

    def locate_node(j: int):
        return int(node_lines[j]), None

    return EdgeRecords(path=path, format="graphml", source=sources, target=targets,
                       weight=weight, weighted=policy.weight is not None, directed=any_directed,
                       extra_nodes=string_array(target.node_ids), locate=locate,
                       locate_node=locate_node, notes=notes)
