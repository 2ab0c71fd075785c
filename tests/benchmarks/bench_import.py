"""Benchmark: import of a 2M-edge weighted CSV against networkx.parse_edgelist, two file shapes.

Run: ``python tests/benchmarks/bench_import.py [--edges 2000000] [--shape plain|labelled|both]``

Two deterministic edge lists are written to a temporary folder:

* ``plain``: no header, string ids ``n<k>`` over ``--nodes`` (250k) ids, weights with one
  decimal (``n17,n20934,4.2``);
* ``labelled``: a header ``source,target,weight``, ``--labelled-nodes`` (400k) distinct ids
  such as ``station-3f9a1c07`` (a word and 8 hex digits), weights with six decimals
  (``station-3f9a1c07,depot-0b7e55d1,0.402913``).

Each side runs in its own subprocess so that ``resource.getrusage(RUSAGE_SELF).ru_maxrss`` is that
side's peak resident memory:

* ``cutbook import`` as a user runs it (a fresh interpreter, CLI start-up included) into an
  existing empty store, self-loops kept (networkx keeps them too, so the edge counts agree);
  best of ``--repeat`` runs, each into a new store (minimum and median of wall and CPU time are
  printed too); the first import into a store that does not exist yet (which also creates the
  schema) is printed once as well;
* in-process ``workspace.io.read_network`` (read + canonicalise + report), best of ``--repeat``;
* reference: ``networkx.parse_edgelist`` on the same data lines (``delimiter=","``,
  ``nodetype=str``, ``data=(("weight", float),)``), one run, reading the file line by line.

Printed per shape: wall time, CPU time (user + system, all threads), the machine's load
average, peak RSS, and the speed ratio reference / ``cutbook import`` (target >= 10, goal 20).
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def _rss_mib() -> float:
    # Linux reports ru_maxrss in KiB
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def _cpu_seconds() -> float:
    usage = resource.getrusage(resource.RUSAGE_SELF)
    return usage.ru_utime + usage.ru_stime


def write_edges(path: Path, n_edges: int, n_nodes: int, seed: int = 20240531) -> None:
    """The ``plain`` shape: no header, ids ``n<k>``, weights with one decimal."""
    import numpy as np

    rng = np.random.default_rng(seed)
    u = rng.integers(0, n_nodes, n_edges)
    v = rng.integers(0, n_nodes, n_edges)
    w = rng.integers(1, 100, n_edges) / 10.0
    chunk = 500_000
    with open(path, "w", encoding="utf-8", newline="\n") as out:
        for start in range(0, n_edges, chunk):
            stop = min(start + chunk, n_edges)
            out.write("".join(f"n{a},n{b},{x}\n" for a, b, x in zip(
                u[start:stop].tolist(), v[start:stop].tolist(), w[start:stop].tolist())))


_WORDS = ("station", "depot", "gate", "hub", "sensor", "acct", "user", "line")


def write_labelled(path: Path, n_edges: int, n_nodes: int, seed: int = 20261202) -> None:
    """The ``labelled`` shape: header ``source,target,weight``, ``n_nodes`` distinct ids
    ``<word>-<8 hex digits>``, weights in (0, 1] with six decimals (never 0, so no record is
    dropped on either side)."""
    import numpy as np

    rng = np.random.default_rng(seed)
    tokens = rng.choice(16 ** 8, size=n_nodes, replace=False)
    words = rng.integers(0, len(_WORDS), n_nodes)
    ids = np.array([f"{_WORDS[k]}-{t:08x}" for k, t in zip(words.tolist(), tokens.tolist())])
    u = rng.integers(0, n_nodes, n_edges)
    v = rng.integers(0, n_nodes, n_edges)
    w = rng.integers(1, 10 ** 6 + 1, n_edges)
    chunk = 500_000
    with open(path, "w", encoding="utf-8", newline="\n") as out:
        out.write("source,target,weight\n")
        for start in range(0, n_edges, chunk):
            stop = min(start + chunk, n_edges)
            out.write("".join(f"{a},{b},{x // 10 ** 6}.{x % 10 ** 6:06d}\n" for a, b, x in zip(
                ids[u[start:stop]].tolist(), ids[v[start:stop]].tolist(), w[start:stop].tolist())))


def _header(path: str) -> bool:
    with open(path, encoding="utf-8") as fh:
        return fh.readline().startswith("source,")


def child(side: str, path: str, repeat: int) -> None:
    if side == "cutbook":
        sys.path.insert(0, str(ROOT))
        from workspace.domain import ImportPolicy
        from workspace.io import read_network
        baseline = _rss_mib()
        times = []
        for _ in range(repeat):
            cpu = _cpu_seconds()
            start = time.perf_counter()
            # self-loops kept, as networkx keeps them, so both sides count the same edges
            graph, report = read_network(path, format="csv",
                                         policy=ImportPolicy(weight=2, self_loops="keep"))
            times.append((time.perf_counter() - start, _cpu_seconds() - cpu))
            nodes, edges = graph.n_nodes, graph.n_edges
            del graph, report
        seconds, cpu_seconds = min(times)
    else:
        import networkx as nx
        baseline = _rss_mib()
        cpu = _cpu_seconds()
        start = time.perf_counter()
        with open(path, encoding="utf-8") as lines:
            if _header(path):
                next(lines)  # the column names are not an edge
            G = nx.parse_edgelist(lines, delimiter=",", nodetype=str,
                                  data=(("weight", float),))
        seconds = time.perf_counter() - start
        cpu_seconds = _cpu_seconds() - cpu
        nodes, edges = G.number_of_nodes(), G.number_of_edges()
    print(json.dumps({"side": side, "seconds": seconds, "cpu_seconds": cpu_seconds,
                      "load_average": os.getloadavg()[0], "peak_rss_mib": _rss_mib(),
                      "baseline_rss_mib": baseline, "nodes": nodes, "edges": edges}))


def run_child(side: str, path: Path, repeat: int) -> dict:
    out = subprocess.run([sys.executable, __file__, "--child", side, "--file", str(path),
                          "--repeat", str(repeat)], check=True, capture_output=True, text=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def _cutbook() -> list[str]:
    script = Path(sys.executable).with_name("cutbook")
    return [str(script)] if script.exists() else [sys.executable, "-m", "workspace.cli"]


_WRAPPER = """
import json, resource, subprocess, sys, time
start = time.perf_counter()
done = subprocess.run(sys.argv[1:], capture_output=True, text=True)
wall = time.perf_counter() - start
use = resource.getrusage(resource.RUSAGE_CHILDREN)
print(json.dumps({"code": done.returncode, "wall": wall, "cpu": use.ru_utime + use.ru_stime,
                  "peak_mib": use.ru_maxrss / 1024.0, "out": done.stdout, "err": done.stderr[-500:]}))
"""


def run_cli(path: Path, repeat: int) -> dict:
    """``cutbook import`` as a user runs it: best of ``repeat`` into new, empty stores (created
    beforehand, not timed), plus one first import that also creates its store."""
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    env.pop("CUTBOOK_STORE", None)
    weight = ["--weight", "weight"] if _header(str(path)) else ["--weight", "2"]

    peaks: list[float] = []

    def once(store: Path) -> tuple[float, float, dict]:
        # through a small waiting wrapper, so that the peak memory is this import's own
        # (RUSAGE_CHILDREN of this process would keep the largest child so far, networkx's included)
        argv = _cutbook() + ["--store", str(store), "import", str(path), "--project", "bench", "--network",
                             "edges", "--self-loops", "keep", "--json", *weight]
        out = subprocess.run([sys.executable, "-c", _WRAPPER, *argv], check=True, capture_output=True,
                             text=True, env=env)
        doc = json.loads(out.stdout.strip().splitlines()[-1])
        if doc["code"] != 0:
            raise SystemExit(f"cutbook import failed ({doc['code']}): {doc['err']}")
        peaks.append(doc["peak_mib"])
        return doc["wall"], doc["cpu"], json.loads(doc["out"])

    runs = []
    for i in range(repeat):
        store = path.with_name(f"cli-{i}.sqlite")
        subprocess.run([sys.executable, "-c", "import sys; from workspace.services.store import "
                        "open_workspace; open_workspace(sys.argv[1]).dispose()", str(store)],
                       check=True, env=env)
        runs.append(once(store))
    seconds, cpu, doc = min(runs, key=lambda r: r[0])
    fresh_seconds, _, _ = once(path.with_name("cli-new.sqlite"))
    return {"seconds": seconds, "cpu_seconds": cpu, "fresh_seconds": fresh_seconds,
            "median_seconds": statistics.median(r[0] for r in runs),
            "min_cpu_seconds": min(r[1] for r in runs),
            "median_cpu_seconds": statistics.median(r[1] for r in runs),
            "load_average": os.getloadavg()[0], "nodes": doc["nodes"], "edges": doc["edges"],
            "peak_rss_mib": max(peaks),
            "store_mib": sum(f.stat().st_size for f in path.parent.glob("cli-0.sqlite*")) / 2**20}


def bench_shape(shape: str, path: Path, args) -> float | None:
    start = time.perf_counter()
    if shape == "plain":
        write_edges(path, args.edges, args.nodes)
        what = f"no header, {args.nodes:,} ids n<k>, weights with one decimal"
    else:
        write_labelled(path, args.edges, args.labelled_nodes)
        what = (f"header source,target,weight, {args.labelled_nodes:,} distinct ids "
                "<word>-<8 hex>, weights with six decimals")
    with open(path, encoding="utf-8") as fh:
        sample = fh.readline().strip()
    print(f"\n== shape '{shape}': {args.edges:,} edges, {what}: "
          f"{path.stat().st_size / 2**20:.1f} MiB, written in {time.perf_counter() - start:.1f} s; "
          f"first line {sample!r}; load {os.getloadavg()[0]:.2f}")
    cli = run_cli(path, args.repeat)
    print(f"cutbook import (CLI)    {cli['seconds']:7.3f} s (CPU {cli['cpu_seconds']:.2f} s, "
          f"load {cli['load_average']:.1f})  peak RSS {cli['peak_rss_mib']:7.1f} MiB  "
          f"{cli['nodes']:,} nodes {cli['edges']:,} edges  store {cli['store_mib']:.1f} MiB; "
          f"first import into a new store {cli['fresh_seconds']:.3f} s")
    print(f"  over {args.repeat} runs: wall min {cli['seconds']:.3f} s, median {cli['median_seconds']:.3f} s; "
          f"CPU min {cli['min_cpu_seconds']:.2f} s, median {cli['median_cpu_seconds']:.2f} s")
    ours = run_child("cutbook", path, args.repeat)
    print(f"read_network in-process {ours['seconds']:7.3f} s (CPU {ours['cpu_seconds']:.2f} s, "
          f"load {ours['load_average']:.1f})  peak RSS {ours['peak_rss_mib']:7.1f} MiB "
          f"(+{ours['peak_rss_mib'] - ours['baseline_rss_mib']:.1f} over imports)")
    if args.skip_reference:
        return None
    ref = run_child("networkx", path, 1)
    print(f"networkx parse_edgelist {ref['seconds']:7.3f} s (CPU {ref['cpu_seconds']:.2f} s, "
          f"load {ref['load_average']:.1f})  peak RSS {ref['peak_rss_mib']:7.1f} MiB  "
          f"{ref['nodes']:,} nodes {ref['edges']:,} edges")
    if (ref["nodes"], ref["edges"]) != (cli["nodes"], cli["edges"]):
        print("WARNING: the two sides disagree on node or edge counts")
    ratio = ref["seconds"] / cli["seconds"]
    verdict = "goal met" if ratio >= 20 else "target met" if ratio >= 10 else "BELOW TARGET"
    print(f"shape '{shape}': networkx / cutbook import (CLI, start-up included) = {ratio:.1f}x "
          f"(target >= 10x, goal 20x: {verdict}); CPU-time ratio "
          f"{ref['cpu_seconds'] / cli['cpu_seconds']:.1f}x; networkx / in-process read_network "
          f"{ref['seconds'] / ours['seconds']:.1f}x")
    return ratio


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--edges", type=int, default=2_000_000)
    parser.add_argument("--nodes", type=int, default=250_000, help="ids of the plain shape")
    parser.add_argument("--labelled-nodes", type=int, default=400_000,
                        help="distinct ids of the labelled shape")
    parser.add_argument("--shape", choices=["plain", "labelled", "both"], default="both")
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--skip-reference", action="store_true")
    parser.add_argument("--child", choices=["cutbook", "networkx"])
    parser.add_argument("--file")
    args = parser.parse_args()
    if args.child:
        child(args.child, args.file, args.repeat)
        return
    print(f"{os.cpu_count()} cores, load average {os.getloadavg()[0]:.2f} at start")
    ratios = {}
    for shape in (["plain", "labelled"] if args.shape == "both" else [args.shape]):
        with tempfile.TemporaryDirectory() as folder:
            ratios[shape] = bench_shape(shape, Path(folder) / f"{shape}.csv", args)
    if not args.skip_reference:
        print("\nsummary: " + "; ".join(f"{k} {v:.1f}x" for k, v in ratios.items())
              + f" (target >= 10x each); load average {os.getloadavg()[0]:.2f} at the end")
    print("(other processes on the machine slow both sides; 'load' is the 1-minute load "
          "average when each side finished)")


if __name__ == "__main__":
    main()
