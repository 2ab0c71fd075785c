"""Commands: verify."""

from __future__ import annotations

from workspace.cli.common import confirmed, emit_json, session


def cmd_verify(args) -> int:
    from workspace.services.verify import verify_store

    with session(args) as (store, out):
        res = verify_store(store)
        if args.json:
            emit_json(res)
        else:
            chunks = f" ({res['chunks_checked']} chunks)" if res.get("chunks_checked") else ""
            out.line(f"{'ok' if res['ok'] else 'PROBLEMS FOUND'}: {res['blobs_checked']} arrays checked{chunks}")
            for f in res["findings"]:
                who = "; ".join(f.get("belongs_to", []))
                out.line(f"  {f['kind']}: {f.get('detail', '')} {('— ' + who) if who else ''}".rstrip())
    return 0 if res["ok"] else 1


def cmd_delete(args) -> int:

    from workspace.services.delete import delete_target, describe_target

    with session(args, writes=True, create=False) as (store, out):
        what = describe_target(store, args.target)
        if not args.yes:
            question = (f"delete {what['kind']} {args.target}: {what['networks']} network(s), "
                        f"{what['versions']} version(s), {what['runs']} run(s), "
                        f"{what['parameter_sets']} parameter set(s)?")
            if not confirmed(args.target, question, args.target):
                out.note("cutbook: nothing deleted")
                return 1
        res = delete_target(store, args.target)
        if args.json:
            emit_json(res)
        else:
            out.line(f"deleted {res['kind']} {args.target}: {res['versions']} version(s), {res['runs']} run(s); "
                     f"{res['arrays_removed']} stored array(s) no longer used were removed")
    return 0
