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
_MISSING = {"spectrum": "no eigengap suggestion", "stability": "no repeats (or no sweep seeds)",
            "quality": "no finished k",
            "composition": "give --by ATTRIBUTE (and --nodes FILE when the version has no node table)"}


def run_report_data(store: Store, run_id: int, *, label_by: str | None = None) -> dict[str, Any]:
    """Everything a run report shows, as plain values and arrays (see ``report.html.run_page``).

    The network drawing sits at the version's coordinate columns when its node table names them
    (``--coords``), else at a spring layout seeded with ``report.figures.LAYOUT_SEED`` (recorded in
    ``graph["layout"]``). ``label_by`` names nodes in small drawings by that attribute.
    """
    import numpy as np

    from workspace.report.figures import DRAW_LIMIT, LAYOUT_SEED
    from workspace.services import nodes as node_tables

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
            placed = node_tables.coordinates(s, version.id)
            if placed is not None:  # the version's own coordinate columns
                graph["positions"], spec = placed
                graph["layout"] = {"kind": "coordinates", "x": spec["x"], "y": spec["y"],
                                   "projection": spec.get("kind", "plane")}
            else:  # a seeded layout: the same version is drawn the same way in every report
                graph["layout"] = {"kind": "spring", "seed": LAYOUT_SEED}
            if label_by is not None:
                graph["node_labels"] = node_tables.node_labels(s, version.id, repo.load_node_ids(s, version),
                                                               label_by)
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


def sweep_report_data(store: Store, sweep_id: int) -> dict[str, Any]:
    """A sweep as its report shows it (``services.sweeps.show_sweep`` without the split view)."""
    from workspace.services.sweeps import show_sweep

    return show_sweep(store, sweep_id, splits=False)


def chain_runs(store: Store, params_ref: str, network: str | None = None) -> list[int]:
    """The runs of one parameter-set version across a network's versions (oldest version first).

    ``params_ref`` ``PROJECT/NAME@V`` names the parameter-set version; without ``@V``, the version
    used by the newest finished run of the set. On each network version the latest finished run
    of it counts (as ``diff --track`` takes them).
    """
    from workspace.services.diffs import track_runs_of_params

    if "@" not in params_ref:
        from workspace.store.schema import ParamSetVersion

        newest = track_runs_of_params(store, params_ref, network)[-1]
        with store.read() as s:
            psv = s.get(ParamSetVersion, s.get(Run, newest).param_set_version_id)
            params_ref = f"{params_ref}@{psv.number}"
    return track_runs_of_params(store, params_ref, network)


def chain_report_data(store: Store, run_ids: list[int], *, what: str | None = None) -> dict[str, Any]:
    """A chain of runs (two or more, usually one parameter-set version on successive versions) as
    its report shows it: the track of ``services.diffs.track`` and a flow chart's columns."""
    import numpy as np

    from workspace.services.diffs import track

    if len(run_ids) < 2:
        raise UsageError("a chain report needs at least two runs")
    doc = track(store, run_ids, moved_limit=0, moved_rows=True)
    thread_of: list[dict[int, int]] = [dict() for _ in run_ids]
    position = {str(r): i for i, r in enumerate(run_ids)}
    for t in doc.get("lineage") or []:
        for p in t["path"]:
            thread_of[position[str(p["run"])]][int(p["community"])] = int(t["thread"])
    columns = []
    for i, rid in enumerate(run_ids):
        _, labels, _ = runs_service.load_membership(store, rid)
        sizes = np.bincount(labels[labels >= 0]) if (labels >= 0).any() else np.zeros(0, dtype=np.int64)
        order = sorted((c for c in range(sizes.size) if sizes[c] > 0),
                       key=lambda c: (thread_of[i].get(c, 10**9), c))
        columns.append([(c, int(sizes[c])) for c in order])
    steps = [st["contingency"]["cells"] for st in doc["steps"]]
    titles = [f"run {d['run']}\n{d['ref'].rsplit('/', 1)[-1]}" for d in doc["run_details"]]
    return {"run_details": doc["run_details"], "track_steps": doc["steps"], "lineage": doc.get("lineage") or [],
            "columns": columns, "steps": steps, "colour_of": thread_of, "titles": titles, "what": what}


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
                 by: str | None = None, label_by: str | None = None, sweep: int | None = None,
                 chain: bool = False, params: str | None = None,
                 network: str | None = None) -> tuple[bytes, dict[str, Any]]:
    """The report (or one of its figures) as bytes, and a summary.

    Parameters
    ----------
    runs : list of int
        One run (run report), two (diff report, A then B), or, with ``chain``, two or more
        runs in chain order.
    figure : str or None
        A figure name (``spectrum``, ``sizes``, ``stability``, ``composition``, ``network`` for a run;
        ``contingency`` for a diff; ``quality``, ``stability`` for a sweep; ``flow`` for a chain)
        to write alone; None for the whole HTML page.
    format : {"html", "svg", "png"}
        ``html`` needs ``figure=None``; ``svg``/``png`` need a figure.
    moved_shown : int or None
        Diff reports: moved nodes listed (default ``report.html.MOVED_SHOWN``).
    nodes, by : path or None, attribute name or None
        Run reports: add the communities' composition by attribute ``by``, from the version's
        stored node table, or from the node table file ``nodes`` (see :func:`composition`).
    label_by : str or None
        Run reports: name the nodes of small network drawings by this attribute.
    sweep : int or None
        A sweep report of this sweep (no runs).
    chain : bool
        A chain report of ``runs``; or, with ``params`` (``PROJECT/NAME[@V]``, and ``network`` when
        the set has runs on several networks), of that parameter-set version's runs across versions.
    """
    from workspace.report import html as pages
    from workspace.report.render import figure_bytes

    if format == "html" and figure is not None:
        raise UsageError("--figure writes one figure: give an .svg or .png output")
    if format in ("svg", "png") and figure is None:
        raise UsageError(f"a .{format} output holds one figure: name it with --figure")
    if sweep is not None:
        if runs or chain or params:
            raise UsageError("--sweep ID makes a sweep report: leave out run ids, --chain and --params")
        kind = "sweep"
    elif chain or params is not None:
        if params is not None and runs:
            raise UsageError("give the chain's runs, or --params PROJECT/NAME[@V], not both")
        if params is None and len(runs) < 2:
            raise UsageError("--chain takes two or more runs, in order (or --params PROJECT/NAME[@V])")
        kind = "chain"
    else:
        if len(runs) not in (1, 2):
            raise UsageError("report takes one run, two runs to compare, --chain RUN RUN ..., or --sweep ID")
        kind = "run" if len(runs) == 1 else "diff"
    if nodes is not None and by is None:
        raise UsageError("--nodes FILE needs --by ATTRIBUTE (the attribute to compose by)")
    if by is not None and kind != "run":
        raise UsageError("--by/--nodes belong to a run report (one run)")
    if label_by is not None and kind not in ("run", "diff"):
        raise UsageError("--label-by names nodes in a run or diff report")
    summary: dict[str, Any] = {"kind": kind, "runs": list(runs), "format": format}
    if kind == "sweep":
        data = sweep_report_data(store, sweep)
        figs, known = pages.sweep_figures(data), pages.SWEEP_FIGURES
        summary["sweep"] = sweep
        render = lambda: pages.sweep_page(data)  # noqa: E731
    elif kind == "chain":
        chain_ids = chain_runs(store, params, network) if params is not None else list(runs)
        data = chain_report_data(store, chain_ids, what=params)
        figs, known = pages.chain_figures(data), pages.CHAIN_FIGURES
        summary["runs"] = chain_ids
        render = lambda: pages.chain_page(data)  # noqa: E731
    elif kind == "run":
        comp = composition(store, runs[0], nodes, by) if by is not None else None
        data = run_report_data(store, runs[0], label_by=label_by)
        if comp is not None:
            data["composition"] = comp
        figs, known = pages.run_figures(data), pages.RUN_FIGURES
        render = lambda: pages.run_page(data)  # noqa: E731
    else:
        data = diff_report_data(store, *runs)
        if label_by is not None:
            from workspace.services.nodes import labels_of

            moved = [m[0] for m in data.get("moved_nodes") or []]
            named = labels_of(store, list(runs), label_by, moved)
            data["label_by"], data["moved_labels"] = label_by, [named[n] for n in moved]
        figs, known = pages.diff_figures(data), pages.DIFF_FIGURES
        render = lambda: pages.diff_page(  # noqa: E731
            data, **({} if moved_shown is None else {"moved_shown": moved_shown}))
    summary["figures"] = list(figs)
    if figure is not None:
        if figure not in known:
            raise UsageError(f"no figure {figure!r} in a {kind} report (figures: {', '.join(known)})")
        if figure not in figs:
            what = f"sweep {sweep}" if kind == "sweep" else f"run {runs[0]}"
            raise NotFoundError(f"{what} has no {figure} figure "
                                f"({_MISSING.get(figure, 'too many nodes to draw')}); "
                                f"this {kind} report has: {', '.join(figs)}")
        body = figure_bytes(figs[figure][1](), format)
        summary["figure"] = figure
        return body, summary
    return render().encode("utf-8"), summary


def write_report(store: Store, runs: list[int], path: str | os.PathLike, *, figure: str | None = None,
                 format: str | None = None, stream=None, moved_shown: int | None = None,
                 nodes: str | os.PathLike | None = None, by: str | None = None, label_by: str | None = None,
                 sweep: int | None = None, chain: bool = False, params: str | None = None,
                 network: str | None = None) -> dict[str, Any]:
    """Build the report and write it to ``path`` (beside, then renamed over) or to ``stream`` (binary)."""
    target = os.fspath(path)
    fmt = _format_of(target, format)
    body, summary = build_report(store, runs, figure=figure, format=fmt, moved_shown=moved_shown,
                                 nodes=nodes, by=by, label_by=label_by, sweep=sweep, chain=chain,
                                 params=params, network=network)
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


#: Runs on versions with more nodes than this get no automatic compositions (the UI's run detail).
AUTO_COMPOSITION_LIMIT = 200_000


def run_compositions(store: Store, run_id: int, *, max_values: int = 20, limit: int = 3) -> list[dict[str, Any]]:
    """Compositions of a run by the categorical attributes of its version's node table (for the UI).

    Categorical: text or boolean attributes with 2 to ``max_values`` distinct values; the first
    ``limit`` of them in table order, each as :func:`composition` gives it. An empty list when the
    version has no node table, none such attribute, the run no membership, or more than
    ``AUTO_COMPOSITION_LIMIT`` nodes.
    """
    from workspace.services import nodes as node_tables

    with store.read() as s:
        run = s.get(Run, run_id)
        if run is None or run.membership_blob is None:
            return []
        version = s.get(NetworkVersion, run.version_id)
        if version.n_nodes > AUTO_COMPOSITION_LIMIT:
            return []
        info = node_tables.describe_table(s, version.id)
    if info is None:
        return []
    names = [c["name"] for c in info["columns"]
             if c["type"] in ("text", "boolean") and 2 <= c["distinct"] <= max_values][:limit]
    return [composition(store, run_id, None, name) for name in names]
