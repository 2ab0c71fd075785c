"""Commands: delete-run, members, compare (housekeeping and looking inside runs)."""

from __future__ import annotations


from workspace.cli.common import confirmed, emit_json, session
from workspace.cli.output import fmt


def cmd_delete_run(args) -> int:
    from workspace.services.delete import delete_runs, describe_runs

    with session(args, writes=True, create=False) as (store, out):
        what = describe_runs(store, args.runs)
        ids = " ".join(str(r["run"]) for r in what["runs"])
        if not args.yes:
            listing = "".join(f"  run {r['run']}  {r['status']}  {r['method']} on {r['ref']}\n" for r in what["runs"])
            if not confirmed(f"run {ids}", f"{listing}delete {len(what['runs'])} run(s) with their measures and "
                             "annotations?", ids):
                out.note("cutbook: nothing deleted")
                return 1
        res = delete_runs(store, args.runs)
        if args.json:
            emit_json(res)
        else:
            out.line(f"deleted run {ids}; {res['arrays_removed']} stored array(s) no longer used were removed")
    return 0


def cmd_members(args) -> int:
    from workspace.services.members import run_members

    limit = args.limit if args.limit is not None else (None if args.json else 50)
    with session(args) as (store, out):
        res = run_members(store, args.run, community=args.community, limit=limit, offset=args.offset)
        named = None
        if getattr(args, "label_by", None):
            from workspace.services.nodes import labels_of

            listed = [n for c in res["communities"] for n in c["nodes"]] + res["unassigned"]
            named = labels_of(store, [args.run], args.label_by, listed)
            res["label_by"] = args.label_by
            for c in res["communities"]:
                c["labels"] = [named[n] for n in c["nodes"]]
            res["unassigned_labels"] = [named[n] for n in res["unassigned"]]
        if args.json:
            emit_json(res)
            return 0

        def shown(node: str) -> str:
            label = named.get(node, node) if named is not None else node
            return node if label == node else f"{label} [{node}]"

        what = res["method"] if res["kind"] == "computed" else f"attached '{res['label']}'"
        out.line(f"run {res['run']}  {what} on {res['ref']}  k={res['k']}  {res['nodes']} nodes")
        for c in res["communities"]:
            first, last = c["offset"] + 1, c["offset"] + len(c["nodes"])
            span = f" (nodes {first}-{last} of {c['size']}; --limit/--offset for more)" if c["truncated"] else ""
            stored = f" (stored as {c['community']})" if res.get("shown_labels") else ""
            out.line(f"community {c['shown']}{stored}  size {c['size']}{span}")
            if "stability" in c:
                out.words(f"{shown(n)} ({fmt(s)})" for n, s in zip(c["nodes"], c["stability"]))
            elif c["nodes"]:
                out.words(map(shown, c["nodes"]))
        if res["unassigned"]:
            out.words(map(shown, res["unassigned"][:limit]),
                      first=f"unassigned  {len(res['unassigned'])} node(s):  ")
    return 0


def cmd_compare(args) -> int:
    from workspace.services.members import compare_matrix

    with session(args) as (store, out):
        res = compare_matrix(store, args.runs, nodes=args.nodes, nmi_normalization=args.nmi)
        if args.json:
            emit_json(res)
            return 0
        names = [str(r["run"]) for r in res["runs"]]
        out.table(["run", "method", "version", "k"],
                  [(r["run"], r["method"] if r["kind"] == "computed" else f"attached:{r['label']}", r["ref"], r["k"])
                   for r in res["runs"]], right=["run", "k"])
        for key, title in (("ari", "ARI (1 = same partition)"),
                           ("nmi", f"NMI, {res['nmi_normalization']} mean (1 = same partition)"),
                           ("vi_nats", "VI in nats (0 = same partition)")):
            out.table(["run", *names], [[n, *[fmt(round(x, 4)) for x in row]] for n, row in zip(names, res[key])],
                      title=title, right=["run", *names])
        out.line(f"nodes scored: {res['nodes']} (see n_scored in --json)")
    return 0
