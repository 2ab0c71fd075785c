"""Benchmark: how long a run report takes to draw, against its largest single part.

Run: ``python tests/benchmarks/bench_report.py [--sizes 300,1000,3000] [--repeat 3]``

For planted partitions (``networkx.random_partition_graph``, ten equal blocks, p_in chosen for a
mean degree near 20) the script times, in the same rotation: (a) the seeded force-directed layout
alone (``networkx.spring_layout`` with the report's iteration count), (b) the whole network figure
as SVG (layout + drawing + rendering), (c) the whole HTML page body of a run report built from
plain arrays (every figure). It prints medians, the ratios (b)/(a) and (c)/(a), the SVG size, and
the load average: the layout dominates, so (c)/(a) near 1 means the rest of the report costs little.
Nothing here touches a store.
"""

from __future__ import annotations

import argparse
import os
import statistics
import time

import networkx as nx
import numpy as np


def _graph(n: int, seed: int = 1):
    blocks = [n // 10] * 10
    p_in = min(1.0, 18.0 / (n // 10))
    p_out = 2.0 / n
    G = nx.random_partition_graph(blocks, p_in, p_out, seed=seed)
    u, v = np.array(list(G.edges()), dtype=np.int64).T
    labels = np.repeat(np.arange(10), n // 10)
    return u, v, np.ones(u.size), labels


def main() -> None:
    from workspace.report import figures as F
    from workspace.report.html import run_page
    from workspace.report.render import figure_bytes

    ap = argparse.ArgumentParser()
    ap.add_argument("--sizes", default="300,1000,3000")
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    print(f"load average before: {os.getloadavg()}")
    print(f"{'n':>6} {'m':>7} {'layout s':>9} {'figure s':>9} {'page s':>8} {'fig/layout':>10} "
          f"{'page/layout':>11} {'svg MB':>7}")
    for n in (int(x) for x in args.sizes.split(",")):
        u, v, w, labels = _graph(n)
        data = {"run": {"run": 1, "ref": "bench/planted@1", "method": "njw", "kind": "computed", "k": 10},
                "labels": labels, "eigenvalues": list(np.linspace(0, 1, 12)), "gap_k": 10, "stability": None,
                "repeats": 1, "graph": {"n": n, "edge_u": u, "edge_v": v, "weight": w}, "quality": {},
                "communities": []}
        t_layout, t_fig, t_page, size = [], [], [], 0
        for _ in range(args.repeat):
            t = time.perf_counter()
            F.spring_positions(n, u, v, w)
            t_layout.append(time.perf_counter() - t)
            t = time.perf_counter()
            svg = figure_bytes(F.network_drawing(F.spring_positions(n, u, v, w), u, v, labels), "svg")
            t_fig.append(time.perf_counter() - t)
            size = len(svg)
            t = time.perf_counter()
            run_page(data)
            t_page.append(time.perf_counter() - t)
        a, b, c = (statistics.median(x) for x in (t_layout, t_fig, t_page))
        print(f"{n:>6} {u.size:>7} {a:>9.2f} {b:>9.2f} {c:>8.2f} {b / a:>10.2f} {c / a:>11.2f} {size / 1e6:>7.2f}")
    print(f"load average after: {os.getloadavg()}")


if __name__ == "__main__":
    main()
