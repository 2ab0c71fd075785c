"""Commands: sweep, sweeps list/show/extend/diff/delete, embeddings."""

from __future__ import annotations

import sys
import time

from workspace.cli.common import emit_json, session
from workspace.cli.output import fmt


class TaskProgress:
    """Sweep progress on stderr: a live line on a terminal, one line per finished task otherwise."""

    def __init__(self) -> None:
        self.tty = sys.stderr.isatty()
        self._last = 0.0
        self._width = 0

    def __call__(self, ev: dict) -> None:
        text = f"sweep: {ev['done']}/{ev['total']} tasks  {ev['elapsed_s']:.1f}s  {ev['task']}"
        if ev.get("failed"):
            text += f"  ({ev['failed']} failed)"
        if ev["stage"] not in ("stored", "start", "embedding", "connecting"):
            text += f"  ({ev['stage']})"
        if self.tty:
            now = time.monotonic()
            if ev["stage"] == "stored" or now - self._last >= 0.2:
                self._last = now
                pad = max(0, self._width - len(text))
                sys.stderr.write("\r" + text + " " * pad)
                sys.stderr.flush()
                self._width = len(text)
        elif ev["stage"] in ("stored", "embedding", "connecting"):
            sys.stderr.write(text + ("" if ev["stage"] == "stored" else " ...") + "\n")
            sys.stderr.flush()

    def close(self) -> None:
        if self.tty and self._width:
            sys.stderr.write("\r" + " " * self._width + "\r")
            sys.stderr.flush()


def _run_and_render(args, store, out, call) -> int:
    from workspace.errors import Cancelled

    bar = TaskProgress()
    try:
        res = call(bar)
    except Cancelled:
        bar.close()
        raise
    bar.close()
    if args.json:
        emit_json(res)
    else:
        _print_sweep(out, res)
    return 0 if res["status"] == "done" else 1


def _executor(args):
    """The executor asked for (checked before anything is recorded)."""
    from workspace.jobs.executors import executor_from_options

    return executor_from_options(args.executor, workers=args.workers, scheduler=args.scheduler)


def cmd_sweep(args) -> int:
    from workspace.services import params as psvc
    from workspace.services import sweeps as svc

    with session(args) as (store, out):
        spec = svc.prepare_sweep(store, args.ref, params_ref=args.params, method=args.method,
                                 sets=psvc.parse_sets(args.set), ks=args.k, vary=args.vary, seeds=args.seeds,
                                 seed=args.seed, perturb=args.perturb)
        executor = _executor(args)
        return _run_and_render(args, store, out, lambda bar: svc.sweep(store, spec, progress=bar,
                                                                      workers=args.workers, executor=executor))


def cmd_sweeps(args) -> int:
    from workspace.services import sweeps as svc

    action = args.sweeps_action or "list"
    with session(args) as (store, out):
        if action == "list":
            rows = svc.list_sweeps(store, args.ref)
            if args.json:
                emit_json(rows)
            elif not rows:
                out.line("no sweeps")
            else:
                out.table(["sweep", "status", "method", "version", "k", "vary", "seeds", "runs", "created", "by"],
                          [(r["sweep"], r["status"], r["method"], r["ref"], _ks_text(r["ks"]), _vary_text(r["vary"]),
                            r["seeds"], f"{r['tasks']['done']}/{r['tasks']['total']}", r["created"], r["by"] or "-")
                           for r in rows],
                          right=["sweep", "seeds"])
            return 0
        if action == "show":
            if args.split:
                from workspace.errors import UsageError

                try:
                    a, b = (int(x) for x in args.split.split(":"))
                except ValueError:
                    raise UsageError(f"--split takes K1:K2, for example 2:6 (got {args.split!r})") from None
                res = svc.sweep_splits(store, args.sweep, a, b)
                if args.json:
                    emit_json(res)
                else:
                    _print_split(out, res)
                return 0
            res = svc.show_sweep(store, args.sweep)
            if args.json:
                emit_json(res)
            else:
                _print_sweep(out, res)
            return 0
        if action == "extend":
            executor = _executor(args)
            return _run_and_render(args, store, out, lambda bar: svc.extend_sweep(
                store, args.sweep, ks=args.k, seeds=args.seeds, progress=bar, workers=args.workers,
                executor=executor))
        if action == "diff":
            res = svc.diff_sweeps(store, args.a, args.b)
            if args.json:
                emit_json(res)
                return 0
            for side in ("a", "b"):
                s = res[side]
                out.line(f"{side}: sweep {s['sweep']}  {s['method']} on {s['ref']}  k {_ks_text(s['ks'])}  "
                         f"seeds {s['seeds']}  recommended k={fmt(s['recommended_k'])}")
            out.table(["k", "value", "modularity a", "modularity b", "stability a", "stability b", "ARI a~b"],
                      [(r["k"], r["value"], r["modularity"]["a"], r["modularity"]["b"], r["ari_mean"]["a"],
                        r["ari_mean"]["b"], r["membership_ari"]) for r in res["points"]],
                      right=["k", "modularity a", "modularity b", "stability a", "stability b", "ARI a~b"])
            for side in ("a", "b"):
                only = res[f"only_in_{side}"]
                if only:
                    out.line(f"only in {side}: " + ", ".join(f"k={fmt(o['k'])}" + (f" {o['value']}" if o["value"]
                                                                                    is not None else "") for o in only))
            return 0
        if action == "delete":
            res = svc.delete_sweep(store, args.sweep)
            if args.json:
                emit_json(res)
            else:
                out.line(f"deleted sweep {res['sweep']}; its {res['runs_kept']} run(s) are kept")
            return 0
    return 2  # pragma: no cover - argparse requires an action


def cmd_embeddings(args) -> int:
    from workspace.services import sweeps as svc

    with session(args) as (store, out):
        if args.prune:
            res = svc.prune_embeddings(store, ref=args.ref)
            if args.json:
                emit_json(res)
            else:
                out.line(f"removed {res['removed']} cached embedding(s); {res['arrays_removed']} stored array(s) "
                         "freed")
            return 0
        res = svc.embedding_cache(store)
        if args.ref:
            from workspace.domain import VersionRef

            vref = VersionRef.parse(args.ref)
            keep = [e for e in res["embeddings"] if e["ref"].split("@")[0] == f"{vref.project}/{vref.network}"
                    and (vref.version is None or e["ref"].endswith(f"@{vref.version}"))]
            res = {"embeddings": keep, "count": len(keep), "stored_bytes": sum(e["stored_bytes"] for e in keep)}
        if args.json:
            emit_json(res)
        elif not res["embeddings"]:
            out.line("no cached embeddings")
        else:
            out.table(["key", "version", "operator", "rows", "vectors", "seed", "solver", "stored MB"],
                      [(e["key"][:12], e["ref"], e["operator"] + "".join(f" {k}={v}" for k, v in
                                                                          e["operator_params"].items()),
                        e["n_rows"], e["n_vectors"], e["seed"], e["solver"], e["stored_bytes"] / 1e6)
                       for e in res["embeddings"]], right=["rows", "vectors", "seed", "stored MB"])
            out.line(f"{res['count']} embedding(s), {res['stored_bytes'] / 1e6:.2f} MB")
    return 0


def _ks_text(ks) -> str:
    if not ks or ks == [None]:
        return "(method)"
    if len(ks) > 2 and ks == list(range(ks[0], ks[-1] + 1)):
        return f"{ks[0]}..{ks[-1]}"
    return ",".join(map(str, ks))


def _vary_text(vary) -> str:
    if not vary:
        return "-"
    return f"{vary['name']}=" + ",".join(fmt(v) for v in vary["values"])


def _print_sweep(out, r: dict) -> None:
    out.line(f"sweep {r['sweep']}  {r['status']}  {r['method']} on {r['ref']}  k {_ks_text(r['ks'])}"
             + (f"  {_vary_text(r['vary'])}" if r["vary"] else "")
             + f"  seeds {r['seeds']}" + (f" (perturb {fmt(r['perturb'])})" if r["perturb"] else "")
             + f"  runs {r['tasks']['done']}/{r['tasks']['total']}"
             + (f"  by {r['by']}" if r.get("by") else ""))
    if r.get("error"):
        out.line(f"  {r['error']}")
    recs = {json_key(x["value"]): x for x in r["recommendations"]}
    cols = ["k"] + (["value"] if r["vary"] else []) + ["run", "modularity", "ncut", "conductance", "coverage",
                                                       "eigengap", "ARI mean", "ARI sd", "VI mean", "VI sd", ""]
    rows = []
    for p in r["points"]:
        rec = recs.get(json_key(p["value"]))
        mark = "recommended" if rec is not None and rec["recommended"] == p["k"] else \
            ("stable" if p["stable"] else "")
        rows.append([p["k"] if p["k"] is not None else p.get("k_found")] + ([p["value"]] if r["vary"] else [])
                    + [p["run"], p["modularity"], p["normalized_cut"], p["conductance"], p["coverage"], p["eigengap"],
                       p["ari_mean"], p["ari_sd"], p["vi_mean"], p["vi_sd"], mark])
    out.table(cols, rows, right=cols[:-1])
    for rec in r["recommendations"]:
        label = f" ({r['vary']['name']}={fmt(rec['value'])})" if r["vary"] else ""
        if rec["recommended"] is None:
            out.line(f"no k recommended{label}")
        else:
            out.line(f"recommended k={rec['recommended']}{label}")
        for note in rec["notes"]:
            out.line(f"  note: {note}")
        for cand in rec["candidates"][:3]:
            out.line(f"  {cand['rank']}. k={cand['k']}")
            for reason in cand["reasons"]:
                out.line(f"       - {reason}")
    for split in r.get("splits") or []:
        _print_split(out, split)


def _print_split(out, s: dict) -> None:
    out.line(f"k={s['from_k']} -> k={s['to_k']}" + (f" ({s['value']})" if s.get("value") is not None else ""))
    for row in s["communities"]:
        kids = ", ".join(f"{c['community']} ({c['size']} nodes, {c['purity']:.0%} from it)" for c in row["children"])
        if row["kind"] == "split":
            out.line(f"  {row['community']} ({row['size']} nodes) splits into {kids}")
        elif row["kind"] == "kept":
            out.line(f"  {row['community']} ({row['size']} nodes) stays as {kids}")
        elif row["kind"] == "reshaped":
            out.line(f"  {row['community']} ({row['size']} nodes) becomes {kids}")
        else:
            out.line(f"  {row['community']} ({row['size']} nodes) is spread over other communities")


def json_key(value) -> str:
    import json

    return json.dumps(value)
