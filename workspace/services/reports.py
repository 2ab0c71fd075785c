"""Reports: one self-contained HTML page for a run or a diff of two runs, or one figure alone.

The store is read once (a read transaction, never held while drawing); the
drawing happens in ``workspace.report`` on plain arrays.
"""

from __future__ import annotations

import os
from typing import Any

from workspace.errors import NotFoundError, UsageError
from workspace.services import runs as runs_service
from workspace.store import repo
from workspace.store.db import Store
from workspace.store.schema import NetworkVersion, Run

REPORT_FORMATS = ("html", "svg", "png")
_MISSING = {"spectrum": "no eigengap suggestion", "stability": "no repeats",
            "composition": "give --by ATTRIBUTE (and --nodes FILE when the version has no node table)"}


def run_report_data(store: Store, run_id: int) -> dict[str, Any]:
    """Everything a run report shows, as plain values and arrays (see ``report.html.run_page``)."""
    import numpy as np

    from workspace.report.figures import DRAW_LIMIT

    shown = runs_service.show_run(store, run_id)
    if shown["status"] != "done":
        raise NotFoundError(f"run {run_id} has no membership (status {shown['status']})")
    with store.read() as s:
        run = s.get(Run, run_id)
        version = s.get(NetworkVersion, run.version_id)
        labels = repo.get_array(s, run.membership_blob).astype(np.int64)
        stability = None
        if run.stability_blob and (run.repeats or 1) > 1:
            stability = repo.get_array(s, run.stability_blob) / max(run.repeats, 1)
        graph = None
        if labels.size <= DRAW_LIMIT:
            g = repo.load_graph(s, version)
            graph = {"n": g.n_nodes, "edge_u": g.edge_u, "edge_v": g.edge_v, "weight": g.weight}
        else:
            graph = {"n": int(labels.size), "edge_u": None, "edge_v": None, "weight": None}
    gap = (shown.get("diagnostics") or {}).get("eigengap_suggestion")
    return {"run": shown, "labels": labels, "eigenvalues": shown.get("eigenvalues") or [],
            "gap_k": gap if isinstance(gap, int) and not isinstance(gap, bool) and gap >= 1 else None,
            "stability": stability, "repeats": int(shown.get("repeats") or 1), "graph": graph,
            "quality": shown.get("quality") or {}, "communities": shown.get("communities") or [],
            "notes": list(shown.get("warnings") or [])}


def diff_report_data(store: Store, run_a: int, run_b: int) -> dict[str, Any]:
    """The diff of two runs as the report shows it (moved nodes as rows, all of them counted)."""
    from workspace.services.diffs import diff_runs

    return diff_runs(store, run_a, run_b, moved_rows=True, moved_limit=1000)


def _format_of(path: str, format: str | None) -> str:
    if format is not None:
        if format not in REPORT_FORMATS:
            raise UsageError(f"report format must be one of {', '.join(REPORT_FORMATS)}, not {format!r}")
        return format
    name = path.lower()
    for suffix, fmt in ((".html", "html"), (".htm", "html"), (".svg", "svg"), (".png", "png")):
        if name.endswith(suffix):
            return fmt
    if path == "-":
        return "html"
    raise UsageError(f"cannot tell the report format from {path!r}: use .html, .svg or .png, or give --format")


def build_report(store: Store, runs: list[int], *, figure: str | None = None, format: str = "html",
                 moved_shown: int | None = None, nodes: str | os.PathLike | None = None,
                 by: str | None = None) -> tuple[bytes, dict[str, Any]]:
    """The report (or one of its figures) as bytes, and a summary.

    Parameters
    ----------
    runs : list of int
        One run (run report) or two (diff report, A then B).
    figure : str or None
        A figure name (``spectrum``, ``sizes``, ``stability``, ``network`` for a run;
        ``contingency`` for a diff) to write alone; None for the whole HTML page.
    format : {"html", "svg", "png"}
        ``html`` needs ``figure=None``; ``svg``/``png`` need a figure.
    moved_shown : int or None
        Diff reports: moved nodes listed (default ``report.html.MOVED_SHOWN``).
    nodes, by : path and attribute name, or None
        Run reports: add the communities' composition by attribute ``by`` of the node
        table ``nodes`` (see :func:`composition`).
    """
    from workspace.report import html as pages
    from workspace.report.render import figure_bytes

    if len(runs) not in (1, 2):
        raise UsageError("report takes one run, or two runs to compare")
    if format == "html" and figure is not None:
        raise UsageError("--figure writes one figure: give an .svg or .png output")
    if format in ("svg", "png") and figure is None:
        raise UsageError(f"a .{format} output holds one figure: name it with --figure")
    kind = "run" if len(runs) == 1 else "diff"
    if nodes is not None and by is None:
        raise UsageError("--nodes FILE needs --by ATTRIBUTE (the attribute to compose by)")
    if by is not None and kind == "diff":
        raise UsageError("--by/--nodes add a composition to a run report (one run)")
    comp = composition(store, runs[0], nodes, by) if by is not None else None
    data = run_report_data(store, runs[0]) if kind == "run" else diff_report_data(store, *runs)
    if comp is not None:
        data["composition"] = comp
    figs = pages.run_figures(data) if kind == "run" else pages.diff_figures(data)
    summary: dict[str, Any] = {"kind": kind, "runs": list(runs), "format": format,
                               "figures": list(figs)}
    if figure is not None:
        known = pages.RUN_FIGURES if kind == "run" else pages.DIFF_FIGURES
        if figure not in known:
            raise UsageError(f"no figure {figure!r} in a {kind} report (figures: {', '.join(known)})")
        if figure not in figs:
            raise NotFoundError(f"run {runs[0]} has no {figure} figure "
                                f"({_MISSING.get(figure, 'too many nodes to draw')}); "
                                f"this run has: {', '.join(figs)}")
        body = figure_bytes(figs[figure][1](), format)
        summary["figure"] = figure
        return body, summary
    if kind == "run":
        text = pages.run_page(data)
    else:
        text = pages.diff_page(data, **({} if moved_shown is None else {"moved_shown": moved_shown}))
    return text.encode("utf-8"), summary


def write_report(store: Store, runs: list[int], path: str | os.PathLike, *, figure: str | None = None,
                 format: str | None = None, stream=None, moved_shown: int | None = None,
                 nodes: str | os.PathLike | None = None, by: str | None = None) -> dict[str, Any]:
    """Build the report and write it to ``path`` (beside, then renamed over) or to ``stream`` (binary)."""
    target = os.fspath(path)
    fmt = _format_of(target, format)
    body, summary = build_report(store, runs, figure=figure, format=fmt, moved_shown=moved_shown,
                                 nodes=nodes, by=by)
    if stream is not None:
        stream.write(body)
        stream.flush()
    else:
        from workspace.services.runs import write_atomically

        write_atomically(target, body)
    summary.update({"path": target, "bytes": len(body)})
    return summary


def composition(store: Store, run_id: int, nodes_path: str | os.PathLike | None, attribute: str, *,
                nodes_format: str | None = None, nmi_normalization: str = "arithmetic") -> dict[str, Any]:
    """A run's communities by a node attribute: from the run's version's stored node table, or from
    a node table file (CSV / GraphML / JSON) given as ``nodes_path`` (an override).

    A file is read and checked before anything else; nothing is written to the store.
    """
    from workspace.compare.composition import composition as compose

    if nodes_path is not None:
        from workspace.io.node_data import align_column, read_node_table

        table = read_node_table(nodes_path, format=nodes_format)
        table.column(attribute)  # a missing column is named before the store is read
        node_ids, labels, summary = runs_service.load_membership(store, run_id)
        kind, values = align_column(table, attribute, node_ids)
        source = os.fspath(nodes_path)
    else:
        from workspace.services import nodes as node_tables

        node_ids, labels, summary = runs_service.load_membership(store, run_id)
        with store.read() as s:
            run = s.get(Run, run_id)
            row = node_tables.table_row(s, run.version_id)
            kind, values = node_tables.require_column(s, run.version_id, attribute,
                                                      f"{summary['ref']} (run {run_id}'s version)")
            source = f"{row.source_name} (stored with {summary['ref']})"
    out = compose(labels, values, nmi_normalization=nmi_normalization)
    return {"run": run_id, "ref": summary["ref"], "attribute": attribute, "type": kind,
            "nodes_file": source, "missing_values": sum(v is None for v in values), **out}
