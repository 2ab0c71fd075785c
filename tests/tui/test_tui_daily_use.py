"""The workspace at standard terminal sizes, and the daily-use defects of the terminal UI.

Every screen is opened at 80×24 (the default of most terminals) and at
120×36, and the widgets a user needs are checked for being on screen with
usable widths (their ``region``, not only that the app started). Each fixed
defect has its own test below the layout tests.

The demo store (workspace.demo) is built once per module; tests that write
work on a copy.
"""

from __future__ import annotations

import asyncio
import itertools
import re
from pathlib import Path

import networkx as nx
import numpy as np
import pytest

from tui_pilot import footer_keys, on_screen, settle, static_text, table_lines, walk, workspace
from workspace.services.store import open_workspace

SIZES = [(80, 24), (120, 36)]


def demo_run(store, method: str, ref: str) -> int:
    """The id of the demo's first run of ``method`` on ``ref`` (found with the plain runs listing;
    the demo's sweep adds later njw runs on the June version)."""
    from workspace.services.runs import list_runs

    return min(r["run"] for r in list_runs(store, ref) if r["method"] == method)


async def open_diff_of_may_and_june(app, pilot):
    """The Diff screen comparing the demo's first njw runs on versions 3 and 4, once it has settled."""
    a = demo_run(app.store, "njw", "velmora-bikes/stations@3")
    b = demo_run(app.store, "njw", "velmora-bikes/stations@4")
    app.diff_pick.update(a=a, b=b)
    await pilot.press("4")
    await settle(app, pilot)
    return app.screen


# --- every screen at 80x24 and 120x36 ------------------------------------------------------------------


@pytest.mark.parametrize("size", SIZES, ids=["80x24", "120x36"])
def test_tui_ledger_fits(demo_copy, size):
    """Ledger: run table across the width with readable version, k and started; outline and detail beside."""
    from workspace.services import runs as run_service
    from workspace.tui.widgets.paged_table import PagedTable

    store = open_workspace(demo_copy)
    try:  # a run with a two-digit k (the demo's own runs find at most 8 communities)
        wide_k = run_service.launch(store, run_service.prepare_run(
            store, "velmora-bikes/stations@4", method="njw", k=12))["run"]
    finally:
        store.dispose()

    async def go():
        async with workspace(demo_copy, size) as (app, pilot):
            screen = app.screen
            table = screen.query_one("#runs", PagedTable)
            on_screen(app, table, min_width=size[0] - 6, min_height=6)
            on_screen(app, screen.query_one("#outline"), min_width=24, min_height=6)
            on_screen(app, screen.query_one("#detail"), min_width=40, min_height=6)
            shown = table.shown_columns()
            for title in ("run", "status", "version", "method / grouping", "k", "modularity", "started"):
                assert title in shown, (title, shown)
            if size[0] >= 120:
                assert "parameter set" in shown and "conductance" in shown
            lines = table_lines(table)
            # a run with k = 12: k must read 12, not 1
            line = next(ln for ln in lines[1:] if ln.split()[0] == str(wide_k))
            assert "stations@4 " in line and " 12 " in line, line
            assert re.search(r"\d\d-\d\d \d\d:\d\d", line), line  # started
            keys = await footer_keys(app, pilot)
            for key in ("a", "b", "l", "f", "o", "?", "m"):
                assert key in keys, (key, keys)
            bar = screen.query_one("#screen-bar")
            on_screen(app, bar, min_width=size[0])
            assert "1 Ledger" in bar.plain and "demo.sqlite" in bar.plain

    asyncio.run(go())


@pytest.mark.parametrize("size", SIZES, ids=["80x24", "120x36"])
def test_tui_launch_fits(demo_path, size):
    """Launch: every field shows its input (not just the label); start button and progress on screen."""
    from textual.widgets import Button, Input, Select

    from workspace.tui.widgets.param_form import ParamForm

    async def go():
        async with workspace(demo_path, size) as (app, pilot):
            await pilot.press("2")
            await pilot.pause()
            screen = app.screen
            screen.query_one("#launch-version", Select).value = "velmora-bikes/stations@4"
            await pilot.pause()
            screen.query_one("#launch-method", Select).value = "njw"
            await settle(app, pilot)
            for wid in ("#launch-version", "#launch-set", "#launch-method"):
                on_screen(app, screen.query_one(wid), min_width=30)
            form = screen.query_one(ParamForm)
            k_box = form.query_one("#pf-k", Input)
            k_box.scroll_visible(animate=False)
            await pilot.pause()
            on_screen(app, k_box, min_width=20)
            start = screen.query_one("#launch-start", Button)
            start.scroll_visible(animate=False)
            await pilot.pause()
            on_screen(app, start, min_width=8)
            on_screen(app, screen.query_one("#run-state"), min_width=30)
            on_screen(app, screen.query_one("#launch-progress-pane"), min_height=5)
            keys = await footer_keys(app, pilot)
            assert "^r" in keys and "?" in keys or "f1" in keys
            # every text box of the form is one line, like the rest: a taller, bordered box (the
            # "sweep k" one was) reads as the focused field while the focus is elsewhere
            boxes = list(screen.query_one("#launch-form-pane").query(Input))
            assert {b.id for b in boxes} >= {"pf-k", "launch-seed", "launch-sweep-k", "launch-sweep-on"}
            tall = [b.id for b in boxes if b.region.height != 1 and b.region.height != 0]
            assert not tall, f"text boxes taller than one line: {tall}"
            assert not isinstance(app.focused, Input)     # arriving on Launch types into no box

    asyncio.run(go())


@pytest.mark.parametrize("size", SIZES, ids=["80x24", "120x36"])
def test_tui_spectrum_fits(demo_path, size):
    """Spectrum: the plot across the width, the sizes chart reachable, keys in the footer."""
    from workspace.tui.widgets.charts import SizeHistogram, SpectrumPlot

    async def go():
        async with workspace(demo_path, size) as (app, pilot):
            app.current_run = demo_run(app.store, "njw", "velmora-bikes/stations@4")
            await pilot.press("3")
            await settle(app, pilot)
            screen = app.screen
            plot = screen.query_one(SpectrumPlot)
            on_screen(app, plot, min_width=size[0] - 6, min_height=10)
            assert "the run found k = 8" in plot.render().plain
            hist = screen.query_one(SizeHistogram)
            hist.scroll_visible(animate=False)
            await pilot.pause()
            on_screen(app, hist, min_width=size[0] // 2 - 6, min_height=3)
            on_screen(app, screen.query_one("#spectrum-summary"), min_width=40)
            for key in ("[", "]", "?"):
                assert key in (await footer_keys(app, pilot))

    asyncio.run(go())


@pytest.mark.parametrize("size", SIZES, ids=["80x24", "120x36"])
def test_tui_spectrum_lists_a_communitys_members(demo_path, size):
    """Spectrum: the Members pane lists the largest community first, every node the stored membership
    puts there (numpy over the stored labels), named by the node table's first text attribute;
    choosing another community and ctrl+l (next attribute, then ids only) follow."""
    import numpy as np
    from textual.widgets import Select

    from workspace.services import nodes, runs
    from workspace.tui.widgets.paged_table import PagedTable

    async def go():
        async with workspace(demo_path, size) as (app, pilot):
            run = demo_run(app.store, "njw", "velmora-bikes/stations@4")
            app.current_run = run
            await pilot.press("3")
            await settle(app, pilot)
            screen = app.screen
            table = screen.query_one("#members-table", PagedTable)
            table.scroll_visible(animate=False, top=True)
            await pilot.pause()
            on_screen(app, table, min_width=30, min_height=5)
            on_screen(app, screen.query_one("#members-community", Select), min_width=20)
            ids, labels, _ = runs.load_membership(app.store, run)
            sizes = np.bincount(labels)
            biggest = int(np.argmax(sizes))   # the demo's largest community is unique
            assert sorted(np.bincount(labels))[-1] > sorted(np.bincount(labels))[-2]
            rows = [table.row_at(i) for i in range(table.row_count)]
            assert [r["node"] for r in rows] == ids[labels == biggest].tolist()
            names = dict(nodes.node_values(app.store, "velmora-bikes/stations@4", screen.label_attrs[0])["nodes"])
            assert all(r["label"] == names[r["node"]] for r in rows)
            assert table.shown_columns()[:2] == ["node", screen.label_attrs[0]]
            # another community, then ctrl+l: the run's membership is not read from the store again
            loads = []
            real_load = runs.load_membership
            runs.load_membership = lambda *a, **kw: (loads.append(a[1:]), real_load(*a, **kw))[1]
            try:
                other = int(np.argmin(sizes))
                screen.query_one("#members-community", Select).value = other
                await settle(app, pilot)
                assert [table.row_at(i)["node"] for i in range(table.row_count)] == ids[labels == other].tolist()
                # ctrl+l steps through the text attributes, then ids only
                for expected in [*screen.label_attrs[1:], None]:
                    table.focus()
                    await pilot.press("ctrl+l")
                    await settle(app, pilot)
                    assert screen.label_by == expected
                assert table.shown_columns() == ["node"]
            finally:
                runs.load_membership = real_load
            assert loads == []

    asyncio.run(go())


@pytest.mark.parametrize("size", SIZES, ids=["80x24", "120x36"])
def test_tui_diff_counts_of_million_node_communities_are_shown_whole(demo_path, size):
    """Matched communities of a 10M-node network hold 1.25M nodes each: the overlap and size cells
    show every digit (they were cut to ``12499…``), and all six columns still fit."""
    from workspace.tui.widgets.paged_table import PagedTable

    async def go():
        async with workspace(demo_path, size) as (app, pilot):
            screen = await open_diff_of_may_and_june(app, pilot)
            big = dict(screen.result)
            big["matches"] = [dict(m, overlap=1_249_902 + i, size_a=1_250_144 + i, size_b=1_250_035 + i)
                              for i, m in enumerate(screen.result["matches"])]
            screen.show_result(big)
            await settle(app, pilot)
            matches = screen.query_one("#diff-matches", PagedTable)
            matches.scroll_visible(animate=False, top=True)
            await pilot.pause()
            assert matches.shown_columns() == ["A", "B", "overlap", "Jaccard", "size A", "size B"]
            first = matches.row_at(int(matches.scroll_y))
            line = "".join(seg.text for seg in matches.render_line(1))
            assert "…" not in line
            assert all(str(first[key]) in line for key in ("overlap", "size_a", "size_b"))

    asyncio.run(go())


@pytest.mark.parametrize("size", SIZES, ids=["80x24", "120x36"])
def test_tui_diff_scores_name_an_attached_run_without_wrapping(demo_path, size):
    """The Scores pane's lines for the two sides fit the pane at both sizes with an attached run on
    one side (its label followed the run id on one line, which wrapped at 120x36)."""

    async def go():
        async with workspace(demo_path, size) as (app, pilot):
            a = demo_run(app.store, "attached", "velmora-bikes/stations@4")
            b = demo_run(app.store, "njw", "velmora-bikes/stations@4")
            app.diff_pick.update(a=a, b=b)
            await pilot.press("4")
            await settle(app, pilot)
            scores = app.screen.query_one("#diff-scores")
            lines = static_text(scores).splitlines()[:6]
            assert lines[0].split() == ["A", "run", str(a), "k", "=", "8"]
            assert lines[1].strip() == "⇲ planning-districts" and lines[3].split()[:3] == ["B", "run", str(b)]
            assert lines[4].strip() == "njw"
            assert all(len(line) <= scores.content_region.width for line in lines)

    asyncio.run(go())


@pytest.mark.parametrize("size", SIZES, ids=["80x24", "120x36"])
def test_tui_diff_fits(demo_path, size):
    """Diff: matches with all columns, events, moved nodes and contingency each usable (stacked at 80)."""
    from textual.widgets import Input

    from workspace.tui.widgets.charts import HeatTable
    from workspace.tui.widgets.paged_table import PagedTable

    async def go():
        async with workspace(demo_path, size) as (app, pilot):
            screen = await open_diff_of_may_and_june(app, pilot)
            assert screen.result is not None
            for wid in ("#diff-a", "#diff-b", "#diff-nodes"):
                on_screen(app, screen.query_one(wid, ), min_width=8)
            matches = screen.query_one("#diff-matches", PagedTable)
            events = screen.query_one("#diff-events")
            moved = screen.query_one("#diff-moved", PagedTable)
            heat = screen.query_one(HeatTable)
            for widget, width in ((screen.query_one("#diff-scores"), 28), (matches, 34), (events, 30),
                                  (moved, 30), (heat, 30)):
                widget.scroll_visible(animate=False, top=True)
                await pilot.pause()
                on_screen(app, widget, min_width=width)
            assert matches.shown_columns() == ["A", "B", "overlap", "Jaccard", "size A", "size B"]
            assert moved.row_count > 0 and moved.size.height >= 3
            search = screen.query_one("#diff-search", Input)
            search.scroll_visible(animate=False, top=True)
            await pilot.pause()
            on_screen(app, search, min_width=20)
            # event lines are not cut at the right edge: each fits the pane
            width = events.region.width
            assert all(len(ln) <= width for ln in static_text(events).splitlines())
            keys = await footer_keys(app, pilot)
            assert "^r" in keys and "^f" in keys

    asyncio.run(go())


@pytest.mark.parametrize("size", SIZES, ids=["80x24", "120x36"])
def test_tui_lookup_fits(demo_path, size):
    """Node lookup: network and node boxes and the runs table usable."""
    from textual.widgets import Select

    from workspace.tui.widgets.paged_table import PagedTable

    async def go():
        async with workspace(demo_path, size) as (app, pilot):
            await pilot.press("5")
            await pilot.pause()
            screen = app.screen
            screen.query_one("#lookup-network", Select).value = "velmora-bikes/stations"
            await pilot.pause()
            await pilot.press(*"LW-01", "enter")
            await settle(app, pilot)
            on_screen(app, screen.query_one("#lookup-network"), min_width=22)
            on_screen(app, screen.query_one("#lookup-node"), min_width=20)
            table = screen.query_one("#lookup-runs", PagedTable)
            on_screen(app, table, min_width=size[0] - 6, min_height=5)
            assert table.shown_columns()[:5] == ["run", "version", "method / grouping", "k", "community"]
            assert "^f" in (await footer_keys(app, pilot))

    asyncio.run(go())


def test_tui_ledger_side_by_side_when_wide(demo_path):
    """From 160 columns (here 200×50) outline, runs and detail sit side by side, all full height."""

    async def go():
        async with workspace(demo_path, (200, 50)) as (app, pilot):
            outline, runs, detail = (app.screen.query_one(f"#{w}-pane") for w in ("outline", "runs", "detail"))
            assert outline.region.right <= runs.region.x and runs.region.right <= detail.region.x
            for pane in (outline, runs, detail):
                assert pane.region.height >= 50 - 2 - 1
            assert runs.region.width >= 90 and detail.region.width >= 60

    asyncio.run(go())


def test_tui_layout_follows_a_resize(demo_path):
    """Shrinking the terminal while on another screen: the Ledger comes back stacked for the new size."""

    async def go():
        async with workspace(demo_path, (120, 36)) as (app, pilot):
            assert app.screen.has_class("-wide")
            await pilot.press("4")
            await pilot.pause()
            await pilot.resize_terminal(80, 24)
            await pilot.pause()
            await pilot.press("escape", "1")
            await settle(app, pilot)
            assert app.screen.has_class("-narrow") and app.screen.has_class("-short")
            on_screen(app, app.screen.query_one("#runs"), min_width=74, min_height=6)

    asyncio.run(go())


def test_tui_new_screen_has_its_size_classes_from_the_first_frame(demo_path):
    """A screen opened for the first time is laid out for the terminal at once (not one frame late)."""

    async def go():
        async with workspace(demo_path, (80, 24)) as (app, pilot):
            for name in ("launch", "spectrum", "diff", "lookup"):
                app.action_goto(name)
                screen = app.workspace_screens[name]
                assert screen.has_class("-narrow") and screen.has_class("-short"), (name, screen.classes)
                assert not screen.has_class("-wide") and not screen.has_class("-tall")
                await pilot.pause()

    asyncio.run(go())


def test_tui_maximise_a_pane(demo_path):
    """`m` makes the pane holding the focus fill the screen (top bar and footer stay); `m` again restores."""

    async def go():
        async with workspace(demo_path, (80, 24)) as (app, pilot):
            runs_pane = app.screen.query_one("#runs-pane")
            before = runs_pane.region.height
            await pilot.press("m")
            await pilot.pause()
            assert app.screen.maximized is runs_pane
            assert runs_pane.region.height >= 24 - 2 - 1 > before
            assert app.screen.query_one("#screen-bar").region.height == 1
            assert (await footer_keys(app, pilot))
            await pilot.press("m")
            await pilot.pause()
            assert app.screen.maximized is None
            await pilot.press("m")
            await pilot.pause()
            assert app.screen.maximized is runs_pane
            await pilot.press("escape")  # esc restores too
            await pilot.pause()
            assert app.screen.maximized is None

    asyncio.run(go())


# --- item 2: launch here and the detail pane follow the outline row ------------------------------------------


def _add_karate(path: Path) -> None:
    """Zachary's karate club (shipped with networkx) as a network with no runs: velmora-bikes/karate@1."""
    from workspace.services.networks import import_network

    f = path.parent / "karate.csv"
    with open(f, "w", encoding="utf-8") as fh:
        fh.write("source,target\n")
        for u, v in nx.karate_club_graph().edges():
            fh.write(f"m{u:02d},m{v:02d}\n")
    store = open_workspace(path)
    try:
        import_network(store, f, project="velmora-bikes", network="karate")
    finally:
        store.dispose()


def test_tui_launch_here_on_a_network_without_runs(demo_copy):
    """`l` on a network row with no runs opens Launch on that network's newest version, not another one."""
    from textual.widgets import Select, Tree

    _add_karate(demo_copy)

    async def go():
        async with workspace(demo_copy) as (app, pilot):
            tree = app.screen.query_one("#outline", Tree)
            tree.focus()
            node = next(n for n in walk(tree.root) if (n.data or {}).get("network") == "velmora-bikes/karate"
                        and n.data.get("kind") == "network")
            tree.move_cursor(node)
            await settle(app, pilot)
            assert app.screen.runs_title.endswith("· 0")
            await pilot.press("l")
            await pilot.pause()
            assert app.screen.id == "launch"
            assert app.screen.query_one("#launch-version", Select).value == "velmora-bikes/karate@1"

    asyncio.run(go())


def test_tui_detail_follows_the_row_kind(demo_path):
    """Project and network rows show their own detail, not the run looked at before."""
    from textual.widgets import Tree

    from workspace.tui.widgets.detail import DetailPane

    async def go():
        async with workspace(demo_path) as (app, pilot):
            await settle(app, pilot)
            assert app.screen.query_one("#detail-pane").border_title.startswith("Run")
            tree = app.screen.query_one("#outline", Tree)
            tree.focus()
            for kind, title, expect in (("project", "Project", "orrin-hollow-lab"),
                                        ("network", "Network", "orrin-hollow-lab/co-working"),
                                        ("store", "Store", "velmora-bikes")):
                node = next(n for n in walk(tree.root) if (n.data or {}).get("kind", "store") == kind
                            and (kind == "store" or n.data.get("project") == "orrin-hollow-lab"))
                tree.move_cursor(node)
                await settle(app, pilot)
                assert app.screen.query_one("#detail-pane").border_title == title
                text = app.screen.query_one("#detail", DetailPane).plain
                assert expect in text and not text.startswith("Run ")

    asyncio.run(go())


# --- item 3: a failed diff clears the previous one ---------------------------------------------------------


def test_tui_failed_diff_clears_the_panels(demo_path):
    from textual.widgets import Input

    from workspace.tui.widgets.charts import HeatTable
    from workspace.tui.widgets.paged_table import PagedTable

    async def go():
        async with workspace(demo_path) as (app, pilot):
            app.diff_pick.update(a=demo_run(app.store, "njw", "velmora-bikes/stations@3"),
                                 b=demo_run(app.store, "njw", "velmora-bikes/stations@4"))
            await pilot.press("4")
            await settle(app, pilot)
            screen = app.screen
            assert screen.query_one("#diff-matches", PagedTable).row_count > 0
            assert screen.query_one("#diff-moved", PagedTable).row_count > 0
            screen.query_one("#diff-b", Input).value = "999"
            await pilot.press("ctrl+r")
            await settle(app, pilot)
            assert "no run 999" in static_text(screen.query_one("#diff-scores"))
            assert screen.query_one("#diff-matches", PagedTable).row_count == 0
            assert screen.query_one("#diff-moved", PagedTable).row_count == 0
            assert static_text(screen.query_one("#diff-events")) == ""
            assert screen.query_one(HeatTable).table is None
            assert screen.query_one("#diff-moved-pane").border_title == "Moved nodes"

    asyncio.run(go())


# --- item 4: palette pick while on the diff screen ----------------------------------------------------------


@pytest.mark.parametrize("size", SIZES, ids=["80x24", "120x36"])
def test_tui_diff_names_moved_nodes_by_the_node_table(demo_path, size):
    """Moved nodes carry the first text attribute of the node table beside the id (the demo's
    station names); ctrl+l steps through the text attributes and back to ids only; the search
    box matches names too. Expected names are read from the demo scenario's own node table."""
    from textual.widgets import Input

    from workspace.services import nodes
    from workspace.tui.widgets.charts import HeatTable
    from workspace.tui.widgets.paged_table import PagedTable

    async def go():
        async with workspace(demo_path, size) as (app, pilot):
            screen = await open_diff_of_may_and_june(app, pilot)
            moved = screen.query_one("#diff-moved", PagedTable)
            text_attrs = [c["name"] for c in nodes.show_node_table(app.store, "velmora-bikes/stations@4")
                          ["table"]["columns"] if c["type"] == "text"]
            assert screen.label_attrs[: len(text_attrs)] == text_attrs and screen.label_by == text_attrs[0]
            names = dict(nodes.node_values(app.store, "velmora-bikes/stations@4", text_attrs[0])["nodes"])
            rows = [moved.row_at(i) for i in range(moved.row_count)]
            assert rows and all(r["label"] == names.get(r["node"], r["node"]) for r in rows)
            assert moved.shown_columns()[:2] == ["node", text_attrs[0]]
            moved.scroll_visible(animate=False, top=True)
            await pilot.pause()
            on_screen(app, moved, min_width=30)
            # the contingency beside the wider moved pane keeps whole lines (columns left out, not wrapped)
            heat = screen.query_one(HeatTable)
            lines = heat.render().plain.splitlines()
            assert lines[0].rstrip().endswith("size") and all(len(ln) <= heat.size.width for ln in lines[:-1])
            # searching a station name finds its row
            target = rows[0]
            screen.query_one("#diff-search", Input).value = target["label"]
            await settle(app, pilot)
            assert moved.row_count >= 1 and all(target["label"].lower() in moved.row_at(i)["label"].lower()
                                                for i in range(moved.row_count))
            screen.query_one("#diff-search", Input).value = ""
            await settle(app, pilot)
            # ctrl+l: every text attribute in turn, then ids only
            for expected in [*screen.label_attrs[1:], None]:
                screen.query_one("#diff-moved", PagedTable).focus()
                await pilot.press("ctrl+l")
                await settle(app, pilot)
                assert screen.label_by == expected
            assert "label" not in [c.key for c in moved.columns]
            assert moved.shown_columns()[0] == "node"

    asyncio.run(go())


def test_tui_palette_pick_applies_on_the_diff_screen(demo_path):
    from textual.widgets import Input

    async def go():
        async with workspace(demo_path) as (app, pilot):
            await pilot.press("4")
            await pilot.pause()
            a = demo_run(app.store, "fiedler", "velmora-bikes/stations@1")
            b = demo_run(app.store, "fiedler", "velmora-bikes/stations@4")
            app.pick("a", a)  # what the palette's "Diff side A = run N" calls
            await pilot.pause()
            assert app.screen.query_one("#diff-a", Input).value == str(a)
            app.pick("b", b)
            await settle(app, pilot)
            assert app.screen.query_one("#diff-b", Input).value == str(b)
            assert app.screen.result is not None and app.screen.result["a"]["run"] == a

    asyncio.run(go())


# --- item 5: lookup focus, network choice runs the typed id, no pooled labels -----------------------------


def test_tui_lookup_focus_and_network_choice(demo_path):
    from textual.widgets import Input, Select

    from workspace.tui.widgets.paged_table import PagedTable

    async def go():
        async with workspace(demo_path) as (app, pilot):
            await pilot.press("5")
            await pilot.pause()
            screen = app.screen
            # two networks in the demo: none is chosen, so the focus starts on the network choice
            assert screen.query_one("#lookup-network", Select).value is Select.NULL
            assert app.focused is screen.query_one("#lookup-network", Select)
            screen.query_one("#lookup-node", Input).value = "LW-01"
            screen.query_one("#lookup-network", Select).value = "velmora-bikes/stations"
            await settle(app, pilot)
            assert screen.result is not None and screen.result["node"] == "LW-01"
            summary = static_text(screen.query_one("#lookup-summary"))
            assert "communities [" not in summary and "own way" in summary
            assert screen.query_one("#lookup-runs", PagedTable).row_count == len(screen.result["runs"])

    asyncio.run(go())


def test_tui_lookup_takes_a_station_name(demo_path):
    """Lookup by the name people know (the demo's node table names each station): the node found, its
    node data row, and the same runs as a lookup by its id."""
    from textual.widgets import Input, Select

    from workspace.services import runs as runs_service
    from workspace.tui.widgets.paged_table import PagedTable

    async def go():
        async with workspace(demo_path) as (app, pilot):
            await pilot.press("5")
            await pilot.pause()
            screen = app.screen
            screen.query_one("#lookup-network", Select).value = "velmora-bikes/stations"
            await settle(app, pilot)
            box = screen.query_one("#lookup-node", Input)
            box.focus()
            box.value = "lantern wharf 1"
            await pilot.press("enter")
            await settle(app, pilot)
            assert screen.result["node"] == "LW-01" and screen.result["found_by"]["value"] == "Lantern Wharf 1"
            summary = static_text(screen.query_one("#lookup-summary"))
            assert "found by name 'Lantern Wharf 1'" in summary and "district Lantern Wharf" in summary
            by_id = runs_service.where_node(app.store, "LW-01", "velmora-bikes/stations")
            assert screen.query_one("#lookup-runs", PagedTable).row_count == len(by_id["runs"])

    asyncio.run(go())


# --- item 6: header, current screen, enter, keys help, text filter, newest run ------------------------------


def test_tui_header_marks_store_and_screen(demo_path):
    from workspace.tui import palette

    async def go():
        async with workspace(demo_path) as (app, pilot):
            for key, name in (("1", "Ledger"), ("4", "Diff"), ("5", "Lookup")):
                await pilot.press("escape", key)  # escape: out of any text box, so digits switch screens
                await pilot.pause()
                bar = app.screen.query_one("#screen-bar")
                text = bar.content
                marked = [text.plain[s.start:s.end] for s in text.spans if palette.ACCENT in str(s.style)]
                assert marked == [f" {key} {name} "]
                assert str(demo_path.name) in text.plain

    asyncio.run(go())


def test_tui_footer_marks_the_screen(demo_path):
    """The footer starts with the current screen's name, inside the screen at 80 columns."""
    from textual.widgets._footer import FooterLabel

    async def go():
        async with workspace(demo_path, (80, 24)) as (app, pilot):
            for key, name in (("1", "Ledger"), ("2", "Launch"), ("3", "Spectrum"), ("4", "Diff"),
                              ("5", "Node lookup")):
                await pilot.press("escape", key)
                await settle(app, pilot)
                label = app.screen.query_one("FooterLabel.footer-screen", FooterLabel)
                assert str(label.content).strip() == name
                assert label.region.x == 0 and label.region.width >= len(name)

    asyncio.run(go())


def test_tui_enter_opens_the_run(demo_path):
    from workspace.tui.widgets.paged_table import PagedTable

    async def go():
        async with workspace(demo_path) as (app, pilot):
            table = app.screen.query_one("#runs", PagedTable)
            await pilot.press("down", "down")
            await pilot.pause()
            run = table.current_row["run"]
            await pilot.press("enter")
            await settle(app, pilot)
            assert app.screen.id == "spectrum" and app.screen.run_id == run

    asyncio.run(go())


@pytest.mark.parametrize("key", ["question_mark", "f1"])
def test_tui_keys_help(demo_path, key):
    from workspace.tui.widgets.chrome import KeysHelp

    async def go():
        async with workspace(demo_path) as (app, pilot):
            await pilot.press(key)
            await pilot.pause()
            assert isinstance(app.screen, KeysHelp)
            text = app.screen.text.plain
            for line in ("Spectrum", "Side A", "Filter", "Sort", "Ledger", "Quit", "Max"):
                assert line in text
            await pilot.press("escape")
            await pilot.pause()
            assert app.screen.id == "ledger"

    asyncio.run(go())


def test_tui_text_filter(demo_path):
    """`f` then words: only matching runs stay (checked against the plain runs listing filtered here)."""
    from workspace.services.runs import list_runs
    from workspace.tui.widgets.paged_table import PagedTable

    async def go():
        async with workspace(demo_path) as (app, pilot):
            await pilot.press("f")
            await pilot.press(*"njw stations@4")
            await pilot.press("enter")
            await settle(app, pilot)
            table = app.screen.query_one("#runs", PagedTable)
            expected = [r["run"] for r in list_runs(app.store)
                        if r["method"] == "njw" and r["ref"] == "velmora-bikes/stations@4"]
            assert [r["run"] for r in table._source.fetch(0, 100)] == expected
            assert app.focused is table and "“njw stations@4”" in app.screen.runs_title
            # o sorts by the next column (modularity, largest first)
            await pilot.press("o")
            await settle(app, pilot)
            assert app.screen.sort == "modularity" and "by modularity ↓" in app.screen.runs_title
            await pilot.press("O")
            await settle(app, pilot)
            assert "by modularity ↑" in app.screen.runs_title
            q = [r["quality"]["modularity"] for r in table._source.fetch(0, 100)]
            assert q == sorted(q)
            # F shows one status at a time; every demo run is done
            await pilot.press("F")
            await settle(app, pilot)
            assert "done only" in app.screen.runs_title and table.row_count == len(expected)
            # esc in the filter box goes back to the list; emptying the box lifts the filter
            await pilot.press("f", *["backspace"] * 20, "escape")
            await settle(app, pilot)
            assert app.focused is table and "“" not in app.screen.runs_title
            assert table.row_count == len(list_runs(app.store))

    asyncio.run(go())


def test_tui_spectrum_of_a_missing_run_clears_the_charts(demo_path):
    """Item 3's sibling on the Spectrum screen: a run that cannot be opened leaves no old bars behind."""
    from textual.widgets import Input

    from workspace.tui.widgets.charts import SizeHistogram, SpectrumPlot

    async def go():
        async with workspace(demo_path) as (app, pilot):
            app.current_run = None  # no run looked at yet
            await pilot.press("3")
            await pilot.pause()
            assert app.focused is app.screen.query_one("#spectrum-run", Input)  # so the focus is in the run box
            await pilot.press(*str(demo_run(app.store, "njw", "velmora-bikes/stations@4")), "enter")
            await settle(app, pilot)
            assert "█" in app.screen.query_one(SpectrumPlot).render().plain
            box = app.screen.query_one("#spectrum-run", Input)
            box.value = "999"
            await pilot.press("ctrl+f", "enter")
            await settle(app, pilot)
            assert "no run 999" in static_text(app.screen.query_one("#spectrum-summary"))
            assert "█" not in app.screen.query_one(SpectrumPlot).render().plain
            assert "█" not in app.screen.query_one(SizeHistogram).render().plain

    asyncio.run(go())


def test_tui_step_past_the_newest_run(demo_path):
    from workspace.services.runs import list_runs

    async def go():
        async with workspace(demo_path) as (app, pilot):
            newest = list_runs(app.store, limit=1)[0]["run"]
            app.current_run = newest
            await pilot.press("3")
            await settle(app, pilot)
            await pilot.press("right_square_bracket")
            await pilot.pause()
            assert app.screen.run_id == newest
            assert f"run {newest} is the newest run in the store" in app.shown[-1][1]
            assert not any(f"no run {newest + 1}" in m for _, m in app.shown)
            await pilot.press("left_square_bracket")
            await settle(app, pilot)
            assert app.screen.run_id == newest - 1

    asyncio.run(go())


# --- item 7: cosmetics ------------------------------------------------------------------------------------------


def test_tui_run_end_line_says_it_once():
    from workspace.tui.messages import run_end_line

    assert run_end_line(13, "cancelled", "run 13 cancelled") == "run 13 cancelled"
    assert run_end_line(13, "failed", "k must be at least 2") == "run 13 failed: k must be at least 2"
    assert run_end_line(13, "done", "anything") == "run 13 done"


def test_tui_idle_progress_bar_is_hidden(demo_path):
    from textual.widgets import ProgressBar

    async def go():
        async with workspace(demo_path, (80, 24)) as (app, pilot):
            await pilot.press("2")
            await pilot.pause()
            bar = app.screen.query_one("#run-bar", ProgressBar)
            assert not bar.has_class("-busy") and bar.region.width == 0  # nothing pulses while idle
            # a run in progress with unknown length shows its elapsed time, never "--%"
            from workspace.tui.messages import RunProgress

            app.screen.started_at = __import__("time").monotonic() - 2.0
            app.screen.post_message(RunProgress("eigensolve", 40, None))
            await pilot.pause()
            stage = static_text(app.screen.query_one("#run-stage"))
            assert "40 matvecs" in stage and "s elapsed" in stage and "--%" not in stage
            assert bar.has_class("-busy")
            app.screen.started_at = None

    asyncio.run(go())


def test_tui_plural_and_event_wording():
    from workspace.tui.screens.diff import _event_line

    # a split has the size of its A community only; a death only an A side
    split = {"kind": "split", "a": [1], "b": [1, 7], "size_a": 20, "parts": []}
    assert _event_line(split) == "split A1 → B1, B7  20 nodes"
    death = {"kind": "dissolved", "a": [4], "b": [], "size_a": 6}
    assert _event_line(death) == "dissolved A4  6 nodes"
    assert "—" not in _event_line(split) + _event_line(death)
    # a community kept at its size says the size once (communities of 1.25M nodes wrapped the line
    # in the 37-column Events pane at 120x36); a changed size says both
    kept = {"kind": "kept", "a": [0], "b": [0], "size_a": 1249902, "size_b": 1249902, "jaccard": 1.0}
    assert _event_line(kept) == "kept A0 → B0  1249902 nodes  J 1.00"
    grown = dict(kept, size_b=1250144, jaccard=0.99)
    assert _event_line(grown) == "kept A0 → B0  1249902 → 1250144 nodes  J 0.99"


def test_tui_outline_plural(demo_path):
    from textual.widgets import Tree

    async def go():
        async with workspace(demo_path) as (app, pilot):
            tree = app.screen.query_one("#outline", Tree)
            labels = [str(n.label) for n in walk(tree.root)]
            assert not any(re.search(r"\b1 (sets|runs)\b", lb) for lb in labels), labels
            assert any(re.search(r"\b1 run\b", lb) for lb in labels)
            # project rows carry the name only (the set count, cut to "1 s" at 80x24, is in the detail pane)
            assert "orrin-hollow-lab" in labels and "velmora-bikes" in labels, labels

    asyncio.run(go())


def test_tui_rounding_noise_reads_zero():
    """Values at machine-epsilon scale are the rounding of an exact 0 (common practice: |x| < 1e-12)."""
    from workspace.tui.widgets.charts import SpectrumPlot, _fmt
    from workspace.tui.widgets.detail import fmt_value

    assert fmt_value(4.441e-16) == "0" and fmt_value(-2.71e-14) == "0"
    assert fmt_value(0.1234567) == "0.1235" and fmt_value(12.0) == "12"
    # solver residuals are real small measurements and keep their value
    assert fmt_value(5.8e-14, snap=False) == "5.80e-14"
    assert _fmt(-2.71e-14, 1.9) == "0" and _fmt(0.5, 1.9) == "0.5"
    plot = SpectrumPlot()
    plot.values = [-2.71e-14, 0.4, 1.9]
    plot.gap_k = 2  # the run's own eigengap suggestion
    # at any width the gap sentence stays whole (on its own line when the marker sits far right)
    assert "eigengap λ2→λ3 = 1.5  ⇒  k = 2" in plot.render().plain
    # the Laplacian of a connected graph has eigenvalue 0 once (Chung 1997, Spectral Graph Theory, lemma 1.7):
    # its rounding must not make a negative axis
    assert "e-14" not in plot.render().plain


def test_tui_size_bins_leave_out_empty_ranges():
    from workspace.tui.widgets.charts import size_bins

    sizes = [1] * 30 + [9000]  # one giant community and thirty singletons
    bins = size_bins(sizes)
    assert bins == [("1", 30), ("8192–16383", 1)]
    assert sum(n for _, n in bins) == len(sizes)


def test_tui_detail_in_words(demo_path):
    """The run detail reads in words: no raw keys, no Python list text, no ISO 'T'."""
    from workspace.services.runs import show_run
    from workspace.tui.widgets.detail import run_text

    store = open_workspace(demo_path)
    try:
        run = show_run(store, demo_run(store, "njw", "velmora-bikes/stations@4"))
    finally:
        store.dispose()
    text = run_text(run).plain
    for raw in ("wall_time_s", "k_requested", "residual_norm_max", "conductance_per_community", "[0.", "', '"):
        assert raw not in text, raw
    assert "wall time (s)" in text and "largest residual" in text
    assert not re.search(r"\d{4}-\d\d-\d\dT\d\d", text)


def test_tui_version_detail_lists_changes_in_words(demo_path):
    """A version's changes from its parent: edges as `u — v`, weight changes as `old → new`, true counts."""
    from workspace.services.networks import show_version
    from workspace.tui.widgets.detail import version_text

    store = open_workspace(demo_path)
    try:
        v = show_version(store, "velmora-bikes/stations@4")
    finally:
        store.dispose()
    text = version_text(v).plain
    ch = v["changes_from_parent"]
    assert "listings" not in text and "[" not in text
    u, w = ch["listings"]["edges_added"][0][:2]
    assert f"{u} — {w}" in text
    a, b, old, new = ch["listings"]["weights_changed"][0]
    assert re.search(rf"{a} — {b}  \S+ → \S+", text)
    assert f"… {ch['edges_added'] - 6} more" in text


def test_tui_version_detail_of_large_versions_names_the_command_instead(demo_path):
    """Above a bound on the two versions' edges the detail does not compare them (two 10M-node
    versions: 35 s, 11 GB in the UI process); it says so and names the command, never 'first
    version'. Under the bound (the demo at the UI's own setting) the change is there."""
    from workspace.services.networks import show_version
    from workspace.tui.widgets.detail import version_text

    store = open_workspace(demo_path)
    try:
        small = show_version(store, "velmora-bikes/stations@4")      # the default bound, the Ledger's
        large = show_version(store, "velmora-bikes/stations@4", changes_up_to_edges=1000)
    finally:
        store.dispose()
    assert small["changes_from_parent"]["edges_added"] > 0 and "changes_not_computed" not in small
    assert large["changes_from_parent"] is None and large["parent"] == "velmora-bikes/stations@3"
    text = version_text(large).plain
    assert "cutbook changes velmora-bikes/stations@3 velmora-bikes/stations@4" in text
    assert "first version" not in text


# --- item 8: our own palette, colour-vision-deficiency friendly ------------------------------------------------

# Machado, Oliveira & Fernandes (2009), "A physiologically-based model for simulation of color vision
# deficiency", IEEE TVCG 15(6): full-severity matrices on linear RGB (values recalled from memory).
CVD = {
    "deuteranopia": [[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413], [-0.011820, 0.042940, 0.968881]],
    "protanopia": [[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216], [-0.003882, -0.048116, 1.051998]],
    "tritanopia": [[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.147602], [0.004733, 0.691367, 0.303900]],
}


def _lab(hex_colour: str, matrix=None) -> np.ndarray:
    """sRGB -> (simulated) -> CIELAB (D65), per the sRGB standard IEC 61966-2-1 and CIE 1976."""
    c = np.array([int(hex_colour[i:i + 2], 16) / 255 for i in (1, 3, 5)])
    lin = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    if matrix is not None:
        lin = np.clip(np.array(matrix) @ lin, 0, 1)
    xyz = np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]]) @ lin
    t = xyz / np.array([0.95047, 1.0, 1.08883])
    f = np.where(t > 0.008856, np.cbrt(t), 7.787 * t + 16 / 116)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


def _contrast(fg: str, bg: str) -> float:
    """WCAG 2.1 contrast ratio (relative luminance from linear sRGB)."""
    def lum(h):
        c = np.array([int(h[i:i + 2], 16) / 255 for i in (1, 3, 5)])
        lin = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
        return float(lin @ [0.2126, 0.7152, 0.0722])
    a, b = sorted((lum(fg), lum(bg)), reverse=True)
    return (a + 0.05) / (b + 0.05)


@pytest.mark.parametrize("vision", [None, *CVD], ids=["typical", *CVD])
def test_tui_palette_colours_stay_apart(vision):
    """Community and status colours stay at least ΔE*ab 10 apart under each simulated deficiency
    (ΔE ≈ 2.3 is a just-noticeable difference — Sharma 2003, Digital Color Imaging Handbook)."""
    from workspace.tui import palette

    matrix = CVD.get(vision) if vision else None
    for group in (palette.COMMUNITY, tuple(palette.STATUS.values())):
        distinct = tuple(dict.fromkeys(group))
        for a, b in itertools.combinations(distinct, 2):
            d = float(np.linalg.norm(_lab(a, matrix) - _lab(b, matrix)))
            assert d >= 10.0, (vision, a, b, d)


def test_tui_palette_is_readable_and_in_one_place():
    """Text colours reach WCAG 2.1 contrast 4.5:1 on the ground; no colour literal lives outside the palette."""
    from workspace.tui import palette

    for colour in (palette.TEXT, palette.DIM, palette.PRIMARY, palette.ACCENT, *palette.STATUS.values(),
                   *palette.COMMUNITY):
        assert _contrast(colour, palette.GROUND) >= 4.5, colour
    root = Path(__file__).resolve().parents[2] / "workspace" / "tui"
    offenders = [str(p.relative_to(root)) for p in root.rglob("*") if p.suffix in (".py", ".tcss")
                 and p.name != "palette.py" and re.search(r"#[0-9a-fA-F]{6}\b", p.read_text(encoding="utf-8"))]
    assert offenders == []


# --- the update loop: the Updates screen ---------------------------------------------------------------------

@pytest.mark.parametrize("size", SIZES, ids=["80x24", "120x36"])
def test_tui_updates_fits_and_shows_the_report(demo_path, size):
    """Updates (key 7): the list (latest first) and the change report of the row under the cursor, usable at
    80×24 and 120×36; the report's moved nodes are the diff's, with both sides in one numbering."""
    from workspace.services import diffs, nodes, tracking
    from workspace.tui.widgets.paged_table import PagedTable

    store = open_workspace(demo_path)
    try:
        latest = tracking.list_updates(store)[0]
        st = latest["sets"][0]
        d = diffs.diff_runs(store, st["previous_run"], st["run"])
        first_text = next(c["name"] for c in nodes.show_node_table(store, latest["ref"])["table"]["columns"]
                          if c["type"] == "text")
        names = dict(nodes.node_values(store, latest["ref"], first_text)["nodes"])
    finally:
        store.dispose()

    async def go():
        async with workspace(demo_path, size) as (app, pilot):
            await pilot.press("7")
            await settle(app, pilot)
            screen = app.screen
            assert screen.id == "updates"
            table = screen.query_one("#updates-table", PagedTable)
            on_screen(app, table, min_width=size[0] - 6, min_height=3)
            assert table.shown_columns()[:6] == ["upd", "version", "tracked set", "status", "ARI", "moved"]
            assert table.current_row["update_id"] == latest["update"]
            await settle(app, pilot)
            report = screen.query_one("#updates-report")
            on_screen(app, screen.query_one("#updates-report-pane"), min_width=size[0] - 2, min_height=8)
            text = static_text(report)
            assert f"run {st['run']} against run {st['previous_run']}" in text
            assert "merged" in text  # Cinder Bridge reopens: the two riding areas merge again
            shown_a = dict(map(tuple, d["shown_labels"]["a"]))
            shown_b = dict(map(tuple, d["shown_labels"]["b"]))
            # each moved node with its name from the node table (first text attribute) and both sides
            for m in d["moved_nodes"]:
                name = re.escape(names[m["node"]])
                assert re.search(rf"{m['node']}\s+{name}\s+{shown_a[m['from']]} → {shown_b[m['to']]}", text)
                assert shown_a[m["from"]] != shown_b[m["to"]]
            assert "^r" in (await footer_keys(app, pilot))

    asyncio.run(go())


def test_tui_updates_opens_the_diff_of_the_set(demo_path):
    """ctrl+d on an update opens the Diff screen on the previous run (A) and the new run (B)."""
    from textual.widgets import Input

    async def go():
        async with workspace(demo_path, (80, 24)) as (app, pilot):
            await pilot.press("7")
            await settle(app, pilot)
            st = app.screen.report["sets"][0]
            await pilot.press("ctrl+d")
            await settle(app, pilot)
            assert app.screen.id == "diff"
            assert app.screen.query_one("#diff-a", Input).value == str(st["previous_run"])
            assert app.screen.query_one("#diff-b", Input).value == str(st["run"])

    asyncio.run(go())


def test_tui_updates_tracks_and_untracks_a_set(demo_copy):
    """The Updates screen's top row: a parameter set typed in the box is tracked on the chosen network
    (enter), and ctrl+o stops tracking it; the store's list says the same."""
    from textual.widgets import Input, Select

    from workspace.services import tracking

    async def go():
        async with workspace(demo_copy, (80, 24)) as (app, pilot):
            await pilot.press("7")
            await settle(app, pilot)
            screen = app.screen
            on_screen(app, screen.query_one("#updates-network"), min_width=20)
            on_screen(app, screen.query_one("#updates-params"), min_width=20)
            assert screen.query_one("#updates-network", Select).value == "velmora-bikes/stations"
            await pilot.press("ctrl+f")  # the set box, from the table
            assert app.focused is screen.query_one("#updates-params", Input)
            await pilot.press(*"velmora-bikes/two-banks", "enter")
            await settle(app, pilot)
            names = [t["params"] for t in tracking.list_tracked(app.store, "velmora-bikes/stations")["tracked"]]
            assert names == ["velmora-bikes/districts@1", "velmora-bikes/two-banks@1"]
            assert "two-banks@1" in static_text(screen.query_one("#updates-tracked"))
            await pilot.press("ctrl+o")
            await settle(app, pilot)
            names = [t["params"] for t in tracking.list_tracked(app.store, "velmora-bikes/stations")["tracked"]]
            assert names == ["velmora-bikes/districts@1"]
            on_screen(app, screen.query_one("#updates-network"), min_width=20)

    asyncio.run(go())
