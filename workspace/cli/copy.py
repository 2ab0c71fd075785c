"""Command: copy (projects, one network or one run's lineage, from --store to another store)."""

from __future__ import annotations

from workspace.cli.common import emit_json, session


def cmd_copy(args) -> int:
    from workspace.services.copy import copy_work
    from workspace.services.store import open_workspace

    scope = dict(projects=args.projects or None, network=args.network, run=args.run)
    with session(args) as (source, out):
        # the destination may be new (an SQLite file or an empty server database): it is made and migrated
        dest = open_workspace(args.to, notify=out.note, create=True, create_dirs=False, require_write=True,
                              user=getattr(args, "user", None))
        try:
            res = copy_work(source, dest, **scope)
        finally:
            dest.dispose()
        if args.json:
            emit_json(res)
            return 0
        added, matched = res["added"], res["matched"]
        kinds = ("projects", "networks", "versions", "node_tables", "param_set_versions", "runs", "sweeps",
                 "tracked_sets", "updates", "embeddings", "annotations")

        def count(n: int, kind: str) -> str:
            words = kind.replace("_", " ")
            if n == 1:
                words = words.replace("versions", "version").replace("sets", "set").rstrip("s")
            return f"{n} {words}"

        got = ", ".join(count(added[k], k) for k in kinds if added.get(k))
        out.line(f"copied to {res['destination']}: {got or 'nothing new (everything was already there)'}")
        if added["arrays"]:
            chunks = f" in {added['chunks']} chunks" if added["chunks"] else ""
            out.line(f"  arrays   {added['arrays']} new{chunks}, {added['bytes']:,} bytes")
        there = ", ".join(count(matched[k], k) for k in kinds if matched.get(k))
        if there:
            out.line(f"  already there: {there}")
        for r in res["renumbered"]:
            what = r.get("network") or r.get("param_set")
            out.line(f"  {what}: version {r['source']} is version {r['destination']} on the destination")
        moved = [(k, v) for k, v in res["run_ids"].items() if int(k) != v]
        if moved:
            out.line("  run ids  " + ", ".join(f"{k} -> {v}" for k, v in moved[:20])
                     + (f" (and {len(moved) - 20} more; --json lists all)" if len(moved) > 20 else ""))
        for key, what in (("skipped_running", "runs"), ("skipped_running_sweeps", "sweeps"),
                          ("skipped_running_updates", "updates")):
            if res.get(key):
                out.line(f"  not copied (still running): {what} {', '.join(map(str, res[key]))}")
        v = res["verified"]
        out.line(f"  verified on arrival: {v['arrays']} arrays" + (f", {v['chunks']} chunks" if v["chunks"] else "")
                 + " match their hashes")
    return 0
