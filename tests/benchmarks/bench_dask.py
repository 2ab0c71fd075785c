"""Benchmark: a 32-task sweep on a 100k-node graph, local executor vs a Dask cluster of 1 and 2 workers.

Run: ``python tests/benchmarks/bench_dask.py [--nodes 100000] [--degree 12] [--planted 6] [--k 6] [--seeds 32]``

Same graph, same store, same process; measured in this order:

* local: ``services.sweeps.sweep`` with the local executor and one thread (every task in this process),
  with BLAS limited to one thread (threadpoolctl) as Dask's nanny does for its workers;
* Dask, 1 worker: a ``LocalCluster`` of one worker process (one thread) on 127.0.0.1, started before
  the timing starts; the sweep connects to it as to any existing scheduler;
* Dask, 2 workers: the same with two worker processes.

The default sweep is a stability sweep: one k, 32 seeds with perturbed edge weights, so each task is a
full partition computation (its own embedding on its perturbed graph, then k-means). ``--k 2..9
--seeds 4`` gives 32 tasks that share 4 embeddings instead.

Printed: wall time of each, the mean time per task of the local executor (wall / tasks), the per-task
overhead of Dask with 1 worker against local ((dask1 - local) / tasks) as a share of the task time
(target <= 10% for tasks >= 1 s), and the speed-up of 2 workers over 1 (at most 2 on two free cores;
on a shared machine the load average says how free they were). Every run's membership hash is checked
equal across the three.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))


def _hashes(store, out) -> dict:
    from workspace.services import runs

    return {(p["k"], r): runs.show_run(store, run_id)["membership_hash"]
            for p in out["points"] for r, run_id in enumerate(p["runs"])}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--nodes", type=int, default=100_000)
    ap.add_argument("--degree", type=float, default=12.0)
    ap.add_argument("--planted", type=int, default=6)
    ap.add_argument("--k", default="6", help="k values of the sweep (default 6)")
    ap.add_argument("--seeds", type=int, default=32, help="seeds per k (default 32: 32 tasks with --k 6)")
    args = ap.parse_args()

    import distributed
    import numpy as np
    import scipy.sparse as sp

    from workspace.domain import GraphData
    from workspace.jobs.executors import ExecutorSpec
    from workspace.services import sweeps
    from workspace.services.store import open_workspace
    from workspace.spectral.generators import planted_partition
    from workspace.store import repo

    n, k = args.nodes, args.planted
    c_out = args.degree * k / (6 + k - 1)
    A, _ = planted_partition(n, k, 6 * c_out, c_out, seed=5)
    print(f"graph: {n:,} nodes, {A.nnz // 2:,} edges, planted k={k}; sweep njw k={args.k} x {args.seeds} seeds")
    print(f"load average at start: {os.getloadavg()}")
    with tempfile.TemporaryDirectory() as folder:
        store = open_workspace(Path(folder) / "bench.sqlite")
        U = sp.triu(A, k=1).tocoo()
        order = np.lexsort((U.col, U.row))
        ids = np.array([f"n{i:07d}" for i in range(n)])
        graph = GraphData(ids, U.row[order].astype(np.int64), U.col[order].astype(np.int64),
                          U.data[order].astype(np.float64))
        with store.write() as s:
            proj = repo.get_or_create_project(s, "bench")
            net = repo.get_or_create_network(s, proj, "planted")
            repo.add_version(s, net, graph, parent=None, content_hash=graph.content_hash(), message="",
                             source_name="generated", source_format="generated", policy_json="{}",
                             report_json="{}")

        def spec():
            return sweeps.prepare_sweep(store, "bench/planted", method="njw", ks=args.k, seeds=args.seeds)

        # Dask's nanny starts workers with one BLAS/OpenMP thread (OMP_NUM_THREADS=1 and the like); the local
        # reference gets the same, so the ratio compares executors rather than BLAS threading
        try:
            from threadpoolctl import threadpool_limits
        except ImportError:
            threadpool_limits = None
        limit = threadpool_limits(limits=1) if threadpool_limits is not None else None
        t = time.perf_counter()
        local = sweeps.sweep(store, spec(), workers=1)
        local_s = time.perf_counter() - t
        if limit is not None:
            limit.restore_original_limits()
        tasks = local["tasks"]["done"]
        assert local["status"] == "done", local["error"]
        print(f"local executor, 1 thread       {local_s:8.2f} s  {tasks} tasks  (load {os.getloadavg()[0]:.1f}; "
              f"BLAS threads {'1' if limit is not None else 'as set'})")
        sweeps.prune_embeddings(store)   # each executor solves its own shared embeddings

        # the workers of the clusters cutbook starts keep glibc's adaptive malloc (no MALLOC_TRIM_THRESHOLD_);
        # this benchmark starts its own LocalCluster, so it asks for the same
        from workspace.jobs.executors import keep_malloc_adaptive

        keep_malloc_adaptive()
        timings = {}
        for workers in (1, 2):
            with distributed.LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, host="127.0.0.1",
                                          dashboard_address=None, silence_logs=40) as cluster:
                with distributed.Client(cluster, set_as_default=False) as c:
                    c.wait_for_workers(workers, timeout=120)
                ex = ExecutorSpec("dask", scheduler=cluster.scheduler_address)
                t = time.perf_counter()
                out = sweeps.sweep(store, spec(), executor=ex)
                timings[workers] = time.perf_counter() - t
            assert out["status"] == "done", out["error"]
            same = _hashes(store, out) == _hashes(store, local)
            print(f"Dask, {workers} worker process(es)     {timings[workers]:8.2f} s  hashes equal to local: {same}  "
                  f"(load {os.getloadavg()[0]:.1f})")
            sweeps.prune_embeddings(store)
        print(f"load average at end: {os.getloadavg()}")

        per_task = local_s / tasks
        overhead = (timings[1] - local_s) / tasks
        share = overhead / per_task
        print(f"time per task (local)          {per_task:8.3f} s")
        print(f"Dask overhead per task (1 worker vs local) {overhead:+.3f} s = {share:+.1%} of the task time "
              f"(target <= 10% for tasks >= 1 s: "
              f"{'met' if share <= 0.10 else 'MISSED'}{'' if per_task >= 1 else '; tasks here are shorter than 1 s'})")
        print(f"speed-up 2 workers / 1 worker  {timings[1] / timings[2]:8.2f}x   "
              f"(2 workers vs local: {local_s / timings[2]:.2f}x)")
        store.dispose()


if __name__ == "__main__":
    main()
