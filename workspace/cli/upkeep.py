"""Commands: verify."""

from __future__ import annotations

from workspace.cli.common import emit_json, session


def cmd_verify(args) -> int:
    from workspace.services.verify import verify_store

    with session(args) as (store, out):
        res = verify_store(store)
        if args.json:
            emit_json(res)
        else:
            out.line(f"{'ok' if res['ok'] else 'PROBLEMS FOUND'}: {res['blobs_checked']} arrays checked")
            for f in res["findings"]:
                who = "; ".join(f.get("belongs_to", []))
                out.line(f"  {f['kind']}: {f.get('detail', '')} {('— ' + who) if who else ''}".rstrip())
    return 0 if res["ok"] else 1
