"""Benchmark: how long everyday commands take, end to end, on the demo store.

Run: ``python tests/benchmarks/bench_startup.py [--repeat 9]``

The invented demo store is built once in a temporary folder (``cutbook demo --no-ui``, not
timed). Each command then runs as its own process, exactly as a user types it (the ``cutbook``
console script of this interpreter's environment, falling back to ``python -m workspace.cli``),
``--repeat`` times in rotation (so slow moments of the machine hit every command alike); the
median wall time is printed against the command's target and against ``python -c pass``
measured in the same rotation (the interpreter's own start-up, which no command can beat).

Targets (quiet machine): ``--help`` <= 0.2 s; ``projects``, ``runs``, ``show RUN`` <= 0.35 s;
``diff A B`` of two demo runs <= 0.6 s. The 1-minute load average is printed before and after:
wall times mean little when it is above the number of cores; the CPU column (user + system
time of each command's process) is printed as well, as it is less sensitive to other load.
"""

from __future__ import annotations

import argparse
import os
import resource
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def _cutbook() -> list[str]:
    script = Path(sys.executable).with_name("cutbook")
    if script.exists():
        return [str(script)]
    found = shutil.which("cutbook")
    return [found] if found else [sys.executable, "-m", "workspace.cli"]


def _children_cpu() -> float:
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    return usage.ru_utime + usage.ru_stime


def _time(argv: list[str], env: dict) -> tuple[float, float]:
    """(wall seconds, CPU seconds user + system) of one run of ``argv``."""
    cpu = _children_cpu()
    start = time.perf_counter()
    done = subprocess.run(argv, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=env,
                          timeout=120)
    seconds = time.perf_counter() - start
    if done.returncode != 0:
        raise SystemExit(f"{' '.join(argv)} failed ({done.returncode}): {done.stderr.decode()[-500:]}")
    return seconds, _children_cpu() - cpu


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=9)
    args = parser.parse_args()
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    env.pop("CUTBOOK_STORE", None)
    cutbook = _cutbook()
    with tempfile.TemporaryDirectory() as folder:
        store = str(Path(folder) / "demo.sqlite")
        start = time.perf_counter()
        subprocess.run(cutbook + ["--store", store, "demo", "--no-ui"], check=True, env=env,
                       stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, timeout=600)
        print(f"demo store built in {time.perf_counter() - start:.1f} s (not timed below); "
              f"load average {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores")
        # two finished runs of the same network for show and diff
        import sqlite3

        con = sqlite3.connect(store)
        try:
            rows = con.execute("SELECT r.id, r.version_id FROM runs r WHERE r.status = 'done' "
                               "ORDER BY r.version_id, r.id").fetchall()
        finally:
            con.close()
        by_version: dict[int, list[int]] = {}
        for run_id, version_id in rows:
            by_version.setdefault(version_id, []).append(run_id)
        pair = next(ids[:2] for ids in by_version.values() if len(ids) >= 2)
        commands = [
            ("python -c pass", [sys.executable, "-c", "pass"], None),
            ("cutbook --help", cutbook + ["--help"], 0.2),
            ("cutbook projects", cutbook + ["--store", store, "projects"], 0.35),
            ("cutbook runs", cutbook + ["--store", store, "runs"], 0.35),
            (f"cutbook show {pair[0]}", cutbook + ["--store", store, "show", str(pair[0])], 0.35),
            (f"cutbook diff {pair[0]} {pair[1]}",
             cutbook + ["--store", store, "diff", str(pair[0]), str(pair[1])], 0.6),
        ]
        for _, argv, _ in commands:  # warm the file cache and .pyc files once
            _time(argv, env)
        times: dict[str, list[float]] = {name: [] for name, _, _ in commands}
        cpus: dict[str, list[float]] = {name: [] for name, _, _ in commands}
        for _ in range(args.repeat):
            for name, argv, _ in commands:
                wall, cpu = _time(argv, env)
                times[name].append(wall)
                cpus[name].append(cpu)
        base = statistics.median(times["python -c pass"])
        print(f"{'command':24s} {'median':>8s} {'min':>7s} {'CPU':>7s} {'target':>7s}  "
              f"{'minus python':>12s}  verdict")
        for name, _, target in commands:
            med, low = statistics.median(times[name]), min(times[name])
            verdict = "" if target is None else ("ok" if med <= target else "ABOVE TARGET")
            shown = "-" if target is None else f"{target:.2f}"
            print(f"{name:24s} {med:7.3f}s {low:6.3f}s {statistics.median(cpus[name]):6.3f}s "
                  f"{shown:>7s}  {med - base:11.3f}s  {verdict}")
        print(f"load average after: {os.getloadavg()[0]:.2f} (medians of {args.repeat} runs each, "
              "in rotation; CPU = user + system time of the process, which a busy machine "
              "inflates less than wall time; 'minus python' subtracts the bare interpreter)")


if __name__ == "__main__":
    main()
