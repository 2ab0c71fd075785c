"""Benchmark: one large array stored in chunks against the same array stored as one value, on SQLite
and PostgreSQL, as ratios; and the peak memory of reading it back.

Run: ``python tests/benchmarks/bench_chunks.py [--items 40000000] [--chunk-mib 64] [--no-postgres]
[--weights]``

The array is ``--items`` int64 values (an edge-index column: sorted ids with small gaps, so it
compresses as real edge lists do), or with ``--weights`` float64 values drawn uniformly (barely
compressible, like measured weights): with ``--items 150000000 --weights`` (1.2 GB) one value is over
the 1 GB limit of a bytea value and of an SQLite blob, and that side reports the refusal. Each side writes it in one write transaction (``repo.put_array``,
encoding included) and reads it back (``repo.get_array``) in a fresh store; "one value" sets
``$CUTBOOK_BLOB_CHUNK_BYTES`` above the array size. Printed per back end: seconds for write and read,
the ratio chunked / one value, and the read's peak traced memory as a multiple of the array's size
(tracemalloc: numpy and Python bytes; zstd's own working memory is not traced). A throwaway
PostgreSQL server is started from ``/usr/lib/postgresql/*/bin`` unless ``--no-postgres``. The load
average is printed before and after: on a shared machine, compare ratios, not seconds.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests" / "support"))


def _measure(url: str, arr, chunk_bytes: int) -> tuple[float, float, float, int]:
    import numpy as np

    from workspace.services.store import open_workspace
    from workspace.store import repo

    os.environ["CUTBOOK_BLOB_CHUNK_BYTES"] = str(chunk_bytes)
    with open_workspace(url) as st:
        t0 = time.perf_counter()
        with st.write() as s:
            h = repo.put_array(s, arr)
        t_write = time.perf_counter() - t0
        with st.read() as s:
            chunks = s.scalar(__import__("sqlalchemy").text("SELECT chunks FROM blobs WHERE hash = :h")
                              .bindparams(h=h))
            tracemalloc.start()
            t0 = time.perf_counter()
            back = repo.get_array(s, h)
            t_read = time.perf_counter() - t0
            _, peak = tracemalloc.get_traced_memory()
            tracemalloc.stop()
    if not np.array_equal(back, arr):
        raise SystemExit("read back differs")
    return t_write, t_read, peak / arr.nbytes, int(chunks)


def main() -> None:
    import numpy as np

    ap = argparse.ArgumentParser()
    ap.add_argument("--items", type=int, default=40_000_000)
    ap.add_argument("--chunk-mib", type=int, default=64)
    ap.add_argument("--no-postgres", action="store_true")
    ap.add_argument("--weights", action="store_true")
    args = ap.parse_args()
    rng = np.random.default_rng(0)
    if args.weights:
        arr = rng.random(args.items)
    else:
        arr = np.cumsum(rng.integers(0, 4, args.items)).astype(np.int64)
    print(f"array: {args.items:,} {arr.dtype} = {arr.nbytes / 2**20:.0f} MiB; chunks of {args.chunk_mib} MiB; "
          f"load average before {os.getloadavg()}")
    tmp = tempfile.TemporaryDirectory()
    server = None
    if not args.no_postgres:
        from pgserver import PgServer, find_bindir, wait_ready

        bindir = find_bindir()
        if bindir is None:
            print("no PostgreSQL binaries: SQLite only")
        else:
            server = PgServer(bindir).start()
            wait_ready(server)
    try:
        for backend in ("sqlite", "postgresql"):
            if backend == "postgresql" and server is None:
                continue
            def url(tag):
                if backend == "sqlite":
                    return str(Path(tmp.name) / f"{tag}.sqlite")
                return server.url(server.new_database(tag))
            try:
                whole = _measure(url("whole"), arr, arr.nbytes + 1)
                print(f"{backend:10s} one value: write {whole[0]:6.2f} s, read {whole[1]:6.2f} s, "
                      f"read peak {whole[2]:.2f}x")
            except Exception as exc:  # noqa: BLE001 - over the value limit: reported, the chunked side still runs
                whole = None
                print(f"{backend:10s} one value: refused ({type(exc).__name__}: {str(exc).splitlines()[0][:120]})")
            chunked = _measure(url("chunked"), arr, args.chunk_mib << 20)
            ratios = (f"   ratio chunked/one value: write {chunked[0] / whole[0]:.2f}, read {chunked[1] / whole[1]:.2f}"
                      if whole else "")
            print(f"{'':10s} {chunked[3]:3d} chunks: write {chunked[0]:6.2f} s, read {chunked[1]:6.2f} s, "
                  f"read peak {chunked[2]:.2f}x{ratios}")
    finally:
        if server is not None:
            server.stop()
        tmp.cleanup()
    print(f"load average after {os.getloadavg()}")


if __name__ == "__main__":
    main()
