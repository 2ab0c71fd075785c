"""Network and membership files: readers, canonical form, validation report.

Public interface
----------------
``read_network(path, *, format=None, policy=ImportPolicy(), progress=None)``
    -> ``(GraphData, ImportReport)``
``FORMATS``: ``(name, description)`` pairs for help texts.
``structural_changes(old, new, *, limit=None)`` -> dict
``read_membership(path, node_ids, *, format=None)`` -> ``(labels, info)``
``write_membership(path, node_ids, labels, format="csv", *, graph=None)`` -> int
``membership_text(node_ids, labels, format="csv", *, graph=None)`` -> ``(text, count)``
``SAMPLES_DIR``: folder of the bundled sample network(s).

This package imports only ``workspace.domain`` / ``workspace.errors`` and
numpy, scipy, pyarrow and defusedxml; importing it loads only ``domain``
(numpy), the readers load on first use, so ``FORMATS`` is cheap for help
texts.
"""

from __future__ import annotations

import os
from pathlib import Path

from typing import TYPE_CHECKING, Callable

from workspace.domain import ImportPolicy
from workspace.errors import InputError, ParameterError

if TYPE_CHECKING:  # the readers (pyarrow, scipy, defusedxml) load on first use
    from workspace.domain import GraphData, ImportReport
    from workspace.io._common import Progress
    from workspace.io.changes import structural_changes
    from workspace.io.membership import membership_text, read_membership, write_membership

_LAZY = {
    "structural_changes": "workspace.io.changes",
    "read_membership": "workspace.io.membership",
    "write_membership": "workspace.io.membership",
    "membership_text": "workspace.io.membership",
}


def __getattr__(name: str):
    """Load ``structural_changes`` and the membership functions on first access."""
    if name in _LAZY:
        import importlib

        value = getattr(importlib.import_module(_LAZY[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")

__all__ = [
    "FORMATS", "SAMPLES_DIR", "read_network", "structural_changes", "read_membership",
    "write_membership", "membership_text", "format_from_path", "validate_policy",
]

#: Supported network formats, ``(name, one-line description)``.
FORMATS: tuple[tuple[str, str], ...] = (
    ("csv", "comma-separated edge list: source,target[,weight...] (RFC 4180 quoting)"),
    ("tsv", "tab-separated edge list, no quoting (IANA text/tab-separated-values)"),
    ("edgelist", "whitespace-separated edge list: source target [weight ...]"),
    ("graphml", "GraphML XML (nodes, edges, a weight attribute by name)"),
    ("mtx", "Matrix Market coordinate or array matrix; ids are row numbers 1..n"),
    ("json", "node-link JSON {nodes: [{id}], links|edges: [{source, target, ...}]}"),
)
FORMAT_NAMES = tuple(name for name, _ in FORMATS)

#: File extensions (after an optional ``.gz``) -> format.
EXTENSIONS = {
    ".csv": "csv", ".tsv": "tsv", ".tab": "tsv", ".txt": "edgelist", ".edges": "edgelist",
    ".edgelist": "edgelist", ".el": "edgelist", ".graphml": "graphml", ".xml": "graphml",
    ".mtx": "mtx", ".mm": "mtx", ".json": "json",
}

SAMPLES_DIR = Path(__file__).resolve().parent / "samples"

_CHOICES = {
    "duplicates": ("sum", "max", "first", "error"),
    "self_loops": ("drop", "keep", "error"),
    "directed": ("error", "sum", "max", "min", "mean", "keep"),
    "header": ("auto", "yes", "no"),
}


def format_from_path(path: str | os.PathLike) -> str:
    """Format name from the file extension (``.gz`` is looked through).

    Raises
    ------
    InputError
        Unknown extension; the message names the file and lists the formats.
    """
    name = os.fspath(path).lower()
    if name.endswith(".gz"):
        name = name[:-3]
    suffix = os.path.splitext(name)[1]
    if suffix in EXTENSIONS:
        return EXTENSIONS[suffix]
    known = ", ".join(f"{fmt} ({', '.join(s for s, f in EXTENSIONS.items() if f == fmt)})"
                      for fmt in FORMAT_NAMES)
    raise InputError(f"cannot tell the format from the extension {suffix or '(none)'!r}; "
                     f"pass a format: {known}", path=os.fspath(path))


def validate_policy(policy: ImportPolicy) -> None:
    """Check every policy field; raise ParameterError naming the bad one."""
    for name, choices in _CHOICES.items():
        value = getattr(policy, name)
        if value not in choices:
            raise ParameterError(f"{name} must be one of {'|'.join(choices)}, not {value!r}")
    weight = policy.weight
    if weight is not None:
        if isinstance(weight, bool) or not isinstance(weight, (int, str)):
            raise ParameterError(f"weight must be a column name or 0-based index, not {weight!r}")
        if isinstance(weight, int) and weight < 0 or isinstance(weight, str) and not weight:
            raise ParameterError(f"weight must be a column name or 0-based index, not {weight!r}")
    if policy.comment is not None and (not isinstance(policy.comment, str) or not policy.comment
                                       or "\n" in policy.comment or "\r" in policy.comment):
        raise ParameterError(f"comment must be a non-empty one-line marker, not "
                             f"{policy.comment!r}")
    if not isinstance(policy.numeric_ids, bool):
        raise ParameterError("numeric_ids must be true or false")
    if policy.delimiter is not None and not isinstance(policy.delimiter, str):
        raise ParameterError(f"delimiter must be a string, not {policy.delimiter!r}")


def read_network(path: str | os.PathLike, *, format: str | None = None,
                 policy: ImportPolicy = ImportPolicy(),
                 progress: Progress = None,
                 on_graph: Callable[[GraphData, tuple], None] | None = None
                 ) -> tuple[GraphData, ImportReport]:
    """Read a network file into canonical form and validate it.

    The canonical graph has node ids sorted by code point, edges as index
    pairs ``u < v`` (``u == v`` for kept self-loops) sorted
    lexicographically, int64 indices and float64 weights, so
    ``GraphData.content_hash()`` is the same whatever the line order,
    endpoint order or file format of the same graph.

    Parameters
    ----------
    path : str or PathLike
        The file; gzip-compressed files are read transparently.
    format : {"csv", "tsv", "edgelist", "graphml", "mtx", "json"} or None, default None
        None picks by extension: ``.csv``; ``.tsv``/``.tab``;
        ``.txt``/``.edges``/``.edgelist``/``.el`` (whitespace);
        ``.graphml``/``.xml``; ``.mtx``/``.mm``; ``.json`` (each optionally
        followed by ``.gz``).
    policy : ImportPolicy, default ImportPolicy()
        ``duplicates`` (default ``"max"``): a pair seen more than once
        (``a,b`` and ``b,a`` are the same pair) keeps ``sum``, ``max`` or
        the ``first`` weight in file order, or is refused (``error``).
        ``self_loops`` (``"drop"``): drop, keep or refuse ``a,a`` records.
        ``directed`` (``"error"``): for input that declares itself directed,
        the undirected weight of ``{a, b}`` from the arc weights
        ``W_ab, W_ba`` (0 when missing) is ``sum: W_ab + W_ba``,
        ``max``/``min``: max/min of the two, ``mean: (W_ab + W_ba) / 2``;
        ``error`` refuses input with any asymmetric pair; ``keep`` keeps the
        direction and makes a directed version (rows of a delimited file are
        arcs ``first column -> second``; an edge of a file declaring itself
        undirected becomes two arcs).
        ``weight`` (None): column name or 0-based index (delimited), edge
        attribute name (GraphML, JSON); for Matrix Market any value selects
        the stored values. None: unweighted, every edge weighs 1.
        ``numeric_ids`` (False): ids are read as integers and written in
        decimal (``"007"`` and ``"7"`` are the same node).
        ``comment`` (None): a marker that starts a comment anywhere on a
        line of a delimited file; the comment and blanks before it are
        ignored. ``delimiter`` (None = format default): one character,
        ``"tab"`` or ``"whitespace"``. ``header`` (``"auto"``): see Notes.
    progress : callable(stage: str, done: int, total: int | None) or None
        Called with stages ``"read"`` (bytes), ``"parse"``,
        ``"canonicalise"`` (steps of 4) and ``"report"``.
    on_graph : callable(GraphData, (offsets, data)) or None
        Called once with the canonical graph as soon as it exists, before
        the report is built (on the caller's thread: a caller can start
        hashing or compressing it elsewhere meanwhile), and with its node ids
        packed as :func:`workspace.domain.encode_node_ids` packs them (int64
        offsets, UTF-8 bytes), made from the ids' own bytes.

    Returns
    -------
    graph : GraphData
        ``node_ids`` (n,) str; ``edge_u``, ``edge_v`` (m,) int64;
        ``weight`` (m,) float64 > 0.
    report : ImportReport
        Counts (records, nodes, edges, components and the 50 largest
        sizes, isolated nodes, self-loops found / kept, duplicates merged,
        asymmetric pairs, zero-weight records dropped), the weight summary
        (min, max, mean, median, total) and notes on every decision taken.

    Raises
    ------
    InputError
        Missing file, a directory, unreadable or damaged file, unknown
        extension, and every content problem - invalid UTF-8, wrong field
        count, empty id, non-numeric / NaN / infinite / negative weight,
        refused self-loop or duplicate, asymmetric directed input with
        ``directed="error"`` (with the count and the flag to use), XML
        entity declarations or external references, no edge left - with
        the file and the 1-based line where one applies (header, blank and
        comment lines counted; JSON records by index).
    ParameterError
        A policy field outside its choices, a weight column that is an
        endpoint column, an unknown format name.

    Notes
    -----
    Node ids are verbatim strings: CSV fields after RFC 4180 unquoting
    (blanks inside fields kept), TSV fields as they are, whitespace-file
    tokens; a UTF-8 byte-order mark is dropped. Zero-weight records are
    dropped (and counted) before duplicates are merged; ``sum`` adds in
    ascending weight order so the result is independent of line order.
    Matrix Market ids are ``"1".."n"``; declared nodes of GraphML, JSON and
    Matrix Market input without edges stay as isolated nodes, and so do
    nodes named only by dropped records (zero weight, dropped self-loops).
    With ``duplicates="first"`` the result depends on line order by
    definition; every other rule gives a line-order independent hash.

    ``header="auto"`` (delimited files) reads the first non-blank line as
    column names only when one of these holds, and records the decision in
    ``report.notes`` either way:

    1. ``weight`` names a column (a non-digit string): a header is required
       and must contain that name;
    2. none of the line's fields is a number, and either its first two
       fields name the endpoint columns - a known pair compared without case,
       blanks, ``_`` or ``-`` (source/target, from/to, src/dst, node1/node2,
       tail/head, id1/id2, origin/destination, sender/receiver, u/v, a/b,
       i/j, x/y, s/t, ... see ``delimited.ENDPOINT_HEADER_NAMES``), names
       that differ only by a from/to role word (``from_station,to_station``)
       or one name numbered 1 and 2 (``user1,user2``) - the last three kinds
       and one-letter pairs (which can also be ids) only when some id repeats
       in the following lines of the first 256 KiB - or some column is
       numeric in every one of those lines while the line's field there is
       not;
    3. and (for rule 2) neither of its first two fields occurs as a node id
       anywhere below - a name that is also a node id marks a data line.

    A first line read as data whose two ids occur on no other line (a
    2-node component of its own, what a header read as data looks like)
    gets a note starting ``warning:`` that names ``--header yes``, unless
    every line of the sample is such a pair.
    Otherwise the line is data. ``"yes"`` and ``"no"`` force the choice.

    References
    ----------
    RFC 4180 (2005) for CSV; U. Brandes et al., "GraphML Progress Report"
    (2002); R. F. Boisvert et al., "The Matrix Market Exchange Formats",
    NIST IR 5935 (1996); networkx ``node_link_data`` (networkx 3.x).
    """
    from workspace.io._common import read_bytes, report_progress
    from workspace.io.canonical import canonicalise

    validate_policy(policy)
    path = os.fspath(path)
    if format is None:
        format = format_from_path(path)
    elif format not in FORMAT_NAMES:
        raise ParameterError(f"unknown format {format!r}; choose one of "
                             f"{', '.join(FORMAT_NAMES)}")
    records = None
    if format in ("csv", "tsv", "edgelist"):
        # a large file that needs no rewriting is parsed from the file itself (its bytes are
        # never held in memory beside the parsed columns); else, and on any doubt, as below
        from workspace.io.delimited import read_delimited_file
        records = read_delimited_file(path, format, policy, progress)
    data = read_bytes(path, progress) if records is None else b""
    if records is not None:
        pass
    elif format in ("csv", "tsv", "edgelist"):
        from workspace.io.delimited import read_delimited
        records = read_delimited(path, data, format, policy, progress)
    elif format == "graphml":
        from workspace.io.graphml import read_graphml
        records = read_graphml(path, data, policy, progress)
    elif format == "mtx":
        from workspace.io.matrix_market import read_matrix_market
        records = read_matrix_market(path, data, policy, progress)
    else:
        from workspace.io.node_link import read_node_link
        records = read_node_link(path, data, policy, progress)
    del data
    graph, report = canonicalise(records, policy, progress, on_graph=on_graph, consume=True)
    report_progress(progress, "report", 1, 1)
    return graph, report
