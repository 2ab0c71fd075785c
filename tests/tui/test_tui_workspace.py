"""Pilot tests of the terminal workspace (Textual ``App.run_test``, headless).

They drive the app with keys the way a user would and read what the screens
show. Values on screen are checked against references outside the project
(networkx, scikit-learn, scipy), named beside each check.

The demo store (workspace.demo) is built once per module; tests that write
runs work on a copy of it.
"""

from __future__ import annotations

import asyncio
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp
from scipy.optimize import linear_sum_assignment
from sklearn.metrics import adjusted_rand_score

from tui_pilot import settle, static_text, toasts, wait_until, walk
from tui_pilot import workspace as _workspace
from workspace.services.store import open_workspace

SIZE = (160, 48)


def workspace(path: Path):
    """The app on ``path`` at this module's terminal size."""
    return _workspace(path, SIZE)


def demo_runs(demo_path: Path) -> dict[str, int]:
    import ast

    return ast.literal_eval(demo_path.with_suffix(".json").read_text())


def networkx_graph(store, ref: str) -> nx.Graph:
    from workspace.services.networks import load_graph

    _, g = load_graph(store, ref)
    G = nx.Graph()
    G.add_nodes_from(g.node_ids.tolist())
    for u, v, w in zip(g.edge_u.tolist(), g.edge_v.tolist(), g.weight.tolist()):
        G.add_edge(g.node_ids[u], g.node_ids[v], weight=w)
    return G


# --- browse ----------------------------------------------------------------------------------------


def test_tui_browse_to_a_run_shows_its_measures(demo_path):
    """Ledger: the runs list pages newest first; moving to a run shows its quality measures."""
    from workspace.services.runs import load_membership
    from workspace.tui.widgets.detail import DetailPane, fmt_value
    from workspace.tui.widgets.paged_table import PagedTable

    runs_by_key = demo_runs(demo_path)
    bethe_run = runs_by_key["modularity@4"]  # leading-eigenvector on the June network
    total = max(runs_by_key.values())

    async def go():
        async with workspace(demo_path) as (app, pilot):
            table = app.screen.query_one("#runs", PagedTable)
            assert table.row_count == total
            assert table.visible_rows()[0]["run"] == total  # newest first
            assert app.screen.runs_title == f"Runs in all projects · {total}"
            for _ in range(total - bethe_run):
                await pilot.press("down")
            await settle(app, pilot)
            assert table.current_row["run"] == bethe_run
            text = app.screen.query_one("#detail", DetailPane).plain
            ids, labels, _ = load_membership(app.store, bethe_run)
            G = networkx_graph(app.store, "velmora-bikes/stations@4")
            # networkx.algorithms.community.modularity (weighted) of the stored partition
            expected = nx.community.modularity(G, [set(ids[labels == c]) for c in np.unique(labels)],
                                               weight="weight")
            assert f"modularity" in text
            line = next(ln for ln in text.splitlines() if ln.strip().startswith("modularity"))
            assert line.split()[-1] == fmt_value(float(expected))
            assert "leading-eigenvector" in text and "Solver diagnostics" in text and "Provenance" in text
            assert any(ln.split() == ["communities", "8"] for ln in text.splitlines())   # the 8 districts (refined leading eigenvector, Newman 2006)
            # the outline narrows the list to one version
            tree = app.screen.query_one("#outline")
            tree.focus()
            node = next(n for n in walk(tree.root) if (n.data or {}).get("version") == "velmora-bikes/stations@4")
            tree.move_cursor(node)
            await settle(app, pilot)
            assert table.row_count == sum(1 for key in runs_by_key if key.endswith("@4")
                                          and not key.startswith("lab"))
            assert {r["ref"] for r in table.visible_rows()} == {"velmora-bikes/stations@4"}
            vtext = app.screen.query_one("#detail", DetailPane).plain
            assert "Import report" in vtext and "Change from parent" in vtext
            assert "velmora-bikes/stations@3" in vtext  # its parent

    asyncio.run(go())


def test_tui_spectrum_marks_the_largest_gap(demo_path):
    """Spectrum of a run: bars, the run's eigengap marked, and the histogram of community sizes."""
    from workspace.services.runs import show_run
    from workspace.tui.widgets.charts import SizeHistogram, SpectrumPlot

    run_id = demo_runs(demo_path)["districts@4"]

    async def go():
        async with workspace(demo_path) as (app, pilot):
            app.current_run = run_id
            await pilot.press("3")
            await settle(app, pilot)
            plot = app.screen.query_one(SpectrumPlot)
            shown = show_run(app.store, run_id)
            eig = shown["eigenvalues"]
            # the eigengap heuristic (von Luxburg 2007, section 8.3) recomputed with numpy here,
            # without the trivial first gap lambda_1 -> lambda_2
            k = int(np.argmax(np.diff(eig)[1:])) + 2
            assert shown["diagnostics"]["eigengap_suggestion"] == k
            rendered = plot.render().plain
            assert f"eigengap λ{k}→λ{k + 1}" in rendered and f"⇒  k = {k}" in rendered
            assert "█" in rendered
            hist = app.screen.query_one(SizeHistogram).render().plain
            sizes = [c["size"] for c in show_run(app.store, run_id)["communities"]]
            assert f"{max(sizes)}" in hist.splitlines()[1]  # largest community first

    asyncio.run(go())


# --- launch and cancel --------------------------------------------------------------------------------


def _karate_store(tmp_path) -> Path:
    """Zachary's karate club (shipped with networkx) imported as club/karate@1."""
    from workspace.services.networks import import_network

    f = tmp_path / "karate.csv"
    G = nx.karate_club_graph()
    with open(f, "w", encoding="utf-8") as fh:
        fh.write("source,target\n")
        for u, v in G.edges():
            fh.write(f"m{u:02d},m{v:02d}\n")
    path = tmp_path / "club.sqlite"
    store = open_workspace(path)
    try:
        import_network(store, f, project="club", network="karate")
    finally:
        store.dispose()
    return path


@pytest.mark.slow
def test_tui_launch_a_run_from_the_generated_form(tmp_path):
    """Launch: the form comes from the method's schema, validates inline, saves a set, and the run finishes."""
    from textual.widgets import Input, Label, Select

    from workspace.services.catalog import describe_methods
    from workspace.services.params import list_params
    from workspace.services.runs import list_runs, load_membership
    from workspace.tui.widgets.param_form import ParamForm

    path = _karate_store(tmp_path)

    async def go():
        async with workspace(path) as (app, pilot):
            await pilot.press("2")
            await pilot.pause()
            screen = app.screen
            screen.query_one("#launch-version", Select).value = "club/karate@1"
            await pilot.pause()
            screen.query_one("#launch-method", Select).value = "fiedler"
            await settle(app, pilot)
            form = screen.query_one(ParamForm)
            names = [str(lbl.content) for lbl in form.query(Label)]
            schema = describe_methods("fiedler")[0]["params"]
            assert names == ["k"] + [p["name"] for p in schema]
            # inline validation: k = 1 is refused with the schema's message
            k_box = form.query_one("#pf-k", Input)
            k_box.value = "1"
            await pilot.pause()
            assert form.error is not None and "k must be" in form.error
            assert "k must be" in static_text(form.query_one("#pf-error"))
            k_box.value = "2"
            await pilot.pause()
            assert form.error is None
            form.query_one("#pf-laplacian", Select).value = "unnormalized"
            form.query_one("#pf-split", Select).value = "sign"
            await pilot.pause()
            # save as a parameter set
            screen.query_one("#launch-save-name", Input).value = "halves"
            await pilot.press("ctrl+s")
            await pilot.pause()
            saved = list_params(app.store, "club")
            assert [p["ref"] for p in saved] == ["club/halves@1"]
            assert saved[0]["params"]["laplacian"] == "unnormalized" and saved[0]["params"]["split"] == "sign"
            # start and watch it finish
            await pilot.press("ctrl+r")
            await wait_until(pilot, lambda: app.job is not None and app.job.finished, 90, "the run to end")
            await settle(app, pilot)
            assert app.job.status == "done", app.job.message
            state = static_text(screen.query_one("#run-state"))
            assert f"run {app.job.run_id} done" in state
            assert "k = 2" in static_text(screen.query_one("#run-outcome"))
            runs = list_runs(app.store, "club/karate")
            assert runs[0]["status"] == "done" and runs[0]["run"] == app.job.run_id
            ids, labels, _ = load_membership(app.store, app.job.run_id)
            # networkx.linalg.algebraicconnectivity.fiedler_vector (unnormalized L): the sign split
            # must be the same partition (ARI == 1, sklearn.metrics.adjusted_rand_score)
            G = networkx_graph(app.store, "club/karate@1")
            fv = nx.fiedler_vector(G, normalized=False, method="tracemin_lu", seed=1)
            side = dict(zip(G.nodes(), fv > 0))
            assert adjusted_rand_score([side[n] for n in ids.tolist()], labels) == 1.0

    asyncio.run(go())


def _planted_store(tmp_path) -> Path:
    """A ~200k-node planted partition (workspace.spectral.generators) imported as big/planted@1."""
    from workspace.services.networks import import_network
    from workspace.spectral.generators import planted_partition

    A, _truth = planted_partition(200_000, 4, 12.0, 2.0, seed=3)
    U = sp.triu(A, 1).tocoo()
    f = tmp_path / "planted.csv"
    with open(f, "w", encoding="utf-8") as fh:
        fh.write("source,target\n")
        fh.write("\n".join(f"n{u},n{v}" for u, v in zip(U.row.tolist(), U.col.tolist())))
        fh.write("\n")
    path = tmp_path / "big.sqlite"
    store = open_workspace(path)
    try:
        import_network(store, f, project="big", network="planted")
    finally:
        store.dispose()
    return path


@pytest.mark.slow
def test_tui_cancel_a_running_run(tmp_path):
    """Stop (ctrl+t) while the solver iterates: the store records the run as cancelled; keys still work."""
    from textual.widgets import Select

    from workspace.services.runs import show_run
    from workspace.tui.widgets.param_form import ParamForm

    path = _planted_store(tmp_path)

    async def go():
        async with workspace(path) as (app, pilot):
            await pilot.press("2")
            await pilot.pause()
            screen = app.screen
            screen.query_one("#launch-version", Select).value = "big/planted@1"
            await pilot.pause()
            screen.query_one("#launch-method", Select).value = "njw"
            await settle(app, pilot)
            form = screen.query_one(ParamForm)
            # k = 32 on 200k nodes: a solve of many seconds (k = 4 finished in about one since the
            # engine got faster, sometimes before the stop key arrived); it is stopped early anyway
            form.query_one("#pf-k").value = "32"
            form.query_one("#pf-components", Select).value = "largest"
            await pilot.pause()
            assert form.error is None
            await pilot.press("ctrl+r")
            stage = screen.query_one("#run-stage")
            await wait_until(pilot, lambda: "matvecs" in static_text(stage) and app.job.run_id is not None
                             and not static_text(stage).rstrip().endswith(" 0 matvecs"), 120,
                             "the solver to report matvecs")
            assert not app.job.finished
            # the event loop is free while the child computes: the screen switches while the run is
            # still computing (no wall-clock limit here: timing belongs in tests/benchmarks)
            await pilot.press("1")
            await pilot.pause()
            assert app.screen.id == "ledger" and not app.job.finished
            await pilot.press("2")
            await pilot.pause()
            await pilot.press("ctrl+t")
            await wait_until(pilot, lambda: app.job.finished, 60, "the run to stop")
            await pilot.pause()
            assert app.job.status == "cancelled", app.job.message
            assert show_run(app.store, app.job.run_id)["status"] == "cancelled"
            assert "cancelled" in static_text(screen.query_one("#run-state"))

    asyncio.run(go())


# --- diff and node lookup ---------------------------------------------------------------------------


def _moved_by_hungarian(ids_a, la, ids_b, lb) -> set[str]:
    """Nodes (common to both) whose B community is not the one matched to their A community.

    Matching: maximum-overlap assignment with scipy.optimize.linear_sum_assignment (Hungarian
    method, Kuhn 1955) on the contingency table; common practice for aligning two partitions.
    """
    common = sorted(set(ids_a.tolist()) & set(ids_b.tolist()))
    a = dict(zip(ids_a.tolist(), la.tolist()))
    b = dict(zip(ids_b.tolist(), lb.tolist()))
    ra, rb = sorted(set(a[n] for n in common)), sorted(set(b[n] for n in common))
    C = np.zeros((len(ra), len(rb)), dtype=np.int64)
    for n in common:
        C[ra.index(a[n]), rb.index(b[n])] += 1
    rows, cols = linear_sum_assignment(-C)
    match = {ra[r]: rb[c] for r, c in zip(rows, cols)}
    return {n for n in common if match.get(a[n]) != b[n]}


def test_tui_diff_finds_a_moved_node(demo_path):
    """Diff of two versions' runs: the scores and the moved nodes, found with the search box."""
    from textual.widgets import Input

    from workspace.services.runs import load_membership
    from workspace.tui.widgets.charts import HeatTable
    from workspace.tui.widgets.detail import fmt_value
    from workspace.tui.widgets.paged_table import PagedTable

    ids = demo_runs(demo_path)
    run_a, run_b = ids["districts@3"], ids["districts@4"]

    async def go():
        async with workspace(demo_path) as (app, pilot):
            # pick the sides in the Ledger with a / b, then open the Diff
            table = app.screen.query_one("#runs", PagedTable)
            table.move_to(table.row_count - run_a)
            await pilot.press("a")
            table.move_to(table.row_count - run_b)
            await pilot.press("b")
            await pilot.press("4")
            await settle(app, pilot)
            screen = app.screen
            assert screen.result is not None, toasts(app)
            ia, la, _ = load_membership(app.store, run_a)
            ib, lb, _ = load_membership(app.store, run_b)
            common = sorted(set(ia.tolist()) & set(ib.tolist()))
            pa = dict(zip(ia.tolist(), la.tolist()))
            pb = dict(zip(ib.tolist(), lb.tolist()))
            # sklearn.metrics.adjusted_rand_score over the common nodes
            ari = adjusted_rand_score([pa[n] for n in common], [pb[n] for n in common])
            scores = static_text(screen.query_one("#diff-scores"))
            assert f"ARI               {fmt_value(float(ari))}" in scores
            expected_moved = _moved_by_hungarian(ia, la, ib, lb)
            assert expected_moved, "the scenario moves stations between these months"
            moved_table = screen.query_one("#diff-moved", PagedTable)
            assert moved_table.row_count == len(expected_moved)
            # find one moved node by typing part of its id
            target = sorted(expected_moved)[0]
            await pilot.press("ctrl+f")
            for ch in target:
                await pilot.press(ch)
            await pilot.pause()
            assert screen.query_one("#diff-search", Input).value == target
            rows = moved_table.visible_rows()
            assert [r["node"] for r in rows] == [target]
            assert rows[0]["from"] == pa[target] and rows[0]["to"] == pb[target]
            assert screen.query_one("#diff-moved-pane").border_title == f"Moved nodes · 1 of {len(expected_moved)}"
            heat = screen.query_one(HeatTable).render().plain
            assert "A \\ B" in heat
            # a missing run is an error in the UI, not a traceback
            screen.query_one("#diff-b", Input).value = "999"
            await pilot.press("ctrl+r")
            await settle(app, pilot)
            assert "no run 999" in toasts(app)
            assert app.is_running

    asyncio.run(go())


def test_tui_node_lookup_across_versions(demo_path):
    """Node lookup: a station that exists only from May on is absent in earlier versions."""
    from textual.widgets import Select

    from workspace.services.runs import load_membership
    from workspace.tui.widgets.paged_table import PagedTable

    async def go():
        async with workspace(demo_path) as (app, pilot):
            await pilot.press("5")
            await pilot.pause()
            screen = app.screen
            screen.query_one("#lookup-network", Select).value = "velmora-bikes/stations"
            await pilot.pause()
            for ch in "LW-01":
                await pilot.press(ch)
            await pilot.press("enter")
            await settle(app, pilot)
            summary = static_text(screen.query_one("#lookup-summary"))
            # the scenario opens the Lantern Wharf district (LW-*) in the third monthly version
            assert "present in versions @3, @4" in summary
            # what the node is: its row of the newest version's node table (the demo's July station file)
            from workspace.demo.scenario import UPDATE_MONTH, station_table

            row = next(r for r in station_table(UPDATE_MONTH) if r["station"] == "LW-01")
            assert f"node data of @5: name {row['name']}  district {row['district']}" in " ".join(summary.split("\n"))
            rows = screen.query_one("#lookup-runs", PagedTable)
            all_rows = rows._source.fetch(0, rows.row_count)
            assert {r["version"] for r in all_rows if not r["present"]} == {1, 2}
            for r in all_rows:
                if r["present"]:
                    node_ids, labels, _ = load_membership(app.store, r["run"])
                    pos = node_ids.tolist().index("LW-01")
                    assert r["community"] == int(labels[pos])
                    assert r["community_size"] == int((labels == labels[pos]).sum())

    asyncio.run(go())


def test_tui_quit_is_clean(demo_path):
    async def go():
        async with workspace(demo_path) as (app, pilot):
            await pilot.press("ctrl+q")
            await pilot.pause()
        assert app.return_code == 0

    asyncio.run(go())
