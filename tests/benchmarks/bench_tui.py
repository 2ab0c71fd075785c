"""Benchmark: the Ledger's runs list over a store holding 10 000 runs.

Fills a fresh store with one tiny network version and N finished runs
(bulk-inserted rows through workspace.store; a benchmark-only shortcut — the
services would compute each run), then drives the terminal workspace headless
(App.run_test) and measures:

* time to first paint: from creating the app (its module already imported, as
  ``cutbook ui`` has done by then; the import time is printed apart) until the
  runs list shows its first rows;
* time to scroll to the end: from pressing End on the list until the last run
  (the oldest) is on screen.

Target: < 1 s each. As a same-run reference it also times one page query
(list_runs with limit=200) and reports both figures as multiples of it.

Run:  python tests/benchmarks/bench_tui.py [--runs 10000]
"""

from __future__ import annotations

import argparse
import asyncio
import json
import os
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
os.environ.setdefault("TEXTUAL_ANIMATIONS", "none")


def fill_store(path: Path, n_runs: int) -> None:
    import numpy as np
    from sqlalchemy import insert

    from workspace.domain import GraphData, membership_hash
    from workspace.services.store import open_workspace
    from workspace.store import repo
    from workspace.store.schema import Run

    store = open_workspace(path)
    try:
        graph = GraphData(node_ids=np.array(["a", "b", "c", "d"]), edge_u=np.array([0, 1, 2], dtype=np.int64),
                          edge_v=np.array([1, 2, 3], dtype=np.int64), weight=np.ones(3))
        labels = np.array([0, 0, 1, 1], dtype=np.int8)
        with store.write() as s:
            proj = repo.get_or_create_project(s, "bench")
            net = repo.get_or_create_network(s, proj, "tiny")
            v = repo.add_version(s, net, graph, parent=None, content_hash=graph.content_hash(), message="bench",
                                 source_name="tiny.csv", source_format="csv", policy_json="{}", report_json="{}")
            blob = repo.put_array(s, labels)
            now = repo.utcnow()
            methods = ("njw", "bethe", "fiedler", "louvain")
            rows = [{"version_id": v.id, "kind": "computed", "method": methods[i % 4], "label": "",
                     "params_json": "{}", "k_requested": "2", "seed": i, "repeats": 1, "status": "done",
                     "started_at": now, "finished_at": now, "k": 2, "membership_blob": blob,
                     "membership_hash": membership_hash(labels), "quality_json": json.dumps({"modularity": 0.1}),
                     "diagnostics_json": "{}", "warnings_json": "[]", "provenance_json": "{}"}
                    for i in range(n_runs)]
            s.execute(insert(Run), rows)
    finally:
        store.dispose()


async def drive(path: Path, n_runs: int) -> dict[str, float]:
    from workspace.services.store import open_workspace

    t_import = time.perf_counter()
    from workspace.tui.app import CutbookApp
    from workspace.tui.widgets.paged_table import PagedTable

    import_s = time.perf_counter() - t_import

    store = open_workspace(path)
    try:
        t0 = time.perf_counter()
        app = CutbookApp(store)
        async with app.run_test(size=(160, 48)) as pilot:
            table = None
            while True:
                try:
                    table = app.screen.query_one("#runs", PagedTable)
                except Exception:  # noqa: BLE001 - the screen is still composing
                    table = None
                if table is not None and table.row_count == n_runs and table.visible_rows():
                    break
                await pilot.pause(0.001)
            await pilot.pause()  # let the compositor paint the frame
            first_paint = time.perf_counter() - t0
            assert table.visible_rows()[0]["run"] == n_runs, "newest run first"
            table.focus()
            await pilot.pause()
            t1 = time.perf_counter()
            await pilot.press("end")
            while not (table.visible_rows() and table.visible_rows()[-1]["run"] == 1):
                await pilot.pause(0.001)
            await pilot.pause()
            to_end = time.perf_counter() - t1
            fetches = table.fetches
        return {"first_paint_s": first_paint, "scroll_to_end_s": to_end, "page_fetches": fetches,
                "import_s": import_s}
    finally:
        store.dispose()


def page_reference(path: Path) -> float:
    from workspace.services.runs import list_runs
    from workspace.services.store import open_workspace

    store = open_workspace(path)
    try:
        list_runs(store, limit=200, offset=0)
        t = time.perf_counter()
        for _ in range(5):
            list_runs(store, limit=200, offset=5000)
        return (time.perf_counter() - t) / 5
    finally:
        store.dispose()


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=10_000)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory(prefix="cutbook-bench-tui-") as tmp:
        path = Path(tmp) / "store.sqlite"
        t = time.perf_counter()
        fill_store(path, args.runs)
        print(f"filled store with {args.runs} runs in {time.perf_counter() - t:.2f} s")
        ref = page_reference(path)
        res = asyncio.run(drive(path, args.runs))
    print(f"reference: one page of 200 runs from SQL        {ref * 1000:8.1f} ms")
    print(f"time to first paint of the runs list           {res['first_paint_s'] * 1000:8.1f} ms "
          f"({res['first_paint_s'] / ref:.1f}x a page query)  target < 1000 ms "
          f"{'OK' if res['first_paint_s'] < 1 else 'MISSED'}")
    print(f"time to scroll to the end (End key)            {res['scroll_to_end_s'] * 1000:8.1f} ms "
          f"({res['scroll_to_end_s'] / ref:.1f}x a page query)  target < 1000 ms "
          f"{'OK' if res['scroll_to_end_s'] < 1 else 'MISSED'}")
    print(f"(importing the app module beforehand took {res['import_s'] * 1000:.0f} ms; not in the figures above)")
    print(f"pages fetched by the list: {res['page_fetches']} (of {-(-args.runs // 200)} in the store)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
