"""Command: diff (two runs, or a chain with --track)."""

from __future__ import annotations

from workspace.cli.common import emit_json, session
from workspace.cli.output import fmt


def _count(x) -> int:
    return len(x) if isinstance(x, (list, tuple)) else int(x or 0)


def cmd_diff(args) -> int:
    from workspace.errors import UsageError
    from workspace.services import diffs

    with session(args) as (store, out):
        if args.track is not None:
            run_ids = list(args.runs)
            if args.track.strip().isdigit():
                # `diff --track 1 2 3`: argparse hands the first run id to --track's optional value;
                # a parameter set is always PROJECT/NAME, so a bare number is the chain's first run
                run_ids = [int(args.track)] + run_ids
            elif args.track:
                if run_ids:
                    raise UsageError("give either --track PROJECT/PARAMS or run ids, not both")
                run_ids = diffs.track_runs_of_params(store, args.track, args.network)
            res = diffs.track(store, run_ids, nmi_normalization=args.nmi)
            if args.json:
                emit_json(res)
            else:
                _print_track(out, res)
            return 0
        if len(args.runs) != 2:
            raise UsageError("diff takes two run ids (or --track for a chain)")
        res = diffs.diff_runs(store, args.runs[0], args.runs[1], nodes=args.nodes, nmi_normalization=args.nmi)
        if args.json:
            emit_json(res)
        else:
            print_diff(out, res, args.limit)
    return 0


def _side(b: dict) -> str:
    what = b["method"] if b["kind"] == "computed" else f"attached '{b['label']}'"
    return f"run {b['run']} ({what} on {b['ref']}, k={b['k']})"


def print_diff(out, d: dict, limit: int = 20) -> None:
    out.line(f"A  {_side(d['a'])}")
    out.line(f"B  {_side(d['b'])}")
    out.line(f"nodes compared: {d['nodes']} ({d.get('n_common', '?')} shared; "
             f"{_count(d['only_in_a'])} only in A, {_count(d['only_in_b'])} only in B; "
             f"coverage {fmt(d['coverage'])})")
    out.line(f"ARI {fmt(d['ari'])}   NMI ({d['nmi_normalization']}) {fmt(d['nmi'])}   AMI {fmt(d['ami'])}   "
             f"VI {fmt(d['vi_nats'])} nats / {fmt(d['vi_bits'])} bits")
    out.line(f"moved nodes: {d['moved']}")
    for note in d.get("notes") or []:
        out.line(f"note: {note}")
    if d.get("matches"):
        out.table(["A", "B", "overlap", "jaccard", "size A", "size B"],
                  [(m["a"], m["b"], m["overlap"], m["jaccard"], m.get("size_a"), m.get("size_b"))
                   for m in d["matches"]], title="matched communities",
                  right=["overlap", "jaccard", "size A", "size B"])
    events = d.get("events") or []
    if isinstance(events, dict):
        events = events.get("items") or events.get("events") or []
    if events:
        out.line("events")
        for e in events:
            a = fmt(e.get("a")) if e.get("a") not in (None, []) else "-"
            b = fmt(e.get("b")) if e.get("b") not in (None, []) else "-"
            out.line(f"  {e['kind']:<10} A[{a}] -> B[{b}]")
    if d.get("event_thresholds"):
        out.line("  thresholds: " + "  ".join(f"{k}={v}" for k, v in d["event_thresholds"].items()))
    moved = d.get("moved_nodes") or []
    if moved:
        out.table(["node", "A community", "B community"], [(m["node"], m["from"], m["to"]) for m in moved[:limit]],
                  title="moved nodes" + (f" (first {limit}; --json lists all)" if len(moved) > limit else ""))


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
