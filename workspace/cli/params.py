"""Commands: params save|list|show, methods."""

from __future__ import annotations

from workspace.cli.common import Out, emit_json, session


def cmd_params(args) -> int:
    from workspace.services import params as svc

    with session(args, writes=args.params_action == "save") as (store, out):
        if args.params_action == "save":
            res = svc.save_params(store, args.name, method=args.method, k=args.k, values=svc.parse_sets(args.set))
            if args.json:
                emit_json(res)
            else:
                verb = "saved" if res["created_new"] else "unchanged: equal values already saved as"
                out.line(f"{verb} {res['ref']}  ({res['method']}, k={res['k'] or 'default'})")
        elif args.params_action == "list":
            rows = svc.list_params(store, args.project)
            if args.json:
                emit_json(rows)
            elif not rows:
                out.line("no parameter sets")
            else:
                tags = any(r.get("tags") for r in rows)  # a tags column only once something is tagged
                out.table(["parameter set", "method", "k", "values", "created", "by"] + ["tags"] * tags,
                          [(r["ref"], r["method"], r["k"] or "default",
                            " ".join(f"{k}={v}" for k, v in r["params"].items()), r["created"], r.get("by") or "-")
                           + ((" ".join(r["tags"]),) if tags else ()) for r in rows])
        else:
            res = svc.show_params(store, args.name)
            if args.json:
                emit_json(res)
            else:
                out.line(f"{res['ref']}   method {res['method']}   k {res['k'] or 'default'}   "
                         f"versions {', '.join(map(str, res['versions']))}")
                out.fields(list(res["params"].items()))
                from workspace.cli.notes import print_annotations

                print_annotations(out, res)
    return 0


def cmd_methods(args) -> int:
    from workspace.services.catalog import describe_methods

    out = Out(args.json)
    rows = describe_methods(args.method)
    if args.json:
        emit_json(rows if args.method is None else rows[0])
        return 0
    if args.method is None:
        out.table(["method", "family", "k", "summary"],
                  [(m["name"], m["family"], "auto or N" if m["supports_auto_k"] else "N", m["summary"]) for m in rows])
        out.line("`cutbook methods NAME` lists a method's parameters")
        return 0
    m = rows[0]
    out.line(f"{m['name']} — {m['summary']}")
    out.line(f"reference: {m['reference']}")
    out.table(["parameter", "type", "default", "allowed", "meaning"],
              [(p["name"], p["type"], p["default"], p["allowed"], p["help"]) for p in m["params"]])
    return 0
