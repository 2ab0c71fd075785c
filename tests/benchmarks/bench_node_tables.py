"""Node attribute tables: the cost of importing with a node table, and of `nodes add`, against a plain import.

Prints ratios measured in the same run (and the load average): import with ``--nodes`` / import
without; ``nodes add`` / import without; the stored bytes of the table against the graph's.

    python tests/benchmarks/bench_node_tables.py [--nodes 100000] [--edges 300000]
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time
from pathlib import Path

import numpy as np


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--nodes", type=int, default=100_000)
    ap.add_argument("--edges", type=int, default=300_000)
    args = ap.parse_args()
    from sqlalchemy import func, select

    from workspace.services import networks, nodes
    from workspace.services.store import open_workspace
    from workspace.store.schema import Blob

    rng = np.random.default_rng(1)
    n, m = args.nodes, args.edges
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        u, v = rng.integers(0, n, m), rng.integers(0, n, m)
        edges = tmp / "e.csv"
        with open(edges, "w") as f:
            f.write("source,target\n")
            f.writelines(f"n{a},n{b}\n" for a, b in zip(u.tolist(), v.tolist()) if a != b)
            f.writelines(f"n{i},n{(i + 1) % n}\n" for i in range(n))  # a ring: every node of the table is in the graph
        table = tmp / "t.csv"
        with open(table, "w") as f:
            f.write("node,district,x,y,active\n")
            f.writelines(f"n{i},d{i % 40},{rng.random():.4f},{rng.random():.4f},{'yes' if i % 3 else 'no'}\n"
                         for i in range(n))
        timings = {}
        for name, kw in (("plain", {}), ("with table", {"nodes": table})):
            store = open_workspace(tmp / f"{name}.sqlite")
            t0 = time.perf_counter()
            networks.import_network(store, edges, project="b", network="n",
                                    prepared=networks.prepare_import(edges, **kw))
            timings[name] = time.perf_counter() - t0
            if name == "plain":
                t0 = time.perf_counter()
                nodes.add_node_table(store, "b/n", table)
                timings["nodes add"] = time.perf_counter() - t0
                with store.read() as s:
                    total = s.scalar(select(func.sum(func.length(Blob.data))))
            store.dispose()
        print(f"load average {os.getloadavg()}; {n} nodes, {m} edge rows, table of 4 columns")
        print(f"import plain            {timings['plain']:.2f} s")
        print(f"import with --nodes     {timings['with table']:.2f} s   ratio {timings['with table'] / timings['plain']:.2f}")
        print(f"nodes add (next version){timings['nodes add']:.2f} s   ratio {timings['nodes add'] / timings['plain']:.2f}")
        print(f"store blob bytes after nodes add: {total:,}")


if __name__ == "__main__":
    main()
