"""Pilot tests of the Sweep screen: plotted values equal the stored ones, the layout fits 80x24,
a row opens its run, and a sweep launched from Launch can be stopped mid-way (finished runs kept).
Outside references: networkx (karate club, modularity)."""

from __future__ import annotations

import asyncio

import networkx as nx
import pytest

from graphs import import_adjacency
from tui_pilot import wait_until, workspace
from workspace.services.store import open_workspace


@pytest.fixture
def karate_sweep(tmp_path):
    from workspace.services import sweeps

    path = tmp_path / "s.sqlite"
    store = open_workspace(path)
    G = nx.karate_club_graph()       # Zachary (1977) as shipped by networkx
    A = nx.to_scipy_sparse_array(G, nodelist=range(34), weight="weight")
    import_adjacency(store, A, tmp_path, project="club", network="karate", names=[f"m{i:02d}" for i in range(34)])
    out = sweeps.sweep(store, sweeps.prepare_sweep(store, "club/karate", method="njw", ks="2..7", seeds=3))
    store.dispose()
    return path, out, G


@pytest.mark.slow
@pytest.mark.parametrize("size", [(80, 24), (120, 36)])
def test_sweep_screen_plots_the_stored_values(karate_sweep, size):
    from textual.widgets import DataTable

    from workspace.services.runs import load_membership
    from workspace.tui.screens.sweep import SweepPlot

    path, out, G = karate_sweep

    async def go():
        async with workspace(path, size) as (app, pilot):
            await pilot.press("6")
            await pilot.pause()
            screen = app.screen
            assert screen.id == "sweep" and screen.sweep_id == out["sweep"]
            plot = screen.query_one(SweepPlot)
            # what is drawn is what the store holds (services.sweeps.show_sweep) ...
            assert plot.values["k"] == [p["k"] for p in out["points"]]
            assert plot.values["modularity"] == [p["modularity"] for p in out["points"]]
            assert plot.values["ari_mean"] == [p["ari_mean"] for p in out["points"]]
            assert plot.values["recommended"] == out["recommended_k"] is not None
            # ... and the stored modularity is networkx.community.modularity of each run's membership
            for p in out["points"]:
                ids, labels, _ = load_membership(app.store, p["run"])
                comms = [{int(x[1:]) for x in ids[labels == c].tolist()} for c in range(labels.max() + 1)]
                assert p["modularity"] == pytest.approx(nx.community.modularity(G, comms, weight="weight"),
                                                        abs=1e-12)
            # the chart fits the terminal: every drawn line no wider than the pane
            lines = plot.render().plain.splitlines()
            assert max(len(line) for line in lines) <= plot.size.width <= size[0]
            assert "▲" in lines[plot.chart_height + 1]
            table = screen.query_one("#sweep-table", DataTable)
            assert table.row_count == len(out["points"])
            # a sweep shown: the focus is on its table, not in the id box (keys act on the screen),
            # and the plot above it stays in view (the body is not scrolled to the table)
            assert app.focused is table
            assert screen.query_one("#sweep-body").scroll_y == 0
            await pilot.press("down")
            await pilot.press("enter")
            await pilot.pause()
            assert app.screen.id == "spectrum" and app.current_run == out["points"][1]["run"]
            # back on the sweep, a screen key switches screens instead of typing into the id box
            await pilot.press("6")
            await pilot.pause()
            assert app.screen.id == "sweep" and app.focused is table
            await pilot.press("2")
            await pilot.pause()
            assert app.screen.id == "launch"
            assert screen.query_one("#sweep-id").value == str(out["sweep"])

    asyncio.run(go())


def test_sweep_table_names_the_varied_parameter_and_drops_the_column_without_one(karate_sweep, tmp_path):
    """The measures table has a column of the varied parameter's values, headed by its name, only for
    a sweep that varies one (a k-only sweep showed a 'value' column of dashes)."""
    from textual.widgets import DataTable

    from workspace.services import sweeps

    path, out, _ = karate_sweep
    store = open_workspace(path)
    try:
        varied = sweeps.sweep(store, sweeps.prepare_sweep(store, "club/karate", method="regularized", ks="2..3",
                                                          vary="tau=0.5,2"))
    finally:
        store.dispose()

    async def go():
        async with workspace(path, (120, 36)) as (app, pilot):
            await pilot.press("6")
            await pilot.pause()
            screen = app.screen
            screen.show_sweep(out["sweep"])
            await pilot.pause()
            table = screen.query_one("#sweep-table", DataTable)
            heads = [str(c.label) for c in table.columns.values()]
            assert heads[:3] == ["k", "run", "modularity"] and "value" not in heads
            assert [table.get_row_at(i)[1] for i in range(table.row_count)] == [str(p["run"]) for p in out["points"]]
            screen.show_sweep(varied["sweep"])
            await pilot.pause()
            heads = [str(c.label) for c in table.columns.values()]
            assert heads[:3] == ["k", "tau", "run"]
            assert [table.get_row_at(i)[1] for i in range(table.row_count)] == \
                [screen_fmt(p["value"]) for p in varied["points"]]

    from workspace.tui.screens.sweep import _fmt as screen_fmt

    asyncio.run(go())


@pytest.mark.slow
def test_launch_a_sweep_and_stop_it_mid_way(tmp_path):
    from textual.widgets import Input, Select

    from workspace.services.sweeps import list_sweeps, show_sweep
    from workspace.spectral.generators import planted_partition

    path = tmp_path / "big.sqlite"
    store = open_workspace(path)
    A, _ = planted_partition(6000, 4, c_in=24.0, c_out=3.0, seed=1)
    import_adjacency(store, A, tmp_path, project="big", network="planted")
    store.dispose()

    async def go():
        async with workspace(path) as (app, pilot):
            await pilot.press("2")
            await pilot.pause()
            launch = app.screen
            launch.query_one("#launch-version", Select).value = "big/planted@1"
            await pilot.pause()
            launch.query_one("#launch-method", Select).value = "njw"
            await pilot.pause()
            await app.workers.wait_for_complete()
            await pilot.pause()
            launch.query_one("#launch-sweep-k", Input).value = "2..20"
            launch.query_one("#launch-repeats", Input).value = "3"
            await pilot.press("ctrl+w")
            await wait_until(pilot, lambda: app.screen.id == "sweep" and app.screen.job is not None, 20,
                             f"the sweep screen to start the job {getattr(app, 'shown', [])} {app.screen.id}")
            screen = app.screen
            await wait_until(pilot, lambda: screen.job.last_progress is not None
                             and screen.job.last_progress["done"] >= 2, 180, "two finished tasks")
            assert not screen.job.finished
            assert "/57 tasks" in str(screen.query_one("#sweep-state").render())
            await pilot.press("ctrl+t")
            await wait_until(pilot, lambda: screen.job.finished, 90, "the sweep to stop")
            await pilot.pause()
            assert screen.job.status == "cancelled", screen.job.message
            sw = show_sweep(app.store, screen.job.sweep_id)
            assert sw["status"] == "cancelled" and sw["tasks"]["done"] >= 2 and sw["tasks"]["running"] == 0
            assert list_sweeps(app.store)[0]["status"] == "cancelled"
            # the screen shows the sweep with its finished k
            assert screen.sweep_id == screen.job.sweep_id and len(screen.points) >= 2

    asyncio.run(go())


@pytest.mark.slow
def test_launch_a_sweep_on_a_dask_cluster_of_two_worker_processes(tmp_path):
    """'sweep on' = 2: the sweep's own process starts a Dask LocalCluster of two worker processes."""
    from textual.widgets import Input, Select

    from workspace.services import runs
    from workspace.services.sweeps import show_sweep

    path = tmp_path / "karate.sqlite"
    store = open_workspace(path)
    # Zachary (1977) karate club as shipped by networkx
    G = nx.karate_club_graph()
    import_adjacency(store, nx.to_scipy_sparse_array(G, nodelist=range(34), weight="weight"), tmp_path,
                     project="club", network="karate")
    store.dispose()

    async def go():
        async with workspace(path) as (app, pilot):
            await pilot.press("2")
            await pilot.pause()
            launch = app.screen
            launch.query_one("#launch-version", Select).value = "club/karate@1"
            await pilot.pause()
            launch.query_one("#launch-method", Select).value = "njw"
            await pilot.pause()
            await app.workers.wait_for_complete()
            await pilot.pause()
            launch.query_one("#launch-sweep-k", Input).value = "2..4"
            launch.query_one("#launch-repeats", Input).value = "2"
            launch.query_one("#launch-sweep-on", Input).value = "2"
            await pilot.press("ctrl+w")
            await wait_until(pilot, lambda: app.screen.id == "sweep" and app.screen.job is not None, 20,
                             "the sweep screen to start the job")
            screen = app.screen
            await wait_until(pilot, lambda: "Dask on this machine (2 worker processes)"
                             in str(screen.query_one("#sweep-state").render()), 20,
                             "the sweep screen to say where the tasks run")
            await wait_until(pilot, lambda: screen.job.finished, 180, "the sweep to finish")
            await pilot.pause()
            assert screen.job.status == "done", screen.job.message
            sw = show_sweep(app.store, screen.job.sweep_id)
            assert sw["tasks"]["done"] == 6
            for p in sw["points"]:
                prov = runs.show_run(app.store, p["run"])["provenance"]
                assert prov["executor"]["kind"] == "dask" and prov["executor"]["workers"] == 2
            return sw

    on_dask = asyncio.run(go())
    # the same sweep on the local executor gives the same memberships (membership hashes)
    from workspace.services import sweeps

    store = open_workspace(path)
    try:
        local = sweeps.sweep(store, sweeps.prepare_sweep(store, "club/karate@1", method="njw", ks="2..4", seeds=2))
        hashes = lambda out: [runs.show_run(store, r)["membership_hash"] for p in out["points"] for r in p["runs"]]  # noqa: E731
        assert hashes(local) == hashes(on_dask)
    finally:
        store.dispose()
