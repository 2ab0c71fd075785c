"""Command: report RUN [RUN_B] -o FILE — an HTML page, or one figure as SVG/PNG."""

from __future__ import annotations

from workspace.cli.common import emit_json, session


def cmd_report(args) -> int:
    import sys

    from workspace.errors import UsageError
    from workspace.services import reports as svc

    to_stdout = args.output == "-"
    if to_stdout and args.json:
        raise UsageError("-o - writes the report to standard output; leave out --json")
    with session(args) as (store, out):
        res = svc.write_report(store, args.runs, args.output, figure=args.figure, format=args.format,
                               stream=sys.stdout.buffer if to_stdout else None, moved_shown=args.moved,
                               nodes=args.nodes, by=args.by, label_by=args.label_by, sweep=args.sweep,
                               chain=args.chain, params=args.params, network=args.network)
        if args.json:
            emit_json(res)
        else:
            what = f"figure '{res['figure']}'" if res.get("figure") else f"{res['kind']} report"
            say = out.note if to_stdout else out.line
            of = (f"sweep {res['sweep']}" if res["kind"] == "sweep" else
                  f"run{'s' if len(res['runs']) > 1 else ''} "
                  + (' -> ' if res["kind"] == "chain" else ' and ').join(map(str, res['runs'])))
            say(f"wrote {what} of {of} to {'standard output' if to_stdout else res['path']} "
                f"({res['format']}, {res['bytes']} bytes; figures: {', '.join(res['figures'])})")
    return 0


def cmd_composition(args) -> int:
    from workspace.cli.output import fmt
    from workspace.services import reports as svc

    with session(args) as (store, out):
        res = svc.composition(store, args.run, args.nodes, args.by, nodes_format=args.nodes_format,
                              nmi_normalization=args.nmi)
        if args.json:
            emit_json(res)
            return 0
        out.line(f"run {res['run']} on {res['ref']} by {res['attribute']} ({res['type']}): "
                 f"{res['nodes']} nodes, {len(res['categories'])} values"
                 + (f", {res['left_out']} left out (no community or no value)" if res["left_out"] else ""))
        out.line(f"  agreement: ARI {fmt(res['ari'])}   NMI ({res['nmi_normalization']}) {fmt(res['nmi'])}   "
                 f"purity {fmt(res['purity'])}")
        cats = res["categories"]
        shown = cats[:8]
        cols = ["community", "size", "dominant", "share"] + [str(c) for c in shown]
        rows = [[c["community"], c["size"], c["dominant"], c["dominant_share"]] + c["counts"][:len(shown)]
                for c in res["communities"]]
        out.table(cols, rows, right=[x for x in cols if x not in ("dominant",)])
        if len(cats) > len(shown):
            out.line(f"  and {len(cats) - len(shown)} more values (all in --json)")
    return 0
