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
                               stream=sys.stdout.buffer if to_stdout else None, moved_shown=args.moved)
        if args.json:
            emit_json(res)
        else:
            what = f"figure '{res['figure']}'" if res.get("figure") else f"{res['kind']} report"
            say = out.note if to_stdout else out.line
            say(f"wrote {what} of run{'s' if len(res['runs']) > 1 else ''} "
                f"{' and '.join(map(str, res['runs']))} to {'standard output' if to_stdout else res['path']} "
                f"({res['format']}, {res['bytes']} bytes; figures: {', '.join(res['figures'])})")
    return 0
