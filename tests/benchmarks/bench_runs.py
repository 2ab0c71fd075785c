"""Benchmark: a partition run end to end through the service layer against the bare engine,
and a diff of two stored memberships.

Run: ``python tests/benchmarks/bench_runs.py [--nodes 1000000] [--degree 15] [--k 8]``

Same graph, same process, same seed:

* bare engine: ``workspace.spectral.partition(A, "njw", k=k, seed=0)`` on the adjacency;
* service: ``services.runs.launch`` — load the version's blobs from the store, build the
  adjacency, compute, write the run (membership blob, measures, community table) in one short
  transaction. Target: service / bare <= 1.3; stored membership <= 2 MB per 1M nodes.
* diff: two 1M-node memberships loaded from the store and compared in full
  (``services.diffs.diff_runs``), with a breakdown, and ``cutbook diff A B --json`` as a whole
  command including interpreter start-up. Target: under 1 s plus start-up.

The graph is a planted partition from ``workspace.spectral.generators`` (mean degree ``--degree``,
``k`` equal blocks, c_in/c_out = 6), written into a fresh store directly through the repository
(setup, not timed; the import path has its own benchmark).
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))


def peak_rss_mib() -> float:
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--nodes", type=int, default=1_000_000)
    ap.add_argument("--degree", type=float, default=15.0)
    ap.add_argument("--k", type=int, default=8)
    args = ap.parse_args()

    import numpy as np
    from sklearn.metrics import adjusted_rand_score

    from workspace.domain import GraphData
    from workspace.services import diffs, runs
    from workspace.services.store import open_workspace
    from workspace.spectral import partition
    from workspace.spectral.generators import planted_partition
    from workspace.store import repo

    n, k = args.nodes, args.k
    # mean degree c = (c_in + (k-1) c_out) / k with c_in = 6 c_out
    c_out = args.degree * k / (6 + k - 1)
    c_in = 6 * c_out
    t = time.perf_counter()
    A, truth = planted_partition(n, k, c_in, c_out, seed=11)
    print(f"graph: {n:,} nodes, {A.nnz // 2:,} edges, k={k} (c_in={c_in:.2f}, c_out={c_out:.2f}) "
          f"sampled in {time.perf_counter() - t:.1f} s")

    with tempfile.TemporaryDirectory() as folder:
        store = open_workspace(Path(folder) / "bench.sqlite")
        import scipy.sparse as sp

        U = sp.triu(A, k=1).tocoo()
        order = np.lexsort((U.col, U.row))
        width = len(str(n - 1))
        ids = np.array([f"n{i:0{width}d}" for i in range(n)])  # zero-padded: sorted order == index order
        graph = GraphData(ids, U.row[order].astype(np.int64), U.col[order].astype(np.int64),
                          U.data[order].astype(np.float64))
        t = time.perf_counter()
        with store.write() as s:
            proj = repo.get_or_create_project(s, "bench")
            net = repo.get_or_create_network(s, proj, "planted")
            repo.add_version(s, net, graph, parent=None, content_hash=graph.content_hash(), message="",
                             source_name="generated", source_format="generated", policy_json="{}",
                             report_json="{}")
        print(f"setup: version stored in {time.perf_counter() - t:.1f} s")

        t = time.perf_counter()
        bare = partition(graph.adjacency(), "njw", k=k, seed=0)
        bare_s = time.perf_counter() - t
        print(f"bare engine   partition(njw)      {bare_s:8.2f} s   ARI vs planted "
              f"{adjusted_rand_score(truth, bare.labels):.4f}")

        spec = runs.prepare_run(store, "bench/planted", method="njw", k=k, seed=0)
        t = time.perf_counter()
        res = runs.launch(store, spec)
        svc_s = time.perf_counter() - t
        ratio = svc_s / bare_s
        print(f"service       runs.launch         {svc_s:8.2f} s   ratio service/bare = {ratio:.3f} "
              f"(target <= 1.3: {'met' if ratio <= 1.3 else 'MISSED'})")
        _, labels, _ = runs.load_membership(store, res["run"])
        assert (labels == bare.labels).all(), "service and bare engine disagree"
        import sqlite3

        con = sqlite3.connect(store.sqlite_path)
        size = con.execute("SELECT length(b.data) FROM runs r JOIN blobs b ON b.hash = r.membership_blob "
                           "WHERE r.id = ?", (res["run"],)).fetchone()[0]
        con.close()
        per_million = size / (n / 1e6) / 1e6
        print(f"stored membership {size / 1e6:.3f} MB = {per_million:.3f} MB per 1M nodes "
              f"(target <= 2: {'met' if per_million <= 2 else 'MISSED'})")

        # a second membership to diff against: the same method with another seed on a perturbed graph
        spec2 = runs.prepare_run(store, "bench/planted", method="regularized", k=k, seed=1)
        res2 = runs.launch(store, spec2)
        times = {}
        t = time.perf_counter()
        ids_a, la, _ = runs.load_membership(store, res["run"])
        times["load A"] = time.perf_counter() - t
        t = time.perf_counter()
        ids_b, lb, _ = runs.load_membership(store, res2["run"])
        times["load B"] = time.perf_counter() - t
        from workspace.compare import compare_memberships

        t = time.perf_counter()
        d = compare_memberships(ids_a, la, ids_a, lb)
        times["compare"] = time.perf_counter() - t
        t = time.perf_counter()
        doc = d.to_dict()
        times["to_dict"] = time.perf_counter() - t
        t = time.perf_counter()
        text = json.dumps(doc)
        times["json"] = time.perf_counter() - t
        t = time.perf_counter()
        diffs.diff_runs(store, res["run"], res2["run"])
        service_diff = time.perf_counter() - t
        print("diff breakdown: " + "  ".join(f"{k} {v * 1000:.0f} ms" for k, v in times.items())
              + f"  (JSON {len(text) / 1e6:.1f} MB)")
        print(f"diff through services.diffs.diff_runs: {service_diff:.3f} s "
              f"(target < 1 s: {'met' if service_diff < 1 else 'MISSED'}); ARI {doc['ari']:.4f}, moved {doc['moved']:,}")
        env = {**os.environ, "PYTHONPATH": str(ROOT)}
        t = time.perf_counter()
        subprocess.run([sys.executable, "-c", "pass"], check=True, env=env)
        bare_python = time.perf_counter() - t
        t = time.perf_counter()
        out = subprocess.run([sys.executable, "-m", "workspace.cli", "--store", str(store.sqlite_path), "diff",
                              str(res["run"]), str(res2["run"]), "--json"], capture_output=True, env=env)
        cli_s = time.perf_counter() - t
        assert out.returncode == 0, out.stderr
        print(f"`cutbook diff A B --json` whole command: {cli_s:.3f} s (an empty interpreter starts in "
              f"{bare_python:.3f} s)")
        print(f"peak RSS of this process: {peak_rss_mib():.0f} MiB")
        store.dispose()


if __name__ == "__main__":
    main()
