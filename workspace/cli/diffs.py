"""Command: diff (two runs, or a chain with --track)."""

from __future__ import annotations

import json
import sys
from typing import Any

from workspace.cli.common import session
from workspace.cli.output import fmt


def _count(x) -> int:
    return len(x) if isinstance(x, (list, tuple)) else int(x or 0)


def cmd_diff(args) -> int:
    from workspace.errors import UsageError
    from workspace.services import diffs

    with session(args) as (store, out):
        if args.track is not None:
            if getattr(args, "label_by", None):
                raise UsageError("--label-by names the moved nodes of a diff of two runs; leave it out with --track")
            run_ids = list(args.runs)
            if args.track.strip().isdigit():
                # `diff --track 1 2 3`: argparse hands the first run id to --track's optional value;
                # a parameter set is always PROJECT/NAME, so a bare number is the chain's first run
                run_ids = [int(args.track)] + run_ids
            elif args.track:
                if run_ids:
                    raise UsageError("give either --track PROJECT/PARAMS or run ids, not both")
                run_ids = diffs.track_runs_of_params(store, args.track, args.network)
            res = diffs.track(store, run_ids, nmi_normalization=args.nmi, moved_rows=bool(args.json))
            if args.json:
                emit_diff_json(res)
            else:
                _print_track(out, res)
            return 0
        if len(args.runs) != 2:
            raise UsageError("diff takes two run ids (or --track for a chain)")
        res = diffs.diff_runs(store, args.runs[0], args.runs[1], nodes=args.nodes, nmi_normalization=args.nmi,
                              dense_table=getattr(args, "dense_table", False), moved_rows=bool(args.json))
        if getattr(args, "label_by", None):
            from workspace.services.nodes import labels_of

            moved = [m[0] if isinstance(m, list) else m["node"] for m in res.get("moved_nodes") or []]
            named = labels_of(store, list(args.runs), args.label_by, moved)
            res["label_by"] = args.label_by
            res["moved_labels"] = [named[n] for n in moved]
        if args.json:
            emit_diff_json(res)
        else:
            print_diff(out, res, args.limit)
    return 0


def _side(b: dict) -> str:
    what = b["method"] if b["kind"] == "computed" else f"attached '{b['label']}'"
    return f"run {b['run']} ({what} on {b['ref']}, k={b['k']})"


def _more(out, shown: int, total: int, what: str) -> None:
    if total > shown:
        out.line(f"  … and {total - shown:,} more {what} (--json lists all)")


#: Event kinds in the order the text output lists them: changes first, plain continuations last.
_EVENT_ORDER = ("split", "merged", "dissolved", "new", "grown", "shrunk", "kept")


def _event_size(e: dict) -> int:
    return max(int(e.get("size_a") or 0), int(e.get("size_b") or 0))


def _event_text(e: dict) -> str:
    a = fmt(e.get("a")) if e.get("a") not in (None, []) else "-"
    b = fmt(e.get("b")) if e.get("b") not in (None, []) else "-"
    sizes = []
    if e.get("size_a") is not None:
        sizes.append(f"{e['size_a']:,}")
    if e.get("size_b") is not None:
        sizes.append(f"{e['size_b']:,}")
    tail = f"  ({' -> '.join(sizes)} nodes)" if sizes else ""
    return f"  {e['kind']:<10} A[{a}] -> B[{b}]{tail}"


def print_diff(out, d: dict, limit: int = 20) -> None:
    """Text form of a diff: totals first, then the largest matches, events and cells, and the
    first moved nodes, each section cut at ``limit`` rows with a count of the rest."""
    limit = max(0, int(limit))
    out.line(f"A  {_side(d['a'])}")
    out.line(f"B  {_side(d['b'])}")
    out.line(f"nodes compared: {d['nodes']} ({d.get('n_common', '?')} shared; "
             f"{_count(d['only_in_a'])} only in A, {_count(d['only_in_b'])} only in B; "
             f"coverage {fmt(d['coverage'])})")
    out.line(f"ARI {fmt(d['ari'])}   NMI ({d['nmi_normalization']}) {fmt(d['nmi'])}   AMI {fmt(d['ami'])}   "
             f"VI {fmt(d['vi_nats'])} nats / {fmt(d['vi_bits'])} bits")
    scored = d.get("n_scored") or 0
    share = f" ({d['moved'] / scored:.1%} of compared)" if scored else ""
    out.line(f"moved nodes: {d['moved']:,}{share}")
    matches = d.get("matches") or []
    overlap = sum(int(m["overlap"]) for m in matches)
    out.line(f"matched communities: {len(matches):,} (k = {d.get('k_a', '?')} in A, {d.get('k_b', '?')} in B), "
             f"{overlap:,} nodes in matched pairs")
    events = d.get("events") or []
    kinds: dict[str, int] = {}
    for e in events:
        kinds[e["kind"]] = kinds.get(e["kind"], 0) + 1
    out.line("events: " + (", ".join(f"{kinds[k]:,} {k}" for k in _EVENT_ORDER if k in kinds) or "none"))
    c = d.get("contingency") or {}
    if c:
        r, k = c.get("shape") or (len(c.get("rows") or []), len(c.get("cols") or []))
        out.line(f"contingency: {r:,} x {k:,} groups, {c.get('nnz', len(c.get('cells') or [])):,} non-zero cells")
    for note in d.get("notes") or []:
        out.line(f"note: {note}")
    if matches and limit:
        top = sorted(matches, key=lambda m: (-int(m["overlap"]), str(m["a"])))[:limit]
        out.table(["A", "B", "overlap", "jaccard", "size A", "size B"],
                  [(m["a"], m["b"], m["overlap"], m["jaccard"], m.get("size_a"), m.get("size_b")) for m in top],
                  title="matched communities, largest overlap first",
                  right=["overlap", "jaccard", "size A", "size B"])
        _more(out, len(top), len(matches), "matched pairs")
    if events and limit:
        rank = {k: i for i, k in enumerate(_EVENT_ORDER)}
        top = sorted(events, key=lambda e: (rank.get(e["kind"], len(rank)), -_event_size(e)))[:limit]
        out.line("events, changes first, largest first")
        for e in top:
            out.line(_event_text(e))
        _more(out, len(top), len(events), "events")
    if d.get("event_thresholds"):
        out.line("  thresholds: " + "  ".join(f"{k}={v}" for k, v in d["event_thresholds"].items()))
    cells = top_cells(c, limit) if c and limit else []
    if cells:
        out.table(["A", "B", "nodes", "share of A", "share of B"], cells,
                  title="largest contingency cells", right=["nodes", "share of A", "share of B"])
        _more(out, len(cells), int(c.get("nnz", len(c.get("cells") or []))), "non-zero cells")
    moved = d.get("moved_nodes") or []
    if moved and limit:
        print_moved(out, d, limit)


def shown_moved(d: dict, limit: int) -> list[tuple[Any, Any, Any, Any]]:
    """The first ``limit`` moved nodes as ``(node, A shown, B shown, B stored)``: both sides in one
    numbering (B's communities by their match in A, unmatched ones by fresh numbers; see the diff's
    ``shown_labels``), so a node never seems to move from 3 to 3; the last column is B's own number."""
    shown = d.get("shown_labels") or {}
    sa = {c: v for c, v in shown.get("a") or []}
    sb = {c: v for c, v in shown.get("b") or []}
    rows = []
    for m in (d.get("moved_nodes") or [])[:limit]:
        node, f, t = (m["node"], m["from"], m["to"]) if isinstance(m, dict) else (m[0], m[1], m[2])
        rows.append((node, sa.get(f, f), sb.get(t, t), t))
    return rows


def print_moved(out, d: dict, limit: int, title: str = "moved nodes (ascending id)") -> None:
    rows = shown_moved(d, limit)
    if not rows:
        return
    if d.get("moved_labels") is not None:  # --label-by: each moved node's name beside its id
        rows = [(r[0], label, *r[1:]) for r, label in zip(rows, d["moved_labels"])]
        out.table(["node", d["label_by"], "A community", "B community", "B stored as"], rows,
                  title=title + "; B numbered by its match in A")
    else:
        out.table(["node", "A community", "B community", "B stored as"], rows,
                  title=title + "; B numbered by its match in A")
    _more(out, len(rows), int(d.get("moved") or len(d.get("moved_nodes") or [])), "moved nodes")


def top_cells(contingency: dict, limit: int) -> list[tuple[Any, Any, int, float, float]]:
    """The ``limit`` largest non-zero cells of a diff's sparse contingency, largest first (ties by
    position): ``(a, b, count, count / size of a, count / size of b)``."""
    import heapq

    rows, cols = contingency.get("rows") or [], contingency.get("cols") or []
    size_a = dict(zip(rows, contingency.get("row_sizes") or []))
    size_b = dict(zip(cols, contingency.get("col_sizes") or []))
    cells = contingency.get("cells") or []
    top = heapq.nsmallest(limit, range(len(cells)), key=lambda i: (-cells[i][2], i))
    out = []
    for i in top:
        a, b, n = cells[i]
        sa, sb = size_a.get(a) or 0, size_b.get(b) or 0
        out.append((a, b, n, n / sa if sa else 0.0, n / sb if sb else 0.0))
    return out


# --- JSON -------------------------------------------------------------------------------------

def _encode_each(values: list) -> list[str]:
    """JSON text of each scalar (str, int, float, None) at C speed: encoded as one list with a
    newline between items (a raw newline never occurs inside encoded JSON), then split."""
    if not values:
        return []
    return json.dumps(values, separators=("\n", ":"), allow_nan=False)[1:-1].split("\n")


def _row_lines(rows: list) -> list[str]:
    """One compact JSON line per row (rows: equal-length lists of scalars)."""
    if not rows:
        return []
    columns = [_encode_each(list(col)) for col in zip(*rows)]
    return list(map(("[" + ",".join(["{}"] * len(columns)) + "]").format, *columns))


#: Lists written one compact row per line without per-item checks: equal-length rows of
#: scalars by construction (contingency cells, moved nodes).
_ROW_KEYS = frozenset({"cells", "moved_nodes"})


def _is_small(d: dict) -> bool:
    """A dict that reads well on one line: no nested dict, no list longer than 50 items."""
    return not any(isinstance(v, dict) or (isinstance(v, (list, tuple)) and len(v) > 50) for v in d.values())


def _render(value: Any, indent: str, key: str | None = None) -> str:
    """Pretty JSON with bulky lists kept at one line per item (a diff of a thousand communities
    stays a few MB): dicts get one key per line; lists of scalars one line; lists of rows or
    dicts one compact item per line."""
    if isinstance(value, dict):
        if not value:
            return "{}"
        inner = indent + "  "
        parts = [f"{inner}{json.dumps(str(k))}: {_render(v, inner, str(k))}" for k, v in value.items()]
        return "{\n" + ",\n".join(parts) + "\n" + indent + "}"
    if isinstance(value, (list, tuple)):
        value = list(value)
        if not value:
            return "[]"
        inner = indent + "  "
        if key in _ROW_KEYS:
            lines = _row_lines(value)
        elif not any(isinstance(v, (list, tuple, dict)) for v in value):
            return json.dumps(value, allow_nan=False)
        elif all(isinstance(v, dict) and _is_small(v) for v in value):
            lines = [json.dumps(v, allow_nan=False) for v in value]
        else:
            lines = [_render(v, inner) for v in value]
        return "[\n" + inner + (",\n" + inner).join(lines) + "\n" + indent + "]"
    return json.dumps(value, allow_nan=False)


def _as_json_doc(doc: dict) -> dict:
    """The diff (or track) document with non-finite floats as null; the bulky parts (moved
    node rows, contingency cells) hold only ids, labels and counts and are left as they are."""
    from workspace.cli.output import _clean

    def one(d: dict) -> dict:
        bulky = ("moved_nodes", "contingency")
        out = _clean({k: v for k, v in d.items() if k not in bulky})
        out.update({k: d[k] for k in bulky if k in d})
        return out

    if "steps" in doc:
        res = dict(doc)
        res["steps"] = [one(s) for s in doc["steps"]]
        return res
    return one(doc)


def emit_diff_json(doc: dict) -> None:
    """Write a diff or track document on stdout (see :func:`_render` for the layout)."""
    from workspace.services.diffs import paused_gc

    with paused_gc():
        text = _render(_as_json_doc(doc), "")
    sys.stdout.write(text + "\n")
    sys.stdout.flush()


def _print_track(out, res: dict) -> None:
    by_id = {str(r["run"]): r for r in res["run_details"]}
    out.line("chain: " + " -> ".join(f"run {r['run']} ({r['ref']})" for r in res["run_details"]))
    for step in res.get("steps") or []:
        a, b = by_id[str(step["from_run"])], by_id[str(step["to_run"])]
        kinds: dict[str, int] = {}
        for e in step.get("events") or []:
            kinds[e["kind"]] = kinds.get(e["kind"], 0) + 1
        out.line(f"run {a['run']} -> run {b['run']}: ARI {fmt(step.get('ari'))}  NMI {fmt(step.get('nmi'))}  "
                 f"moved {step.get('moved')}  nodes -{_count(step.get('only_in_a'))}/+{_count(step.get('only_in_b'))}"
                 f"  events: " + (", ".join(f"{n} {k}" for k, n in kinds.items()) or "none"))
    lineage = res.get("lineage") or []
    if lineage:
        out.line("community threads (run:community[size])")
        for t in lineage:
            path = " -> ".join(f"{p['run']}:{p['community']}[{p['size']}]" for p in t["path"])
            origin, fate = (fmt(t.get(key)) if t.get(key) else "-" for key in ("origin", "fate"))
            origin = origin.replace("not_compared", "new nodes")
            out.line(f"  {origin.replace('_', ' ')}: {path} -> {fate.replace('_', ' ')}")
