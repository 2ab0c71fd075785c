"""Benchmark: import of a 2M-edge weighted CSV against networkx.parse_edgelist.

Run: ``python tests/benchmarks/bench_import.py [--edges 2000000] [--nodes 250000]``

A deterministic edge list (string ids ``n<k>``, weights with one decimal,
no header) is written to a temporary folder. Each side runs in its own
subprocess so that ``resource.getrusage(RUSAGE_SELF).ru_maxrss`` is that
side's peak resident memory:

* cutbook: ``workspace.io.read_network`` (read + canonicalise + report),
  weight column 2, self-loops kept (networkx keeps them too, so the edge
  counts must agree), best of ``--repeat`` runs;
* reference: ``networkx.parse_edgelist`` on the same lines
  (``delimiter=","``, ``nodetype=str``, ``data=(("weight", float),)``),
  one run, reading the file line by line.

Printed: wall time, CPU time (user + system, all threads), the machine's
load average, peak RSS and RSS growth over the interpreter baseline per
side, and the speed ratio reference / cutbook (target >= 10, goal 20).
"""

from __future__ import annotations

import argparse
import json
import os
import resource
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
    elif side == "service":
        # the whole `cutbook import`: read + canonicalise + content hash + blobs + one transaction,
        # into a fresh store each time (an equal import into the same store would create nothing)
        sys.path.insert(0, str(ROOT))
        from workspace.domain import ImportPolicy
        from workspace.services.networks import import_network
        from workspace.services.store import open_workspace
        baseline = _rss_mib()
        times = []
        for i in range(repeat):
            store = open_workspace(Path(path).with_name(f"bench-{i}.sqlite"))
            cpu = _cpu_seconds()
            start = time.perf_counter()
            res = import_network(store, path, project="bench", network="edges", format="csv",
                                 policy=ImportPolicy(weight=2, self_loops="keep"))
            times.append((time.perf_counter() - start, _cpu_seconds() - cpu))
            nodes, edges = res.nodes, res.edges
            store.dispose()
        seconds, cpu_seconds = min(times)
    else:
        import networkx as nx
        baseline = _rss_mib()
        cpu = _cpu_seconds()
        start = time.perf_counter()
        with open(path, encoding="utf-8") as lines:
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


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--edges", type=int, default=2_000_000)
    parser.add_argument("--nodes", type=int, default=250_000)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--skip-reference", action="store_true")
    parser.add_argument("--child", choices=["cutbook", "service", "networkx"])
    parser.add_argument("--file")
    args = parser.parse_args()
    if args.child:
        child(args.child, args.file, args.repeat)
        return
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "edges.csv"
        start = time.perf_counter()
        write_edges(path, args.edges, args.nodes)
        print(f"wrote {args.edges:,} edges over {args.nodes:,} ids: "
              f"{path.stat().st_size / 2**20:.1f} MiB in {time.perf_counter() - start:.1f} s")
        ours = run_child("cutbook", path, args.repeat)
        print(f"cutbook  read_network   {ours['seconds']:7.3f} s (CPU {ours['cpu_seconds']:.2f} s, "
              f"load {ours['load_average']:.1f})  peak RSS "
              f"{ours['peak_rss_mib']:7.1f} MiB (+{ours['peak_rss_mib'] - ours['baseline_rss_mib']:.1f}"
              f" over imports)  {ours['nodes']:,} nodes {ours['edges']:,} edges")
        full = run_child("service", path, args.repeat)
        print(f"cutbook  import (store) {full['seconds']:7.3f} s (CPU {full['cpu_seconds']:.2f} s, "
              f"load {full['load_average']:.1f})  peak RSS "
              f"{full['peak_rss_mib']:7.1f} MiB (+{full['peak_rss_mib'] - full['baseline_rss_mib']:.1f}"
              f" over imports)  store size {sum(f.stat().st_size for f in path.parent.glob('bench-0.sqlite*')) / 2**20:.1f} MiB")
        if args.skip_reference:
            return
        ref = run_child("networkx", path, 1)
        print(f"networkx parse_edgelist {ref['seconds']:7.3f} s (CPU {ref['cpu_seconds']:.2f} s, "
              f"load {ref['load_average']:.1f})  peak RSS "
              f"{ref['peak_rss_mib']:7.1f} MiB (+{ref['peak_rss_mib'] - ref['baseline_rss_mib']:.1f}"
              f" over imports)  {ref['nodes']:,} nodes {ref['edges']:,} edges")
        if (ref["nodes"], ref["edges"]) != (ours["nodes"], ours["edges"]):
            print("WARNING: the two sides disagree on node or edge counts")
        ratio = ref["seconds"] / ours["seconds"]
        verdict = "goal met" if ratio >= 20 else "target met" if ratio >= 10 else "BELOW TARGET"
        print(f"speed ratio networkx / cutbook = {ratio:.1f}x  (target >= 10x, goal 20x: "
              f"{verdict}); CPU-time ratio {ref['cpu_seconds'] / ours['cpu_seconds']:.1f}x")
        print(f"speed ratio networkx / full cutbook import into the store = "
              f"{ref['seconds'] / full['seconds']:.1f}x")
        print("(other processes on the machine slow both sides; 'load' is the 1-minute load "
              "average when each side finished)")


if __name__ == "__main__":
    main()
