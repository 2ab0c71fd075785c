"""Commands: track (add, remove, list), update (run the tracked sets on a version), updates (list, show)."""

from __future__ import annotations

from workspace.cli.common import emit_json, progress_bar, session
from workspace.cli.output import fmt


def cmd_track(args) -> int:
    from workspace.services import tracking

    action = args.track_action
    with session(args, writes=action != "list", create=False) as (store, out):
        if action == "add":
            res = tracking.add_tracked(store, args.network, args.params)
            what = f"tracking {res['added']['params']} on {res['network']}"
        elif action == "remove":
            res = tracking.remove_tracked(store, args.network, args.params)
            what = f"no longer tracking {', '.join(res['removed'])} on {res['network']} (its runs are kept)"
        else:
            res = tracking.list_tracked(store, args.network)
            what = None
        if args.json:
            emit_json(res)
            return 0
        if what:
            out.line(what)
        print_tracked(out, res)
    return 0


def print_tracked(out, res: dict) -> None:
    rows = res["tracked"]
    if not rows:
        out.line(f"{res['network']} tracks no parameter set (cutbook track add {res['network']} PROJECT/NAME)")
        return
    out.table(["tracked set", "method", "k", "added", "by"],
              [(r["params"], r["method"], r["k"] or "-", r["added"], r["by"] or "-") for r in rows],
              title=f"tracked on {res['network']} (each new version runs them; --json has every value)")


def cmd_update(args) -> int:
    from workspace.services import tracking

    with session(args, writes=True, create=False) as (store, out), progress_bar() as bar:
        res = tracking.run_update(store, args.ref, trigger="request", progress=bar,
                                  say=None if args.json else (lambda line: (bar.close(), out.line(line))))
        bar.close()
        report = tracking.change_report(store, res["update"], moved_rows=bool(args.json))
        if args.json:
            emit_report_json(report)
        else:
            print_report(out, report, args.limit)
        return 1 if report["status"] == "failed" else 0


def cmd_updates(args) -> int:
    from workspace.services import tracking

    with session(args) as (store, out):
        if (args.updates_action or "list") == "list":
            rows = tracking.list_updates(store, args.network, limit=args.limit)
            if args.json:
                emit_json(rows)
            elif not rows:
                out.line("no updates yet (import a new version of a network that tracks parameter sets, "
                         "or run `cutbook update P/N`)")
            else:
                print_update_list(out, rows)
            return 0
        update_id = args.update if args.update is not None else tracking.latest_update_id(store, args.network)
        report = tracking.change_report(store, update_id, moved_rows=bool(args.json))
        if args.json:
            emit_report_json(report)
        else:
            print_report(out, report, args.limit)
    return 0


def print_update_list(out, rows: list[dict]) -> None:
    table = []
    for u in rows:
        for i, st in enumerate(u["sets"] or [{}]):
            sm = st.get("summary") or {}
            status = u["status"] if st.get("status") in (None, u["status"]) else f"{u['status']}: {st['status']}"
            table.append((u["update"] if i == 0 else "", u["ref"] if i == 0 else "", st.get("params", "-"),
                          status, st.get("run") or "-", st.get("previous_run") or "-",
                          fmt(sm.get("ari")) if sm else "-", sm.get("moved", "-") if sm else "-",
                          _events_text(sm.get("events"), changes_only=True) if sm else "-"))
    out.table(["update", "version", "tracked set", "status", "run", "vs", "ARI", "moved", "changes"], table,
              right=["update", "run", "vs", "ARI", "moved"], title="updates, latest first")


def _events_text(kinds: dict | None, changes_only: bool = False) -> str:
    from workspace.services.tracking import EVENT_KINDS

    kinds = kinds or {}
    shown = [k for k in EVENT_KINDS if k in kinds and not (changes_only and k == "kept")]
    return ", ".join(f"{kinds[k]} {k}" for k in shown) or "none"


def print_report(out, report: dict, limit: int = 10) -> None:
    """The change report in text: per tracked set, scores, node changes, events, moved nodes (shown labels)."""
    from workspace.cli.diffs import _EVENT_ORDER, _event_text, print_moved

    against = f" against {report['previous']}" if report.get("previous") else " (no earlier version)"
    out.line(f"update {report['update']}  {report['status']}  {report['ref']}{against}  "
             f"({'after import' if report['trigger'] == 'import' else 'on request'}, {report['started']})")
    for st in report["sets"]:
        run = f"run {st['run']}" if st.get("run") else "no run"
        prev = f" against run {st['previous_run']}" if st.get("previous_run") else ""
        out.line(f"tracked set {st['params']}: {run}{prev}  {st['status']}")
        if st.get("error"):
            out.line(f"  error: {st['error']}")
        d = st.get("diff")
        sm = st.get("summary") or {}
        if d is None:
            if st["status"] == "done" and not st.get("previous_run"):
                out.line("  nothing to compare with: no earlier version has a finished run of this set")
            continue
        out.line(f"  ARI {fmt(d['ari'])}   NMI {fmt(d['nmi'])}   VI {fmt(d['vi_nats'])} nats   "
                 f"k {d['k_a']} -> {d['k_b']}   nodes +{d['only_in_b']}/-{d['only_in_a']}   moved {d['moved']:,}")
        out.line(f"  events: {_events_text(sm.get('events'))}")
        shown = d.get("shown_labels") or {}
        sa = {c: v for c, v in shown.get("a") or []}
        sb = {c: v for c, v in shown.get("b") or []}
        rank = {k: i for i, k in enumerate(_EVENT_ORDER)}
        changes = sorted((e for e in d.get("events") or [] if e["kind"] not in ("kept",)),
                         key=lambda e: (rank.get(e["kind"], 99), -max(e.get("size_a") or 0, e.get("size_b") or 0)))
        for e in changes[:limit]:
            e = dict(e, a=[sa.get(x, x) for x in e.get("a") or []], b=[sb.get(x, x) for x in e.get("b") or []])
            out.line(_event_text(e))
        if len(changes) > limit:
            out.line(f"  … and {len(changes) - limit} more events (--json lists all)")
        if d.get("moved"):
            print_moved(out, d, limit, title="moved nodes")
    if report["status"] == "failed":
        out.line("some tracked runs failed; the version and every finished run are kept")


def report_json_doc(report: dict) -> dict:
    """The report with non-finite floats as null; each set's ``diff`` as ``cutbook diff --json`` has it."""
    from workspace.cli.diffs import _as_json_doc
    from workspace.cli.output import _clean

    doc = _clean({k: v for k, v in report.items() if k != "sets"})
    doc["sets"] = []
    for st in report["sets"]:
        entry = _clean({k: v for k, v in st.items() if k != "diff"})
        entry["diff"] = _as_json_doc(st["diff"]) if st.get("diff") is not None else None
        doc["sets"].append(entry)
    return doc


def emit_report_json(report: dict) -> None:
    """The report as JSON; each set's ``diff`` in the layout ``cutbook diff --json`` writes."""
    import sys

    from workspace.cli.diffs import _render
    from workspace.services.diffs import paused_gc

    doc = report_json_doc(report)
    with paused_gc():
        text = _render(doc, "")
    sys.stdout.write(text + "\n")
    sys.stdout.flush()
