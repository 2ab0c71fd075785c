"""Commands: note, tag, untag, annotations, tagged (annotations on runs, versions, parameter sets)."""

from __future__ import annotations

from workspace.cli.common import emit_json, session


def print_annotations(out, doc: dict) -> None:
    """The ``tags`` / ``notes`` lines shared by show RUN, show P/N@V and params show."""
    if doc.get("tags"):
        out.line("  tags   " + " ".join(doc["tags"]))
    for n in doc.get("notes") or []:
        out.line(f"  note   {n['added']}  {n['note']}")


def _state(out, res: dict, verb: str | None = None) -> None:
    if verb is not None:
        written = res.get("added") or []
        if written and written[0]["action"] == "note":
            out.line(f"added a note to {res['target']}")
        elif written:
            out.line(f"{verb} {res['target']}: " + ", ".join(e["text"] for e in written))
        else:
            out.line(f"{res['target']}: nothing to add (already tagged)")
    out.line(f"{res['target']}  tags: {' '.join(res['tags']) or '-'}   notes: {len(res['notes'])}")


def cmd_note(args) -> int:
    from workspace.services import annotations as svc

    with session(args, writes=True, create=False) as (store, out):
        res = svc.add_note(store, args.target, args.text, params=args.params)
        emit_json(res) if args.json else _state(out, res, "noted on")
    return 0


def cmd_tag(args) -> int:
    from workspace.services import annotations as svc

    with session(args, writes=True, create=False) as (store, out):
        res = svc.tag(store, args.target, args.tags, params=args.params)
        emit_json(res) if args.json else _state(out, res, "tagged")
    return 0


def cmd_untag(args) -> int:
    from workspace.services import annotations as svc

    with session(args, writes=True, create=False) as (store, out):
        res = svc.untag(store, args.target, args.tags, params=args.params)
        emit_json(res) if args.json else _state(out, res, "untagged")
    return 0


def cmd_annotations(args) -> int:
    from workspace.services import annotations as svc

    with session(args) as (store, out):
        res = svc.annotations_of(store, args.target, params=args.params)
        if args.json:
            emit_json(res)
            return 0
        _state(out, res)
        print_annotations(out, {"notes": res["notes"]})
        if res["history"]:
            out.table(["#", "when", "event", "text"],
                      [(e["id"], e["at"], e["action"], e["text"]) for e in res["history"]], title="history",
                      right=["#"])
    return 0


def cmd_tagged(args) -> int:
    from workspace.services import annotations as svc

    with session(args) as (store, out):
        rows = svc.find_tagged(store, args.tag)
        if args.json:
            emit_json(rows)
        elif not rows:
            out.line(f"nothing carries the tag {args.tag}")
        else:
            out.table(["kind", "target"], [(r["kind"], r["target"]) for r in rows])
    return 0
