"""Node-link JSON reader (the layout of ``networkx.node_link_data``).

``{"directed": bool, "multigraph": bool, "graph": {...},
"nodes": [{"id": ...}, ...], "links" | "edges": [{"source": ..., "target": ..., ...}]}``
"""

from __future__ import annotations

import json

import numpy as np

from workspace.domain import ImportPolicy
from workspace.errors import InputError, ParameterError
from workspace.io._common import (
    EdgeRecords,
    Progress,
    check_utf8,
    check_weights,
    report_progress,
    string_array,
    strip_bom,
)


def _id_text(value) -> str | None:
    """JSON strings verbatim, integers in decimal; anything else is not an id."""
    if isinstance(value, str):
        return value
    if isinstance(value, int) and not isinstance(value, bool):
        return str(value)
    return None


def read_node_link(path: str, data: bytes, policy: ImportPolicy,
                   progress: Progress = None) -> EdgeRecords:
    """Read node-link JSON into :class:`EdgeRecords`.

    Parameters
    ----------
    path : str
    data : bytes
        UTF-8 JSON (a byte-order mark is dropped).
    policy : ImportPolicy
        ``weight`` names a link attribute; None gives every link weight 1.
    progress : callable or None, default None

    Returns
    -------
    EdgeRecords
        ``nodes`` become ``extra_nodes`` (isolated nodes stay); links in
        document order. ``"directed": true`` makes the input directed.

    Raises
    ------
    InputError
        Invalid JSON (with its line), a document that is not a node-link
        object, ids that are not strings or integers, links without
        endpoints, missing or non-numeric / NaN / infinite / negative weights
        (named by their index, e.g. ``links[3]``: the json module keeps no
        element positions).

    Notes
    -----
    Integer ids are written in decimal (``7 -> "7"``); string ids are kept
    verbatim. Edges may name nodes missing from ``nodes``, as
    ``networkx.node_link_graph`` allows.

    References
    ----------
    NetworkX developers, ``networkx.readwrite.json_graph.node_link_data``
    (networkx 3.x, 2024), itself after the D3.js force layout input (2011).
    """
    if policy.weight is not None and not isinstance(policy.weight, str):
        raise ParameterError("for node-link JSON, weight names a link attribute, not a "
                             "column index")
    data = strip_bom(data)
    check_utf8(data, path)
    try:
        document = json.loads(data.decode("utf-8"))
    except json.JSONDecodeError as err:
        raise InputError(f"not valid JSON: {err.msg} (column {err.colno})", path=path,
                         line=err.lineno) from None
    report_progress(progress, "parse", 1, 1)
    if not isinstance(document, dict):
        raise InputError("expected a node-link JSON object with \"nodes\" and \"links\"",
                         path=path)
    present = [k for k in ("links", "edges") if k in document]
    if len(present) != 1:
        raise InputError("a node-link document needs exactly one of \"links\" or \"edges\" "
                         f"(found {present or 'neither'})", path=path)
    links_key = present[0]
    links = document[links_key]
    nodes = document.get("nodes", [])
    if not isinstance(links, list) or not isinstance(nodes, list):
        raise InputError(f"\"nodes\" and \"{links_key}\" must be JSON arrays", path=path)
    directed = document.get("directed", False)
    if not isinstance(directed, bool):
        raise InputError("\"directed\" must be true or false", path=path)

    def fail_node(j: int, message: str) -> InputError:
        return InputError(f"{message} (nodes[{j}])", path=path)

    def fail_link(i: int, message: str) -> InputError:
        return InputError(f"{message} ({links_key}[{i}])", path=path)

    node_ids = [_id_text(node.get("id")) if isinstance(node, dict) else None for node in nodes]
    if None in node_ids:
        j = node_ids.index(None)
        raise fail_node(j, "each node must be an object whose \"id\" is a string or integer")
    sources = [_id_text(link.get("source")) if isinstance(link, dict) else None
               for link in links]
    targets = [_id_text(link.get("target")) if isinstance(link, dict) else None
               for link in links]
    if None in sources or None in targets:
        i = min(x.index(None) for x in (sources, targets) if None in x)
        raise fail_link(i, "each link must be an object whose \"source\" and \"target\" are "
                           "strings or integers")
    notes = [f"node-link JSON ({links_key})"]
    if policy.weight is not None:
        name = policy.weight
        raw = [link.get(name) for link in links]
        bad = next((i for i, x in enumerate(raw)
                    if isinstance(x, bool) or not isinstance(x, (int, float))), None)
        if bad is not None:
            if not isinstance(links[bad], dict) or name not in links[bad]:
                raise fail_link(bad, f"weight attribute {name!r} missing")
            raise fail_link(bad, f"weight {raw[bad]!r} (attribute {name!r}) is not a number")
        weight = np.asarray(raw, dtype=np.float64)
        check_weights(weight, lambda i, msg: fail_link(i, f"weight {raw[i]!r} {msg}"))
        notes.append(f"weights from link attribute {name!r}")
    else:
        weight = np.ones(len(links), dtype=np.float64)
        if any(isinstance(link, dict) and "weight" in link for link in links[:1000]):
            notes.append("link attribute 'weight' present but no weight chosen; edges weigh 1")
    if directed:
        notes.append("input declares itself directed")
    return EdgeRecords(path=path, format="json", source=string_array(sources),
                       target=string_array(targets), weight=weight,
                       weighted=policy.weight is not None, directed=directed,
                       extra_nodes=string_array(node_ids),
                       locate=lambda i: (None, f"{links_key}[{i}]"),
                       locate_node=lambda j: (None, f"nodes[{j}]"), notes=notes)
