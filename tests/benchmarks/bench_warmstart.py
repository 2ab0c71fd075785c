"""Benchmark: a warm-started run on the next version of a network against a cold run on it.

Run: ``python tests/benchmarks/bench_warmstart.py [--nodes 1000000] [--degree 15] [--k 8] [--ratio 6]
[--rewire 0.01] [--source run|embedding]``  (``--nodes 200000`` for a quicker run)

Same process, same store, same seed:

* version 1: a planted partition from ``workspace.spectral.generators`` (``k`` equal blocks, mean
  degree ``--degree``, i.e. ``degree/2`` edges per node, c_in/c_out = ``--ratio``); a cold njw run
  on it is the warm-start source (``--source run``: its membership, as community indicators scaled
  by sqrt(degree)), or its embedding is cached (``--source embedding``: real eigenvectors);
* version 2: the same graph with ``--rewire`` (1%) of its edges moved to a uniformly drawn new
  endpoint (seeded);
* on version 2, through ``services.runs.launch``: a cold run, then a run prepared with
  ``warm="auto"``. Printed: wall time of each (whole run: load, start block, solve, assignment,
  store) and of the partition call alone, matrix-vector products, the ratios warm/cold (target
  <= 0.5 each) and the ARI between the two memberships (scikit-learn ``adjusted_rand_score``).

The versions are written into a fresh store directly through the repository (setup, not timed).
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


def rewired(A, fraction: float, seed: int):
    """The upper-triangle edges of ``A`` with ``fraction`` of them given a new random second endpoint."""
    import numpy as np
    import scipy.sparse as sp

    rng = np.random.default_rng([seed, 0xBE7C])
    U = sp.triu(A, k=1).tocoo()
    r, c = U.row.astype(np.int64), U.col.astype(np.int64)
    moved = rng.choice(r.shape[0], int(round(fraction * r.shape[0])), replace=False)
    c = c.copy()
    c[moved] = rng.integers(0, A.shape[0], moved.shape[0])
    keep = r != c
    r, c = np.minimum(r[keep], c[keep]), np.maximum(r[keep], c[keep])
    B = sp.csr_array((np.ones(r.shape[0]), (r, c)), shape=A.shape)
    B.sum_duplicates()
    B.data[:] = 1.0
    return B, int(moved.shape[0])


def store_version(store, A, ids, message):
    import numpy as np
    import scipy.sparse as sp

    from workspace.domain import GraphData
    from workspace.store import repo

    U = sp.triu(A, k=1).tocoo()
    order = np.lexsort((U.col, U.row))
    graph = GraphData(ids, U.row[order].astype(np.int64), U.col[order].astype(np.int64),
                      U.data[order].astype(np.float64))
    with store.write() as s:
        proj = repo.get_or_create_project(s, "bench")
        net = repo.get_or_create_network(s, proj, "planted")
        parent = repo.latest_version(s, net.id)
        repo.add_version(s, net, graph, parent=parent, content_hash=graph.content_hash(), message=message,
                         source_name="generated", source_format="generated", policy_json="{}", report_json="{}")
    return graph


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--nodes", type=int, default=1_000_000)
    ap.add_argument("--degree", type=float, default=15.0, help="mean degree (edges per node = degree / 2)")
    ap.add_argument("--k", type=int, default=8)
    ap.add_argument("--ratio", type=float, default=6.0, help="c_in / c_out of the planted partition")
    ap.add_argument("--rewire", type=float, default=0.01, help="fraction of edges rewired in version 2")
    ap.add_argument("--source", choices=("run", "embedding"), default="run")
    args = ap.parse_args()

    import numpy as np
    from sklearn.metrics import adjusted_rand_score

    from workspace.services import runs, sweeps
    from workspace.services.store import open_workspace
    from workspace.spectral.generators import planted_partition

    n, k = args.nodes, args.k
    c_out = args.degree * k / (args.ratio + k - 1)
    c_in = args.ratio * c_out
    t = time.perf_counter()
    A, truth = planted_partition(n, k, c_in, c_out, seed=11)
    B, moved = rewired(A, args.rewire, seed=12)
    print(f"graph: {n:,} nodes, {A.nnz // 2:,} edges, k={k} (c_in={c_in:.2f}, c_out={c_out:.2f}); version 2: "
          f"{moved:,} edges rewired ({args.rewire:.1%}); sampled in {time.perf_counter() - t:.1f} s")
    print(f"load average before: {os.getloadavg()}")

    with tempfile.TemporaryDirectory() as folder:
        store = open_workspace(Path(folder) / "bench.sqlite")
        width = len(str(n - 1))
        ids = np.array([f"n{i:0{width}d}" for i in range(n)])
        store_version(store, A, ids, "month 1")
        store_version(store, B, ids, "month 2")
        t = time.perf_counter()
        first = runs.launch(store, runs.prepare_run(store, "bench/planted@1", method="njw", k=k, seed=0))
        print(f"source run {first['run']} on version 1 (cold): {time.perf_counter() - t:.1f} s, "
              f"{runs.show_run(store, first['run'])['diagnostics']['matvecs']} matvecs")
        if args.source == "embedding":
            from workspace.spectral.methods import validate_params

            with store.read() as s:
                from workspace.store import repo
                from workspace.store.schema import NetworkVersion

                v1 = s.get(NetworkVersion, runs.prepare_run(store, "bench/planted@1", method="njw", k=k).version_id)
                g1 = repo.load_graph(s, v1)
                v1_id = v1.id
            sweeps.embedding_for(store, v1_id, g1, "njw", validate_params("njw", {}), k, 0)
            print("cached the embedding of version 1")

        cold_spec = runs.prepare_run(store, "bench/planted@2", method="njw", k=k, seed=0)
        t = time.perf_counter()
        cold = runs.launch(store, cold_spec)
        cold_s = time.perf_counter() - t
        warm_spec = runs.prepare_run(store, "bench/planted@2", method="njw", k=k, seed=0, warm="auto")
        t = time.perf_counter()
        warm = runs.launch(store, warm_spec)
        warm_s = time.perf_counter() - t
        dc = runs.show_run(store, cold["run"])["diagnostics"]
        dw = runs.show_run(store, warm["run"])["diagnostics"]
        ws = dw.get("warm_start") or {}
        _, lc, _ = runs.load_membership(store, cold["run"])
        _, lw, _ = runs.load_membership(store, warm["run"])
        ari = adjusted_rand_score(lc, lw)
        print(f"warm source: {warm_spec.warm_from} ({ws.get('from_version')}); used: {ws.get('used')}"
              + (f"; fallback: {ws['fallback']}" if ws.get("fallback") else ""))
        print(f"cold run  {cold_s:8.2f} s (partition {dc['wall_time_s']:.2f} s)  {dc['matvecs']:6d} matvecs  "
              f"solver {dc['solver']}")
        print(f"warm run  {warm_s:8.2f} s (partition {dw['wall_time_s']:.2f} s)  {dw['matvecs']:6d} matvecs  "
              f"solver {dw['solver']}")
        time_ratio = warm_s / cold_s
        part_ratio = dw["wall_time_s"] / dc["wall_time_s"]
        mv_ratio = dw["matvecs"] / max(dc["matvecs"], 1)
        print(f"ratio warm/cold: wall time {time_ratio:.3f} (target <= 0.5: {'met' if time_ratio <= 0.5 else 'MISSED'}); "
              f"partition call {part_ratio:.3f}; matvecs {mv_ratio:.3f} "
              f"(target <= 0.5: {'met' if mv_ratio <= 0.5 else 'MISSED'})")
        print(f"ARI warm vs cold {ari:.5f}; ARI vs planted: cold {adjusted_rand_score(truth, lc):.4f}, "
              f"warm {adjusted_rand_score(truth, lw):.4f}")
        print(f"load average after: {os.getloadavg()}")
        store.dispose()


if __name__ == "__main__":
    main()
