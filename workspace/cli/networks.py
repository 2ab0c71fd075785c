"""Commands: import, projects, networks, versions, show, changes."""

from __future__ import annotations

import contextlib
import gc
import os
import sys

from workspace.cli.common import emit_json, progress_bar, session


def _policy(args):
    from workspace.domain import ImportPolicy

    weight = args.weight
    if weight is not None and weight.isdigit():
        weight = int(weight)
    delimiter = {"tab": "\t", "\\t": "\t", "comma": ",", "space": "whitespace"}.get(args.delimiter, args.delimiter)
    return ImportPolicy(duplicates=args.duplicates, self_loops=args.self_loops, directed=args.directed,
                        weight=weight, numeric_ids=args.numeric_ids, comment=args.comment,
                        delimiter=delimiter, header=args.header)


def print_report(out, report: dict) -> None:
    ws = report.get("weight_summary") or {}
    sizes = report.get("component_sizes") or []
    shown = ", ".join(str(s) for s in sizes[:8]) + (" …" if len(sizes) > 8 or report["components"] > len(sizes) else "")
    out.fields([
        ("source", f"{report['source']} ({report['format']}, {report['records_read']} records)"),
        ("nodes", report["nodes"]),
        ("edges", report["edges"]),
        ("components", f"{report['components']} (sizes {shown})"),
        ("isolated nodes", report["isolated_nodes"]),
        ("self-loops", f"{report['self_loops_found']} found, {report['self_loops_kept']} kept"),
        ("duplicates merged", report["duplicates_merged"]),
        ("asymmetric pairs", report["asymmetric_pairs"]),
        ("zero weights dropped", report["zero_weight_dropped"]),
        ("weights", "none (all 1)" if not report["weighted"] else
         f"min {ws.get('min'):.4g}  median {ws.get('median'):.4g}  mean {ws.get('mean'):.4g}  "
         f"max {ws.get('max'):.4g}  total {ws.get('total'):.6g}"),
    ])
    for n in report.get("notes") or []:
        if n.startswith("warning: "):
            out.line(f"  WARNING: {n[len('warning: '):]}")
        else:
            out.line(f"  note: {n}")


#: glibc ``mallopt`` parameters (malloc.h)
_M_TRIM_THRESHOLD, _M_MMAP_MAX, _M_ARENA_MAX = -1, -4, -8


def keep_freed_memory() -> bool:
    """Let this (short-lived) process reuse the memory it frees instead of handing it back.

    An import allocates and frees many arrays of tens of MiB. glibc serves each from a fresh
    ``mmap`` and unmaps it on ``free``, so the kernel zeroes every page of every such array
    again on first touch: on a 2M-edge file about a quarter of the CPU time went to the kernel's
    page clearing. With ``M_MMAP_MAX = 0`` large blocks come from the heap (glibc still maps
    memory when the heap cannot grow) and with a high ``M_TRIM_THRESHOLD`` freed blocks stay in
    it for the next array; the peak resident size stays that of the largest live set. With
    ``M_ARENA_MAX = 1`` the threads (Arrow's parser, the encoding and compression threads) share
    that one heap instead of each keeping its own free blocks: the labelled 2M-edge import peaked
    at 380-400 MiB instead of 460-490 MiB, a 3M-node one at 1.68 GB instead of 1.75-1.77 GB, with
    less system time (2.9-3.2 s against 3.6-5.6 s at 3M). Only for commands that end after their
    work (the CLI import), never for the long-lived UI. False when the C library is not glibc
    (nothing is changed then).
    """
    import platform

    if not sys.platform.startswith("linux") or platform.libc_ver()[0] != "glibc":
        return False
    try:
        import ctypes

        libc = ctypes.CDLL("libc.so.6")
        return (bool(libc.mallopt(_M_MMAP_MAX, 0)) and bool(libc.mallopt(_M_TRIM_THRESHOLD, 2 ** 31 - 1))
                and bool(libc.mallopt(_M_ARENA_MAX, 1)))
    except (OSError, AttributeError):
        return False


#: set while numpy loads for the CLI import (a value the user set wins), removed afterwards
LOAD_SETTINGS = {
    # (OpenBLAS's idle wait, which cost an import that does no BLAS work a tenth of a second of CPU
    # per library, is set for the whole process when the package loads: workspace.OPENBLAS_IDLE_WAIT)
    # numpy asks for transparent huge pages on large arrays; with the kernel's usual
    # defrag=madvise each first touch may then compact memory and clears 2 MiB at a time: on a
    # busy machine a third of the import's system time, and most of its spread
    "NUMPY_MADVISE_HUGEPAGE": "0",
    # the same for Arrow's mimalloc pool (large files, the parsed id columns): it asks for huge
    # pages on its arenas. Where the kernel has to find or clear 2 MiB pages at first touch (a
    # virtual machine whose free memory went back to the host, or fragmented memory) that cost
    # 1.5-2.7 s per GB of system time against 0.4 s for small pages: alternated CLI imports of 1M
    # nodes with 40-character ids, median system time 1.9 -> 1.1 s, wall 4.2 -> 3.6 s.
    # mimalloc reads it once, when pyarrow loads.
    "MIMALLOC_ALLOW_THP": "0",
}


@contextlib.contextmanager
def native_library_settings():
    """Load numpy (and so OpenBLAS) inside this block with :data:`LOAD_SETTINGS` in the
    environment. Both libraries read them when they load; they are removed again afterwards
    (child processes keep the defaults), and values the user set are left alone. Does nothing
    once numpy is loaded."""
    import os

    if "numpy" in sys.modules:
        yield
        return
    added = [name for name in LOAD_SETTINGS if name not in os.environ]
    os.environ.update({name: LOAD_SETTINGS[name] for name in added})
    try:
        yield
    finally:
        for name in added:
            os.environ.pop(name, None)


def use_system_allocator_for_arrow() -> None:
    """Arrow's buffers from the C library's ``malloc`` (see :func:`keep_freed_memory`): the
    pages its CSV reader and kernels free are then reused by numpy, instead of being purged by
    Arrow's own allocator and zeroed again by the kernel."""
    import pyarrow as pa

    try:
        pa.set_memory_pool(pa.system_memory_pool())
    except (NotImplementedError, pa.ArrowException):
        pass


#: files from this size on keep Arrow's own allocator: there the system pool's reuse of freed
#: pages saves no measurable CPU, while its fragmentation after the CSV parse raised the peak
#: (1M nodes with 40-character ids: 1.63 -> 1.27 GB; 3M short ids: 1.67 -> 1.57 GB; CPU equal
#: within the noise at load 3); small files keep the system pool, which saved CPU there
SYSTEM_POOL_BELOW_BYTES = 128 << 20


def _file_bytes(path) -> int:
    try:
        return os.path.getsize(path)
    except (OSError, TypeError, ValueError):
        return 0


def cmd_import(args) -> int:
    from workspace.cli.common import resume_collector, warm_imports
    from workspace.services.networks import (IMPORT_LATER_MODULES, check_names, import_network,
                                             load_readers, prepare_import)

    check_names(args.project, args.network)
    keep_freed_memory()
    # the cyclic garbage collector would only re-walk the objects of the modules loaded here (the
    # import's own data are a few large arrays): paused until the version is stored
    collecting = gc.isenabled()
    gc.disable()
    try:
        with native_library_settings():
            load_readers()  # the readers first (numpy, pyarrow): needed at once; imports contend for the GIL
        if _file_bytes(args.file) < SYSTEM_POOL_BELOW_BYTES:
            use_system_allocator_for_arrow()
        # the store layer then loads on the other core while the file is parsed and encoded (Arrow's
        # reader and hash kernels and numpy's sorts run without the interpreter lock)
        warming = warm_imports(*IMPORT_LATER_MODULES)
        with progress_bar() as bar:
            # the file is read before the store opens: a bad file leaves no trace in any store
            try:
                from workspace.services.nodes import parse_coords

                prepared = prepare_import(args.file, format=args.format, policy=_policy(args),
                                          progress=bar, nodes=args.nodes, nodes_format=args.nodes_format,
                                          coords=parse_coords(args.coords))
            finally:
                warming.join()  # never import the store layer on two threads at once
            with session(args, writes=True) as (store, out):
                res = import_network(store, args.file, project=args.project, network=args.network,
                                     message=args.message, progress=bar, prepared=prepared)
                if collecting:
                    resume_collector()
                    collecting = False
                bar.close()
                if not args.json:
                    _print_import(args, out, res)
                return _after_import(args, store, out, bar, res)
    finally:
        if collecting:
            gc.enable()


def _after_import(args, store, out, bar, res) -> int:
    """Run the network's tracked parameter sets on the new version and print the change report
    (``--no-track`` opts out). With --json the import's document gains ``update``: the change report,
    or null when nothing ran. A failed tracked run keeps the import: exit 1, the report says which."""
    from workspace.services.tracking import change_report, update_after_import

    update = update_after_import(store, res, track=getattr(args, "track", True), progress=bar,
                                 say=None if args.json else (lambda line: (bar.close(), out.line(line))))
    bar.close()
    report = None if update is None else change_report(store, update["update"], moved_rows=bool(args.json))
    if args.json:
        from workspace.cli.tracking import report_json_doc

        doc = res.to_dict()
        doc["update"] = None if report is None else report_json_doc(report)
        emit_json(doc)
        for n in res.report.get("notes") or []:
            if n.startswith("warning: "):
                out.note(f"cutbook: {n}")
    elif report is not None:
        from workspace.cli.tracking import print_report

        print_report(out, report)
    return 1 if report is not None and report["status"] == "failed" else 0


def _print_import(args, out, res) -> int:
    if args.json:
        emit_json(res.to_dict())
        for n in res.report.get("notes") or []:
            if n.startswith("warning: "):
                out.note(f"cutbook: {n}")
        return 0
    if res.new_version:
        out.line(f"imported {res.ref}: {res.nodes} nodes, {res.edges} edges  [{res.content_hash[:12]}]")
    else:
        out.line(f"unchanged: {res.report['source']} has the same content as {res.ref} (matched "
                 f"version {res.version}); no new version made  [{res.content_hash[:12]}]")
    print_report(out, res.report)
    if res.node_table is not None:
        from workspace.cli.nodes import print_table_summary

        print_table_summary(out, res.node_table)
    return 0


def cmd_projects(args) -> int:
    from workspace.cli.common import read_session
    from workspace.services.quickread import list_projects

    with read_session(args) as (store, out):
        rows = list_projects(store)
        if args.json:
            emit_json(rows)
        elif not rows:
            out.line("no projects yet — start with: cutbook import FILE --project P --network N")
        else:
            out.table(["project", "networks", "created"], [(r["project"], r["networks"], r["created"]) for r in rows],
                      right=["networks"])
    return 0


def cmd_networks(args) -> int:
    from workspace.services.networks import list_networks

    with session(args) as (store, out):
        rows = list_networks(store, args.project)
        if args.json:
            emit_json(rows)
        elif not rows:
            out.line("no networks")
        else:
            out.table(["network", "latest", "created"],
                      [(f"{r['project']}/{r['network']}", r["latest_version"], r["created"]) for r in rows],
                      right=["latest"])
    return 0


def cmd_versions(args) -> int:
    from workspace.services.networks import list_versions

    with session(args) as (store, out):
        rows = list_versions(store, args.network)
        if args.json:
            emit_json(rows)
        else:
            tags = any(r.get("tags") for r in rows)  # a tags column only once something is tagged
            out.table(["version", "nodes", "edges", "hash", "created", "by", "source", "message"] + ["tags"] * tags,
                      [(r["version"], r["nodes"], r["edges"], r["content_hash"][:12], r["created"], r["by"] or "-",
                        r["source"],
                        r["message"]) + ((" ".join(r["tags"]),) if tags else ()) for r in rows],
                      right=["version", "nodes", "edges"])
    return 0


def print_changes(out, ch: dict, limit: int | None) -> None:
    out.fields([("nodes added", ch["nodes_added"]), ("nodes removed", ch["nodes_removed"]),
                ("edges added", ch["edges_added"]), ("edges removed", ch["edges_removed"]),
                ("weights changed", ch["weights_changed"])])
    listings = ch.get("listings") or {}
    cut = slice(None, limit)
    for item in (listings.get("nodes_added") or [])[cut]:
        out.line(f"  + node {item}")
    for item in (listings.get("nodes_removed") or [])[cut]:
        out.line(f"  - node {item}")
    for u, v in (listings.get("edges_added") or [])[cut]:
        out.line(f"  + edge {u} — {v}")
    for u, v in (listings.get("edges_removed") or [])[cut]:
        out.line(f"  - edge {u} — {v}")
    for u, v, old, new in (listings.get("weights_changed") or [])[cut]:
        out.line(f"  ~ edge {u} — {v}: weight {old:g} -> {new:g}")
    if ch.get("truncated") or (limit and any(len(x) > limit for x in listings.values())):
        out.line(f"  (listings cut; --limit N or --json for more)")


def cmd_show(args) -> int:
    target = args.target
    if "/" not in target:
        from workspace.cli.runs import show_run

        return show_run(args)
    from workspace.services.networks import show_version

    with session(args) as (store, out):
        kwargs = {"changes_up_to_edges": None} if args.changes else {}
        info = show_version(store, target, change_limit=args.limit, **kwargs)
        if args.json:
            emit_json(info)
            return 0
        out.line(f"{info['ref']}   {info['nodes']} nodes, {info['edges']} edges   hash {info['content_hash']}")
        out.fields([("created", info["created"]), ("by", info.get("by") or "-"), ("message", info["message"] or "-"),
                    ("parent", info["parent"] or "- (first version)")])
        from workspace.cli.notes import print_annotations

        print_annotations(out, info)
        out.line("")
        out.line("import report")
        print_report(out, info["report"])
        out.line("")
        out.line("policies  " + "  ".join(f"{k}={v}" for k, v in info["policy"].items()))
        if info.get("node_table") is not None:
            from workspace.cli.nodes import print_table_summary

            out.line("")
            print_table_summary(out, info["node_table"])
        if info["changes_from_parent"] is not None:
            out.line("")
            out.line(f"changes from {info['parent']}")
            print_changes(out, info["changes_from_parent"], args.limit)
        elif info.get("changes_not_computed"):
            out.line("")
            out.line(f"changes from {info['parent']}: {info['changes_not_computed']} (or show --changes)")
    return 0


def cmd_changes(args) -> int:
    from workspace.services.networks import version_changes

    with session(args) as (store, out):
        ch = version_changes(store, args.a, args.b, limit=args.limit)
        if args.json:
            emit_json(ch)
        else:
            out.line(f"changes {ch['a']} -> {ch['b']}")
            print_changes(out, ch, args.limit if args.limit is not None else 20)
    return 0
