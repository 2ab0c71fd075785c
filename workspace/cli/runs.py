"""Commands: run, rerun, attach, runs, show RUN, export, where."""

from __future__ import annotations


from workspace.cli.common import emit_json, progress_bar, read_session, session
from workspace.cli.output import fmt, fmt_spectrum

SCALAR_MEASURES = ("modularity", "normalized_cut", "conductance", "ratio_cut", "cut", "coverage")
MEASURE_WORDS = {"conductance": "conductance (worst)"}


def _print_run(out, r: dict) -> None:
    what = r["method"] if r["kind"] == "computed" else f"attached '{r['label']}'"
    out.line(f"run {r['run']}  {r['status']}  {what} on {r['ref']}  k={fmt(r['k'])}"
             + (f"  seed={r['seed']}" if r.get("seed") is not None else "")
             + (f"  repeats={r['repeats']}" if (r.get("repeats") or 1) > 1 else ""))
    if r.get("error"):
        out.line(f"  error: {r['error']}")
    q = r.get("quality") or {}
    shown = [(name, q[name]) for name in SCALAR_MEASURES if isinstance(q.get(name), (int, float))]
    if shown:
        # the run's conductance is its worst community's (the per-community table has each one)
        out.line("  " + "   ".join(f"{MEASURE_WORDS.get(n, n.replace('_', ' '))} {fmt(v)}" for n, v in shown))
    eig = r.get("eigenvalues") or []
    if eig:
        out.line("  eigenvalues " + fmt_spectrum(eig))
    diag = r.get("diagnostics") or {}
    if isinstance(diag.get("eigengap_suggestion"), int) and diag["eigengap_suggestion"] >= 2:
        out.line(f"  eigengap suggests k={diag['eigengap_suggestion']}")
    for w in r.get("warnings") or []:
        out.line(f"  warning: {w}")
    if r.get("membership_hash"):
        out.line(f"  membership {r['membership_hash'][:16]}")


def cmd_run(args) -> int:
    from workspace.services import params as psvc
    from workspace.services import runs as svc

    with session(args, writes=True) as (store, out), progress_bar() as bar:
        spec = svc.prepare_run(store, args.ref, params_ref=args.params, method=args.method,
                               sets=psvc.parse_sets(args.set), k=args.k, seed=args.seed, repeats=args.repeats,
                               perturb=args.perturb, warm=getattr(args, "warm", "off"))
        try:
            res = svc.launch(store, spec, progress=bar)
        except svc.RunFailed as exc:
            bar.close()
            if args.json:
                emit_json(svc.show_run(store, exc.run_id))
            raise
        bar.close()
        if args.json:
            emit_json(res)
        else:
            _print_run(out, res)
            _print_communities(out, res)
    return 0


def _print_communities(out, r: dict, limit: int = 30) -> None:
    rows = r.get("communities") or []
    if not rows:
        return
    cols = ["community", "size", "volume", "cut", "conductance"]
    if any(c.get("stability") is not None for c in rows):
        cols.append("stability")
    shown = r.get("shown_labels")
    if shown:  # numbered as matched to the previous version's run; the stored number beside it
        out.line(f"  communities numbered by their match in run {shown['aligned_to']} (stored number in 'stored')")
        rows = sorted(rows, key=lambda c: c.get("shown", c["community"]))
        head = ["community", "stored", *cols[1:]]
        out.table(head, [[c.get("shown"), c["community"], *[c.get(k) for k in cols[1:]]] for c in rows[:limit]],
                  right=head)
    else:
        out.table(cols, [[c.get(k) for k in cols] for c in rows[:limit]], right=cols)
    if len(rows) > limit:
        out.line(f"  … {len(rows) - limit} more communities (--json lists all)")


def cmd_rerun(args) -> int:
    from workspace.services import runs as svc

    with session(args, writes=True) as (store, out), progress_bar() as bar:
        res = svc.rerun(store, args.run, progress=bar)
        bar.close()
        if args.json:
            emit_json(res)
        else:
            _print_run(out, res)
            out.line(f"  {'identical to' if res['identical'] else 'DIFFERS from'} run {args.run}")
    return 0 if res["identical"] else 1


def cmd_attach(args) -> int:
    from workspace.services import runs as svc

    with session(args, writes=True) as (store, out):
        res = svc.attach(store, args.file, args.to, label=args.label, format=args.format,
                         delimiter=args.delimiter)
        if args.json:
            emit_json(res)
        else:
            _print_run(out, res)
            if res["missing_nodes"]:
                out.line(f"  {res['missing_nodes']} node(s) of the version are not in the file")
    return 0


def cmd_runs(args) -> int:
    from workspace.services import quickread

    with read_session(args) as (store, out):
        rows = quickread.ledger_runs(store, args.ref, status=args.status, text=args.filter, sort=args.sort,
                                     descending=args.descending, limit=args.limit)
        if not rows and args.ref:  # an empty listing must not hide a mistyped project or network
            quickread.check_scope(store, args.ref)
        if args.json:
            emit_json(rows)
        elif not rows:
            out.line("no runs" + (f" matching {args.filter!r}" if args.filter else ""))
        else:
            measure = args.sort if args.sort in quickread.LEDGER_MEASURES else "modularity"
            extra = ["conductance"] if measure == "modularity" else []
            out.table(["run", "status", "method", "version", "k", "parameter set", measure.replace("_", " "),
                       *extra, "started", "by"],
                      [(r["run"], r["status"], r["method"] if r["kind"] == "computed" else f"attached:{r['label']}",
                        r["ref"], r["k"], _set_name(r["param_set"]), r["quality"].get(measure),
                        *[r["quality"].get(m) for m in extra], (r["created"] or "").replace("T", " ")[:16],
                        r.get("by") or "-")
                       for r in rows],
                      right=["run", "k", measure.replace("_", " "), *extra])
    return 0


def _set_name(ref: str | None) -> str | None:
    """``P/NAME@V`` shown as ``NAME@V`` (the project is in the version column)."""
    return ref.split("/", 1)[-1] if ref else None


def show_run(args) -> int:
    from workspace.errors import UsageError
    from workspace.services import quickread

    try:
        run_id = int(args.target)
    except ValueError:
        raise UsageError(f"not a run id or a network reference: {args.target!r}") from None
    with read_session(args) as (store, out):
        res = quickread.show_run(store, run_id)
        if args.json:
            emit_json(res)
            return 0
        _print_run(out, res)
        out.fields([("parameters", " ".join(f"{k}={v}" for k, v in res["params"].items()) or "-"),
                    ("parameter set", res["param_set"]), ("rerun of", res["rerun_of"]),
                    ("started", res["created"]), ("finished", res["finished"]),
                    ("by", f"{res.get('by') or '-'} on host {res.get('host') or '-'}"),
                    ("solver", _solver_text(res["diagnostics"] or {})),
                    *([("warm start", _warm_text(res))] if _warm_text(res) else []),
                    ("provenance", " ".join(f"{k}={v}" for k, v in res["provenance"].items()))])
        from workspace.cli.notes import print_annotations

        print_annotations(out, res)
        _print_communities(out, res)
        if getattr(args, "label_by", None):
            from workspace.services.members import run_members
            from workspace.services.nodes import labels_of

            full = store.full() if isinstance(store, quickread.QuickStore) else store
            members = run_members(full, run_id, limit=3)
            named = labels_of(full, [run_id], args.label_by, [n for c in members["communities"] for n in c["nodes"]])
            out.table(["community", "size", f"first members by {args.label_by}"],
                      [[c["community"], c["size"], ", ".join(named[n] for n in c["nodes"])
                        + (", …" if c["size"] > len(c["nodes"]) else "")] for c in members["communities"][:30]],
                      right=["community", "size"])
    return 0


def _solver_text(diagnostics: dict) -> str | None:
    """``arpack-eigsh (2 BLAS threads)``: the thread count a large solve fixed, on which the last bits
    of its eigenpairs depend (not shown when the process's own setting was used)."""
    solver, threads = diagnostics.get("solver"), diagnostics.get("blas_threads")
    if solver and threads:
        return f"{solver} ({threads} BLAS thread{'s' if threads != 1 else ''})"
    return solver


def _warm_text(r: dict) -> str | None:
    """Where the eigensolver's start came from and whether it was used (None for a cold run)."""
    source = (r.get("provenance") or {}).get("warm_from")
    if not source:
        return None
    w = (r.get("diagnostics") or {}).get("warm_start") or {}
    text = source + (f" ({w['from_version']})" if w.get("from_version") else "")
    if w.get("used"):
        text += f", used, {w.get('matvecs')} matvecs"
    elif w.get("fallback"):
        text += f", not used: {w['fallback']}"
    return text


def cmd_export(args) -> int:
    import sys

    from workspace.errors import UsageError
    from workspace.services import runs as svc

    to_stdout = args.output == "-"
    if to_stdout and args.json:
        raise UsageError("-o - writes the file to standard output; leave out --json")
    with session(args) as (store, out):
        res = svc.export_run(store, args.run, args.output, format=args.format,
                             stream=sys.stdout if to_stdout else None, align_to=getattr(args, "align_to", None))
        if args.json:
            emit_json(res)
        else:
            edges = f", {res['edges']} edges" if res.get("edges") is not None else ""
            say = out.note if to_stdout else out.line  # standard output holds the file itself
            say(f"wrote {res['nodes']} nodes{edges} of run {res['run']} to "
                f"{'standard output' if to_stdout else res['path']} ({res['format']})")
    return 0


def cmd_where(args) -> int:
    from workspace.services import runs as svc

    with session(args) as (store, out):
        res = svc.where_node(store, args.node, args.network)
        label_by = getattr(args, "label_by", None)
        if label_by:
            from workspace.errors import NotFoundError
            from workspace.services.nodes import labels_of

            first_run: dict[tuple, int] = {}
            for r in res["runs"]:
                first_run.setdefault((r["network"], r["version"]), r["run"])
            label_at: dict[tuple, str | None] = {}
            for key, run_id in first_run.items():
                try:
                    label_at[key] = labels_of(store, [run_id], label_by, [res["node"]])[res["node"]]
                except NotFoundError:  # this version has no such attribute
                    label_at[key] = None
            if first_run and not any(v is not None for v in label_at.values()):
                raise NotFoundError(f"--label-by: no version holding node {res['node']!r} has a node attribute "
                                    f"{label_by!r}")
            res["label_by"] = label_by
            for r in res["runs"]:
                r["node_label"] = label_at.get((r["network"], r["version"])) if r["present"] else None
        if args.json:
            emit_json(res)
            return 0
        if res.get("found_by"):
            fb = res["found_by"]
            out.line(f"no node has the id {fb['typed']!r}; node {res['node']} has {fb['attribute']} {fb['value']!r}")
        for held in res["networks_with_node"]:
            out.line(f"node {res['node']} in {held['network']}: present in versions "
                     + ", ".join(map(str, held["versions"])))
        several = len(res["networks_with_node"]) > 1 or res["network"] is None
        named = ([label_by] if label_by else [])
        cols = (["run"] + (["network"] if several else []) + ["version"] + named
                + ["method", "community", "size", "stability"])
        out.table(cols,
                  [[r["run"]] + ([r["network"]] if several else []) + [r["version"]]
                   + ([r["node_label"] or "-"] if label_by else [])
                   + [r["method"] if r["kind"] == "computed" else f"attached:{r['label']}",
                      r.get("shown_community", r["community"]) if r["present"] else "(absent)", r["community_size"],
                      r["stability"]]
                   for r in res["runs"]], right=["run", "version", "community", "size", "stability"])
    return 0
