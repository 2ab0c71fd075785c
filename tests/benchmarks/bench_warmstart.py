r"""Benchmark: a warm-started run on the next version of a network against a cold run on it.

Run: ``python tests/benchmarks/bench_warmstart.py [--nodes 1000000] [--degree 15] [--k 8] [--ratio 6]
[--rewire 0.01] [--source run|embedding]``  (``--nodes 200000`` for a quicker run)
or ``python tests/benchmarks/bench_warmstart.py --explain [--nodes 200000] [--fractions 0.001,0.01,0.05]``

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

``--explain`` measures why the ratio is what it is. For each rewired fraction (a fresh store each): the
cold run on version 2, its eigenvectors ``V`` (the same solve, ``compute_embedding`` with the run's seed),
and for both sources (``run``: the membership block; ``embedding``: version 1's cached eigenvectors) the
start block's distance :math:`\delta = \|(I - VV^T)Q\|_2` (``spectral.eigen.start_distance``), the
ratio the Krylov estimate predicts, :math:`\log(\delta/tol) / \log(\delta_{cold}/tol)` with
:math:`\delta_{cold} = \tan\angle(z, V)` of the cold random start ``z`` (Saad 2011, Sec. 6.6), and the
measured matvec and wall-time ratios of the warm run against the cold run. Then, on the first fraction's
version 2, synthetic starts ``V + \delta E`` (``E`` seeded, orthogonal to ``V``) for a range of
:math:`\delta`: the products of the package's warm solve, and of the bare solvers (ARPACK from
:math:`Q\mathbf{1}` with no added noise, LOBPCG from ``Q``; tolerance ``eig_tol``) against the bare cold
ARPACK solve -- the start accuracy a ratio of 0.5 would need.
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
    ap.add_argument("--explain", action="store_true",
                    help="delta of each warm source, predicted and measured ratios (see the module docstring)")
    ap.add_argument("--fractions", default="0.001,0.01,0.05", help="rewired fractions for --explain")
    ap.add_argument("--no-synthetic", action="store_true", help="--explain without the synthetic starts")
    args = ap.parse_args()
    if args.explain:
        explain(args)
        return

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


def _planted(args):
    from workspace.spectral.generators import planted_partition

    c_out = args.degree * args.k / (args.ratio + args.k - 1)
    return planted_partition(args.nodes, args.k, args.ratio * c_out, c_out, seed=11), args.ratio * c_out, c_out


def _tan_angle(z, V):
    """tan of the angle between a vector and range(V): ||(I - VV^T) z|| / ||V^T z||."""
    import numpy as np

    c = V.T @ z
    return float(np.linalg.norm(z - V @ c) / np.linalg.norm(c))


def _counting_operator(A_sub):
    """(LinearOperator of M = I + D^-1/2 A D^-1/2, product counter) as njw builds it (loops doubled)."""
    import numpy as np
    from scipy.sparse.linalg import LinearOperator

    from workspace.spectral.eigen import shifted_laplacian_operator

    op, _, _ = shifted_laplacian_operator(A_sub, "sym")
    count = [0]

    def apply(x):
        count[0] += 1 if x.ndim == 1 else x.shape[1]
        return op.apply(x)

    return LinearOperator(op.S.shape, matvec=apply, matmat=apply, dtype=np.float64), count


def explain(args) -> None:
    """See the module docstring (``--explain``)."""
    import warnings

    import numpy as np
    from scipy.sparse.linalg import eigsh, lobpcg
    from sklearn.metrics import adjusted_rand_score

    from workspace.services import runs, sweeps, warmstart
    from workspace.services.store import open_workspace
    from workspace.spectral.eigen import start_distance, warm_start_vector
    from workspace.spectral.laplacians import with_loops_doubled
    from workspace.spectral.embedding import embedding_fields
    from workspace.spectral.methods import validate_params
    from workspace.spectral.sweep import compute_embedding, embedded_nodes
    from workspace.store import repo
    from workspace.store.schema import NetworkVersion

    n, k = args.nodes, args.k
    fractions = [float(f) for f in args.fractions.split(",") if f.strip()]
    t = time.perf_counter()
    (A, _), c_in, c_out = _planted(args)
    print(f"graph: {n:,} nodes, {A.nnz // 2:,} edges, k={k} (c_in={c_in:.2f}, c_out={c_out:.2f}); "
          f"sampled in {time.perf_counter() - t:.1f} s; load average {os.getloadavg()}")
    params = validate_params("njw", {})
    tol = float(params["eig_tol"])
    width = len(str(n - 1))
    ids = np.array([f"n{i:0{width}d}" for i in range(n)])
    rows_out = []
    synthetic_graph = None
    for fraction in fractions:
        B, _ = rewired(A, fraction, seed=12)
        with tempfile.TemporaryDirectory() as folder:
            store = open_workspace(Path(folder) / "bench.sqlite")
            store_version(store, A, ids, "month 1")
            g2 = store_version(store, B, ids, "month 2")
            first = runs.launch(store, runs.prepare_run(store, "bench/planted@1", method="njw", k=k, seed=0))
            with store.read() as s:
                v1 = s.get(NetworkVersion, runs.prepare_run(store, "bench/planted@1", method="njw", k=k).version_id)
                g1, v1_id = repo.load_graph(s, v1), v1.id
            cold_spec = runs.prepare_run(store, "bench/planted@2", method="njw", k=k, seed=0)
            t = time.perf_counter()
            cold = runs.launch(store, cold_spec)
            cold_s = time.perf_counter() - t
            dc = runs.show_run(store, cold["run"])["diagnostics"]
            _, lc, _ = runs.load_membership(store, cold["run"])
            A2 = g2.adjacency()
            rows = embedded_nodes(A2)
            emb2 = compute_embedding(A2, "njw", k, seed=0)     # the cold run's eigenpairs (the same solve)
            V = emb2.vectors
            # what keeping a run's embedding for the next version's warm start would cost: the cache write
            with store.read() as s:
                v2 = s.get(NetworkVersion, cold_spec.version_id)
                v2_id, v2_hash = v2.id, v2.content_hash
            fields = embedding_fields("njw", params, k, 0)
            t = time.perf_counter()
            sweeps._store_embedding(store, v2_id, sweeps.embedding_key(v2_hash, fields), fields, emb2)
            keep_s = time.perf_counter() - t
            kept = [e for e in sweeps.embedding_cache(store)["embeddings"] if e["ref"].endswith("@2")]
            print(f"  {fraction:.1%}: keeping version 2's embedding ({V.shape[0]:,} x {V.shape[1]} float64) in the "
                  f"cache: {kept[0]['stored_bytes'] / 1e6:.1f} MB stored, {keep_s:.2f} s (cold run {cold_s:.1f} s)",
                  flush=True)
            z = np.random.default_rng(0).uniform(-1.0, 1.0, rows.shape[0])    # the cold solve's start vector
            delta_cold = _tan_angle(z, V)
            lin, count = _counting_operator(with_loops_doubled(A2)[rows][:, rows])
            eigsh(lin, k=k, which="LA", v0=z, ncv=max(2 * k + 1, 20), tol=tol)
            bare_cold = count[0]
            for source in ("run", "embedding"):
                if source == "embedding":
                    sweeps.embedding_for(store, v1_id, g1, "njw", params, k, 0)
                spec = runs.prepare_run(store, "bench/planted@2", method="njw", k=k, seed=0,
                                        warm=first["run"] if source == "run" else "auto")
                assert spec.warm_from.startswith(source), spec.warm_from
                block, _ = warmstart.start_block(store, spec.warm_from, g2, spec)
                W = block[rows, :k]
                delta = start_distance(W, V)
                Q, _ = np.linalg.qr(W)
                delta_v0 = _tan_angle(Q.sum(axis=1), V)
                predicted = np.log(delta / tol) / np.log(delta_cold / tol)
                count[0] = 0      # the package's warm ARPACK solve alone (no residual check, no extra eigenvalue)
                eigsh(lin, k=k, which="LA", v0=warm_start_vector(W, k, 0, z), ncv=max(2 * k + 1, 20), tol=tol)
                bare = count[0] / bare_cold
                t = time.perf_counter()
                warm = runs.launch(store, spec)
                warm_s = time.perf_counter() - t
                dw = runs.show_run(store, warm["run"])["diagnostics"]
                _, lw, _ = runs.load_membership(store, warm["run"])
                rows_out.append((fraction, source, delta, delta_v0, delta_cold, predicted, dw["matvecs"],
                                 dc["matvecs"], dw["matvecs"] / dc["matvecs"], bare, warm_s / cold_s,
                                 dw["wall_time_s"] / dc["wall_time_s"],
                                 adjusted_rand_score(lc, lw), (dw.get("warm_start") or {}).get("used"),
                                 os.getloadavg()[0]))
                print("  " + _explain_row(rows_out[-1]), flush=True)
            if synthetic_graph is None and not args.no_synthetic:
                synthetic_graph = (fraction, with_loops_doubled(A2)[rows][:, rows], V, dc["matvecs"], A2, rows)
            store.dispose()
    print("\nrewired  source     delta(block) tan(v0) tan(z,cold) predicted  matvecs warm/cold  ratio  "
          "ARPACK-only  wall  partition  ARI     used  load1")
    for row in rows_out:
        print(_explain_row(row))
    print("(ratio: whole warm run's products / cold run's; ARPACK-only: the warm start vector's ARPACK solve / the "
          "cold one's, without the residual check and the extra eigenvalue; wall: whole run; partition: the "
          "partition call)")
    if synthetic_graph is None:
        return

    fraction, A_sub, V, cold_run_matvecs, A2, rows = synthetic_graph
    print(f"\nsynthetic starts on version 2 of the {fraction:.1%} network: V + delta*E (E seeded, orthogonal "
          f"to V, unit columns); tol {tol:g}")
    lin, count = _counting_operator(A_sub)
    z = np.random.default_rng(0).uniform(-1.0, 1.0, A_sub.shape[0])
    count[0] = 0
    eigsh(lin, k=k, which="LA", v0=z, ncv=max(2 * k + 1, 20), tol=tol)
    bare_cold = count[0]
    print(f"bare cold ARPACK: {bare_cold} products; the cold run: {cold_run_matvecs} (with residual check and "
          f"the extra eigenvalue)")
    print("delta    run path: matvecs ratio | bare ARPACK from Q1: products ratio | bare LOBPCG from Q: "
          "products ratio | load1")
    rng = np.random.default_rng([7, 0xE])
    for target in (1e-1, 1e-2, 1e-3, 1e-4, 1e-6, 1e-8):
        E = rng.standard_normal(V.shape)
        E -= V @ (V.T @ E)
        E /= np.linalg.norm(E, axis=0)
        W = V + target * E
        full = np.zeros((A2.shape[0], k))
        full[rows] = W
        emb = compute_embedding(A2, "njw", k, seed=0, warm_start=full)
        path = (emb.info.get("warm_start") or {}).get("matvecs")
        Q, _ = np.linalg.qr(W)
        count[0] = 0
        eigsh(lin, k=k, which="LA", v0=Q.sum(axis=1), ncv=max(2 * k + 1, 20), tol=tol, maxiter=5000)
        bare = count[0]
        count[0] = 0
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            lobpcg(lin, Q.copy(), largest=True, tol=tol * 2.0, maxiter=400)
        block = count[0]
        print(f"{start_distance(W, V):7.1e}  {path:5d} {path / cold_run_matvecs:5.2f}          | "
              f"{bare:5d} {bare / bare_cold:5.2f}                     | {block:5d} {block / bare_cold:5.2f}"
              f"                | {os.getloadavg()[0]:.2f}", flush=True)


def _explain_row(row) -> str:
    (fraction, source, delta, delta_v0, delta_cold, predicted, mw, mc, ratio, bare, wall, part, ari, used,
     load) = row
    return (f"{fraction:6.1%}  {source:9s}  {delta:11.3g}  {delta_v0:7.3g}  {delta_cold:10.3g}  {predicted:9.2f}  "
            f"{mw:5d}/{mc:<5d}  {ratio:5.2f}  {bare:11.2f}  {wall:5.2f}  {part:9.2f}  {ari:.4f}  {used!s:5s} "
            f"{load:.2f}")


if __name__ == "__main__":
    main()
