"""Benchmark: the same user commands on a PostgreSQL store and on an SQLite store, as ratios.

Run: ``python tests/benchmarks/bench_postgres.py [--edges 2000000] [--run-nodes 300000]
[--diff-nodes 1000000] [--repeat 1]``

A throwaway PostgreSQL server is started for the run (tests/support/pgserver.py: ``initdb`` and
``pg_ctl`` from ``/usr/lib/postgresql/*/bin``, 127.0.0.1, as the ``postgres`` account when run as
root; stopped at the end). Its durability settings are the test server's (``fsync`` off), so the
figures compare the client paths, not disks. Each command runs as a user runs it: a fresh
interpreter of ``python -m workspace.cli`` (start-up included), best of ``--repeat``:

* import: a weighted edge list of ``--edges`` edges over ``--edges // 8`` ids (the ``plain``
  shape of bench_import.py) into an empty store;
* run: ``run --method fiedler`` on a two-block planted partition of ``--run-nodes`` nodes
  (mean degree 7; setup imports it);
* diff: ``diff A B --json`` of two memberships of a ``--diff-nodes`` ring stored with ``attach``
  (B is A with 5 % of the nodes moved).

Printed per step: wall seconds on SQLite and PostgreSQL, and the ratio PostgreSQL / SQLite
(target <= 1.5), with the load average before and after (a shared machine skews both sides alike
only when they run close together, so the two sides of a step run back to back).
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests" / "support"))
sys.path.insert(0, str(ROOT / "tests" / "benchmarks"))


def _cli(store: str, *argv: str) -> float:
    env = {**os.environ, "PYTHONPATH": str(ROOT), "OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1"}
    t0 = time.perf_counter()
    res = subprocess.run([sys.executable, "-m", "workspace.cli", "--store", store, *map(str, argv)],
                         capture_output=True, text=True, env=env, timeout=3600)
    dt = time.perf_counter() - t0
    if res.returncode != 0:
        raise SystemExit(f"cutbook {' '.join(argv)} failed on {store.split('@')[-1]}: {res.stderr.strip()}")
    return dt


def _ring_csv(path: Path, n: int, seed: int) -> Path:
    import numpy as np

    rng = np.random.default_rng(seed)
    u = np.arange(n)
    chords = rng.integers(0, n, n // 10)
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("source,target\n")
        fh.writelines(f"v{i},v{(i + 1) % n}\n" for i in u)
        fh.writelines(f"v{i},v{(i + n // 3 + 7) % n}\n" for i in chords)
    return path


def _membership_csv(path: Path, n: int, k: int, moved: float, seed: int) -> Path:
    import numpy as np

    rng = np.random.default_rng(seed)
    labels = (np.arange(n) * k // n).astype(np.int64)  # contiguous arcs of the ring
    if moved:
        idx = rng.choice(n, int(n * moved), replace=False)
        labels[idx] = rng.integers(0, k, idx.size)
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("node,community\n")
        fh.writelines(f"v{i},c{c}\n" for i, c in enumerate(labels.tolist()))
    return path


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--edges", type=int, default=2_000_000)
    ap.add_argument("--run-nodes", type=int, default=300_000)
    ap.add_argument("--diff-nodes", type=int, default=1_000_000)
    ap.add_argument("--repeat", type=int, default=1)
    args = ap.parse_args()

    from bench_import import write_edges
    from pgserver import PgServer, find_bindir, wait_ready

    bindir = find_bindir()
    if bindir is None:
        raise SystemExit("no PostgreSQL server binaries in /usr/lib/postgresql/*/bin (apt-get install postgresql)")
    server = PgServer(bindir).start()
    wait_ready(server)
    tmp = Path(tempfile.mkdtemp(prefix="cutbook-bench-pg-"))
    print(f"load average before: {os.getloadavg()}")
    results = []
    try:
        def stores(tag: str):
            return {"sqlite": str(tmp / f"{tag}-{time.monotonic_ns()}.sqlite"),
                    "postgresql": server.url(server.new_database(tag))}

        # import
        edges = tmp / "edges.csv"
        write_edges(edges, args.edges, max(2, args.edges // 8))
        best = {}
        for backend in ("sqlite", "postgresql"):
            times = []
            for _ in range(args.repeat):
                target = stores("imp")[backend]
                times.append(_cli(target, "import", edges, "--project", "b", "--network", "e",
                                  "--weight", "2", "--self-loops", "keep"))
            best[backend] = min(times)
        results.append((f"import {args.edges:,} edges", best))

        # run
        from graphs import adjacency_to_csv
        from workspace.spectral.generators import planted_partition

        A, _ = planted_partition(args.run_nodes, 2, c_in=12.0, c_out=2.0, seed=1)
        sbm = adjacency_to_csv(A, tmp / "sbm.csv")
        targets = stores("run")
        best = {}
        for backend, target in targets.items():
            _cli(target, "import", sbm, "--project", "b", "--network", "sbm", "--weight", "weight")
            best[backend] = min(_cli(target, "run", "b/sbm", "--method", "fiedler") for _ in range(args.repeat))
        results.append((f"run fiedler, {args.run_nodes:,} nodes", best))

        # diff
        big = _ring_csv(tmp / "big.csv", args.diff_nodes, 2)
        a = _membership_csv(tmp / "a.csv", args.diff_nodes, 100, 0.0, 3)
        b = _membership_csv(tmp / "b.csv", args.diff_nodes, 100, 0.05, 4)
        targets = stores("diff")
        best = {}
        for backend, target in targets.items():
            _cli(target, "import", big, "--project", "b", "--network", "big")
            _cli(target, "attach", a, "--to", "b/big", "--label", "a")
            _cli(target, "attach", b, "--to", "b/big", "--label", "b")
            best[backend] = min(_cli(target, "diff", "1", "2", "--json") for _ in range(args.repeat))
        results.append((f"diff, {args.diff_nodes:,} nodes", best))
    finally:
        server.stop()
        import shutil

        shutil.rmtree(tmp, ignore_errors=True)
    print(f"{'step':<34} {'sqlite s':>9} {'postgres s':>11} {'ratio':>7}  (target <= 1.5)")
    for name, best in results:
        ratio = best["postgresql"] / best["sqlite"]
        print(f"{name:<34} {best['sqlite']:9.2f} {best['postgresql']:11.2f} {ratio:7.2f}")
    print(f"load average after: {os.getloadavg()}")


if __name__ == "__main__":
    main()
