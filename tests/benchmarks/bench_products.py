"""Benchmark: one sparse product ``S @ x`` of the eigensolver, plain, by row blocks and by column panels.

Run: ``python tests/benchmarks/bench_products.py [--sizes 1000000,3000000,10000000]
[--panel-mb 16] [--range-rows 131072] [--repeat 7] [--cache DIR]``

For every size a planted partition is sampled as ``bench_scale.py`` does (k = 8 equal blocks, mean
degree 15, seed 1; ``workspace.spectral.planted_partition``) with unit weights, the adjacency the
engine multiplies at that size (``s * (A @ (s * x))`` from 500k nodes). One product with a seeded
random vector is then timed, the fastest of ``--repeat`` (wall and CPU time per 1M nodes):

* ``plain 1t``: scipy's ``A @ x`` (one thread), the reference of the ratios;
* ``rows 2t``: :class:`workspace.spectral.eigen.RowBlockMatrix`, two threads (the engine's product
  below ``PANEL_MIN_ROWS``);
* ``panels 1t`` / ``panels 2t``: :class:`workspace.spectral.eigen.PanelMatrix` for every
  ``--panel-mb`` (MB of the vector per panel), one and two threads, with the time to regroup the
  matrix in place and to restore it.

Each panelled product is checked against ``A @ x`` bit for bit (``numpy.array_equal``), and the
matrix after ``restore`` against a copy taken before. ``os.getloadavg()`` is printed with every
line: the machine is shared, read the CPU column for the one-thread figures. ``--cache DIR`` keeps
the sampled patterns as ``.npy`` files and reuses them.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np
import scipy.sparse as sp

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from workspace.spectral import eigen, planted_partition  # noqa: E402

K, DEGREE, SEED = 8, 15.0, 1


def planted(n: int, cache: Path | None) -> sp.csr_array:
    """The planted partition of ``bench_scale.py`` at ``n`` nodes, unit weights, sorted rows."""
    if cache is not None and (cache / f"indptr{n}.npy").exists():
        indptr, indices = np.load(cache / f"indptr{n}.npy"), np.load(cache / f"indices{n}.npy")
    else:
        gap = 2.0 * K * DEGREE ** 0.5
        c_out = (K * DEGREE - gap) / K
        A, _ = planted_partition(n, K, c_out + gap, c_out, seed=SEED)
        A.sort_indices()
        indptr, indices = A.indptr, A.indices
        del A
        if cache is not None:
            cache.mkdir(parents=True, exist_ok=True)
            np.save(cache / f"indptr{n}.npy", indptr)
            np.save(cache / f"indices{n}.npy", indices)
    A = sp.csr_array((np.ones(indices.shape[0]), indices, indptr), shape=(n, n))
    A.has_sorted_indices = True
    return A


def fastest(f, repeat: int) -> tuple[float, float]:
    """(wall, CPU) seconds of the fastest of ``repeat`` calls (by wall time)."""
    best = (float("inf"), float("inf"))
    for _ in range(repeat):
        t, c = time.perf_counter(), time.process_time()
        f()
        best = min(best, (time.perf_counter() - t, time.process_time() - c))
    return best


def line(name: str, n: int, wall: float, cpu: float, ref: float | None, extra: str = "") -> None:
    per = n / 1e6
    ratio = f"  {ref / wall:5.2f}x faster" if ref else ""
    print(f"  {name:24s} {wall * 1e3 / per:7.1f} ms per 1M (cpu {cpu * 1e3 / per:7.1f}){ratio}"
          f"  load {os.getloadavg()[0]:.2f}{extra}", flush=True)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--sizes", default="1000000,3000000,10000000")
    ap.add_argument("--panel-mb", default="16", help="MB of the vector per panel, comma-separated")
    ap.add_argument("--range-rows", type=int, default=eigen.PANEL_RANGE_ROWS)
    ap.add_argument("--repeat", type=int, default=7)
    ap.add_argument("--cache", help="keep / reuse the sampled patterns in this folder")
    args = ap.parse_args()
    cache = Path(args.cache) if args.cache else None
    print(f"one product S @ x; planted partition k={K}, mean degree {DEGREE}; cpus {os.cpu_count()}; "
          f"load {os.getloadavg()}; PANEL_MIN_ROWS {eigen.PANEL_MIN_ROWS} (the engine's threshold)")
    for n in [int(v) for v in args.sizes.split(",") if v]:
        A = planted(n, cache)
        x = np.random.default_rng(0).uniform(-1.0, 1.0, n)
        ref = A @ x
        print(f"n={n:,}: {A.nnz:,} stored entries, vector {8 * n / 2**20:.0f} MB", flush=True)
        w0, c0 = fastest(lambda: A @ x, args.repeat)
        line("plain 1t", n, w0, c0, None)
        with ThreadPoolExecutor(max_workers=1) as pool:
            rows = eigen.RowBlockMatrix(A, pool, 2)
            w, c = fastest(lambda: rows @ x, args.repeat)
            line("rows 2t", n, w, c, w0)
            rows = None
            data0, indices0 = A.data.copy(), A.indices.copy()
            for mb in [float(v) for v in args.panel_mb.split(",") if v]:
                t = time.perf_counter()
                panels = eigen.PanelMatrix(A, int(mb * 2**20), args.range_rows)
                regroup = time.perf_counter() - t
                same = np.array_equal(panels.times(x), ref) and np.array_equal(panels.times(x, pool, 2), ref)
                w1, c1 = fastest(lambda: panels.times(x), args.repeat)
                w2, c2 = fastest(lambda: panels.times(x, pool, 2), args.repeat)
                t = time.perf_counter()
                panels.restore()
                back = time.perf_counter() - t
                same = same and np.array_equal(A.data, data0) and np.array_equal(A.indices, indices0)
                tag = f"panels {mb:g} MB ({panels.panels})"
                line(tag + " 1t", n, w1, c1, w0)
                line(tag + " 2t", n, w2, c2, w0, f"  regroup {regroup:.2f} s, restore {back:.2f} s, "
                     f"same bits {same}")
                if not same:
                    raise SystemExit("panelled product or restored matrix differs")
            del data0, indices0
        A = x = ref = None  # noqa: F841 - let the next size have the memory


if __name__ == "__main__":
    main()
