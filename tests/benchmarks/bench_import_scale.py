"""Benchmark: how ``cutbook import`` scales with the number of nodes (time and peak memory per 1M nodes).

Run: ``python tests/benchmarks/bench_import_scale.py [--sizes 1000000 3000000] [--id-width 0]``

For each size a planted-partition edge list is written with numpy and Arrow (never networkx:
too slow at these sizes): ``n`` nodes in ``k = 8`` equal groups, about 7.5 edges per node, 90% of
them inside a group, ids ``n<i>`` (``--id-width W`` pads them to W characters, e.g. 40, to show
that long ids cost no more per node). ``cutbook import`` then runs as a user runs it (its own
process, start-up included, into a new store); the wall time, the CPU time (user + system, all
threads) and the peak resident memory of that process (``ru_maxrss`` of a waiting wrapper) are
printed per 1M nodes, with the ratio of each size's per-1M figure to the smallest size's
(target <= 1.2: cost linear in the nodes) and the peak memory per 1M nodes (target <= 0.6 GB).
The 1-minute load average is printed beside every figure: with load above the number of cores
the wall times mean little and the CPU times are the figures to compare.
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


def write_planted(path: Path, n: int, *, k: int = 8, per_node: float = 7.5, inside: float = 0.9,
                  id_width: int = 0, seed: int = 20261202) -> int:
    """Write ``n``-node planted-partition edges ``u,v`` (no header); returns the edge count."""
    import numpy as np
    import pyarrow as pa
    import pyarrow.compute as pc
    import pyarrow.csv as pa_csv

    rng = np.random.default_rng(seed)
    m = int(n * per_node)
    numbers = pc.cast(pa.array(np.arange(n, dtype=np.int64)), pa.string())
    if id_width:
        numbers = pc.utf8_lpad(numbers, id_width - 1, padding="0")
    ids = pc.binary_join_element_wise(pa.array(np.full(n, "n", dtype=object), pa.string()), numbers, "")
    chunk = 2_000_000
    with pa_csv.CSVWriter(str(path), pa.schema([("u", pa.string()), ("v", pa.string())]),
                          write_options=pa_csv.WriteOptions(include_header=False,
                                                            quoting_style="none")) as out:
        for start in range(0, m, chunk):
            size = min(chunk, m - start)
            u = rng.integers(0, n, size)
            same = rng.random(size) < inside
            # inside a group: a random member of u's group (group = i % k); else any node
            v = np.where(same, (rng.integers(0, (n + k - 1) // k, size) * k + u % k), rng.integers(0, n, size))
            v = np.where(v < n, v, u % k)
            out.write_table(pa.table({"u": ids.take(pa.array(u)), "v": ids.take(pa.array(v))}))
    return m


def _cutbook() -> list[str]:
    script = Path(sys.executable).with_name("cutbook")
    return [str(script)] if script.exists() else [sys.executable, "-m", "workspace.cli"]


_WRAPPER = """
import json, os, resource, subprocess, sys, time
start = time.perf_counter()
done = subprocess.run(sys.argv[1:], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
wall = time.perf_counter() - start
use = resource.getrusage(resource.RUSAGE_CHILDREN)
print(json.dumps({"code": done.returncode, "wall": wall, "cpu": use.ru_utime + use.ru_stime,
                  "peak_mib": use.ru_maxrss / 1024.0, "err": done.stderr.decode()[-400:]}))
"""


def import_once(path: Path, store: Path) -> dict:
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    env.pop("CUTBOOK_STORE", None)
    argv = _cutbook() + ["--store", str(store), "import", str(path), "--project", "scale", "--network",
                         "planted", "--format", "csv", "--header", "no"]
    out = subprocess.run([sys.executable, "-c", _WRAPPER, *argv], capture_output=True, text=True, env=env,
                         check=True)
    doc = json.loads(out.stdout.strip().splitlines()[-1])
    if doc["code"] != 0:
        raise SystemExit(f"import failed ({doc['code']}): {doc['err']}")
    return doc


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[1_000_000, 3_000_000])
    parser.add_argument("--id-width", type=int, default=0, help="pad ids to this many characters (0: n<i>)")
    parser.add_argument("--repeat", type=int, default=1, help="imports per size (best CPU time kept)")
    args = parser.parse_args()
    print(f"{os.cpu_count()} cores, load average {os.getloadavg()[0]:.2f} at start")
    rows = []
    with tempfile.TemporaryDirectory() as folder:
        for n in args.sizes:
            path = Path(folder) / f"planted-{n}.csv"
            start = time.perf_counter()
            m = write_planted(path, n, id_width=args.id_width)
            print(f"\n{n:,} nodes, {m:,} edges ({path.stat().st_size / 2**20:.0f} MiB) written in "
                  f"{time.perf_counter() - start:.1f} s; load {os.getloadavg()[0]:.2f}")
            best = None
            for i in range(args.repeat):
                store = Path(folder) / f"store-{n}-{i}.sqlite"
                doc = import_once(path, store)
                doc["load"] = os.getloadavg()[0]
                print(f"  import: wall {doc['wall']:.2f} s, CPU {doc['cpu']:.2f} s, peak {doc['peak_mib']:.0f} MiB "
                      f"(load {doc['load']:.2f})")
                best = doc if best is None or doc["cpu"] < best["cpu"] else best
                store.unlink(missing_ok=True)
                for suffix in ("-wal", "-shm"):
                    Path(f"{store}{suffix}").unlink(missing_ok=True)
            path.unlink()
            rows.append((n, best))
    base_n, base = rows[0]
    print(f"\n{'nodes':>12s} {'wall/1M':>9s} {'CPU/1M':>8s} {'peak GB/1M':>11s}  ratio to {base_n:,} "
          "(wall, CPU; target <= 1.2)   peak target <= 0.6 GB/1M")
    for n, doc in rows:
        per = 1e6 / n
        base_per = 1e6 / base_n
        print(f"{n:12,d} {doc['wall'] * per:8.2f}s {doc['cpu'] * per:7.2f}s {doc['peak_mib'] / 1024 * per:10.3f}  "
              f"{doc['wall'] * per / (base['wall'] * base_per):6.2f} {doc['cpu'] * per / (base['cpu'] * base_per):6.2f}"
              f"   (load {doc['load']:.2f})")
    print(f"load average at the end: {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores")


if __name__ == "__main__":
    main()
