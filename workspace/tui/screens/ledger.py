"""Ledger: the outline of projects, networks and versions; the runs of the chosen scope; a detail pane.

The outline is small (one row per version) and lives in a tree. Runs can be
many: they are listed by a :class:`PagedTable` that reads one SQL page at a
time. Moving the cursor shows what is recorded on the version or run in the
detail pane (loaded in a worker thread so large versions never freeze keys).
"""

from __future__ import annotations

from typing import Any

from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import Screen
from textual.widgets import Footer, Static, Tree

from workspace.tui.messages import StoreChanged
from workspace.tui.widgets.detail import STATUS_STYLE, DetailPane, run_text, version_text
from workspace.tui.widgets.paged_table import CallbackSource, Column, PagedTable

STATUS_FILTERS = (None, "done", "running", "failed", "cancelled", "interrupted")


def _what(value, row) -> str:
    if row["kind"] == "attached":
        return f"⇲ {row.get('label') or 'attached'}"
    return row["method"]


RUN_COLUMNS = [
    Column("run", "run", 6, "right"),
    Column("status", "status", 11, style=lambda r: STATUS_STYLE.get(r["status"])),
    Column("ref", "version", 0, format=lambda v, r: (v or "").split("/", 1)[-1]),  # project is in the outline
    Column("method", "method / grouping", 19, format=_what),
    Column("k", "k", 3, "right"),
    Column("created", "started", 11, format=lambda v, r: (v or "").replace("T", " ")[5:16]),
]


class LedgerScreen(Screen):
    """Browse what the store holds."""

    TITLE = "Ledger"
    BINDINGS = [
        Binding("s", "spectrum", "Spectrum", tooltip="eigenvalues and community sizes of the run"),
        Binding("a", "pick('a')", "Side A", tooltip="use the run as side A of a diff"),
        Binding("b", "pick('b')", "Side B", tooltip="use the run as side B of a diff"),
        Binding("l", "launch_here", "Launch here", tooltip="launch a run on this version"),
        Binding("w", "where", "Where node", tooltip="find a node across runs and versions"),
        Binding("f", "cycle_filter", "Filter", tooltip="show only runs of one status (cycles)"),
        Binding("r", "refresh", "Refresh"),
    ]

    def __init__(self) -> None:
        super().__init__(id="ledger")
        self.scope: str | None = None
        self.status_filter: str | None = None
        self.selected_version: str | None = None
        self.selected_network: str | None = None

    def compose(self) -> ComposeResult:
        with Horizontal(id="ledger-body"):
            with Vertical(id="outline-pane", classes="pane"):
                yield Static("Outline", classes="pane-title")
                yield Tree("store", id="outline")
            with Vertical(id="runs-pane", classes="pane"):
                yield Static("Runs", classes="pane-title", id="runs-title")
                yield PagedTable(RUN_COLUMNS, id="runs", empty_text="no runs here yet — press l to launch one")
            with Vertical(id="detail-pane", classes="pane"):
                yield Static("Detail", classes="pane-title", id="detail-title")
                yield DetailPane(id="detail")
        yield Footer()

    # --- data ---------------------------------------------------------------------------------------

    def on_mount(self) -> None:
        self.load_outline()
        self.set_runs_scope(None)
        self.query_one("#runs", PagedTable).focus()

    def load_outline(self) -> None:
        from workspace.services.browse import outline

        tree = self.query_one("#outline", Tree)
        tree.clear()
        root = tree.root
        root.set_label(Text("all projects", style="bold"))
        root.data = {"scope": None}
        try:
            projects = outline(self.app.store)
        except Exception as exc:  # noqa: BLE001 - shown, never raised over the screen
            self.app.report(exc)
            return
        for p in projects:
            pnode = root.add(Text.assemble((p["project"], "bold"), (f"  {p['param_sets']} sets", "#7d8794")),
                             data={"scope": p["project"], "project": p["project"]}, expand=True)
            for n in p["networks"]:
                nnode = pnode.add(n["network"], data={"scope": n["ref"], "project": p["project"],
                                                       "network": n["ref"]}, expand=True)
                for v in n["versions"]:
                    label = Text.assemble((f"@{v['version']}", "#e0a34a"), f" {v['nodes']}n",
                                          (f" · {v['runs']} run{'s' if v['runs'] != 1 else ''}", "#7d8794"))
                    nnode.add_leaf(label, data={"scope": v["ref"], "version": v["ref"], "project": p["project"],
                                                "network": n["ref"]})
        root.expand()

    def runs_source(self, scope: str | None, status: str | None) -> CallbackSource:
        from workspace.services.browse import count_runs_in
        from workspace.services.runs import list_runs

        store = self.app.store
        return CallbackSource(lambda: count_runs_in(store, scope, status=status),
                              lambda off, lim: list_runs(store, scope, limit=lim, offset=off, status=status))

    def set_runs_scope(self, scope: str | None) -> None:
        self.scope = scope
        table = self.query_one("#runs", PagedTable)
        try:
            table.set_source(self.runs_source(scope, self.status_filter))
        except Exception as exc:  # noqa: BLE001
            self.app.report(exc)
            return
        self._retitle()

    def _retitle(self) -> None:
        table = self.query_one("#runs", PagedTable)
        where = self.scope or "all projects"
        status = f" · {self.status_filter} only" if self.status_filter else ""
        self.query_one("#runs-title", Static).update(f"Runs in {where}{status} · {table.row_count}")

    # --- events -------------------------------------------------------------------------------------

    @on(Tree.NodeHighlighted, "#outline")
    def _outline_moved(self, event: Tree.NodeHighlighted) -> None:
        data = event.node.data or {}
        self.selected_version = data.get("version")
        self.selected_network = data.get("network")
        if data.get("scope") != self.scope:
            self.set_runs_scope(data.get("scope"))
        if data.get("version"):
            self.load_version(data["version"])

    @on(PagedTable.Highlighted, "#runs")
    def _run_moved(self, event: PagedTable.Highlighted) -> None:
        if event.row is not None:
            self.app.current_run = event.row["run"]
            if event.table.has_focus:  # moving in the outline shows the version, not its newest run
                self.load_run(event.row["run"])

    def on_descendant_focus(self, event) -> None:
        table = self.query_one("#runs", PagedTable)
        if event.widget is table and table.current_row is not None:
            self.load_run(table.current_row["run"])

    @on(PagedTable.Chosen, "#runs")
    def _run_chosen(self, event: PagedTable.Chosen) -> None:
        self.query_one("#detail", DetailPane).focus()

    @work(thread=True, exclusive=True, group="ledger-detail", exit_on_error=False)
    def load_run(self, run_id: int) -> None:
        from workspace.services.runs import show_run

        try:
            run = show_run(self.app.store, run_id)
        except Exception as exc:  # noqa: BLE001
            self.app.call_from_thread(self.app.report, exc)
            return
        self.app.call_from_thread(self._show_detail, "Run", run_text(run))

    @work(thread=True, exclusive=True, group="ledger-detail", exit_on_error=False)
    def load_version(self, ref: str) -> None:
        from workspace.services.networks import show_version

        try:
            v = show_version(self.app.store, ref)
        except Exception as exc:  # noqa: BLE001
            self.app.call_from_thread(self.app.report, exc)
            return
        self.app.call_from_thread(self._show_detail, "Version", version_text(v))

    def _show_detail(self, title: str, text: Text) -> None:
        self.query_one("#detail-title", Static).update(title)
        self.query_one("#detail", DetailPane).show(text)

    def on_store_changed(self, _message: StoreChanged) -> None:
        self.action_refresh()

    # --- actions ------------------------------------------------------------------------------------

    def _current_run(self) -> dict[str, Any] | None:
        return self.query_one("#runs", PagedTable).current_row

    def action_spectrum(self) -> None:
        row = self._current_run()
        if row is None:
            self.notify("choose a run first", severity="warning")
            return
        self.app.current_run = row["run"]
        self.app.action_goto("spectrum")

    def action_pick(self, side: str) -> None:
        row = self._current_run()
        if row is None:
            self.notify("choose a run first", severity="warning")
            return
        self.app.diff_pick[side] = row["run"]
        other = self.app.diff_pick["b" if side == "a" else "a"]
        msg = f"run {row['run']} is diff side {side.upper()}"
        if other is not None:
            msg += " — press 4 to compare"
        self.notify(msg)

    def action_launch_here(self) -> None:
        row = self._current_run()
        ref = self.selected_version or (row["ref"] if row else None)
        self.app.launch_version = ref
        self.app.action_goto("launch")

    def action_where(self) -> None:
        row = self._current_run()
        self.app.lookup_network = self.selected_network or (row["network"] if row else None)
        self.app.action_goto("lookup")

    def action_cycle_filter(self) -> None:
        i = STATUS_FILTERS.index(self.status_filter)
        self.status_filter = STATUS_FILTERS[(i + 1) % len(STATUS_FILTERS)]
        self.set_runs_scope(self.scope)

    def action_refresh(self) -> None:
        table = self.query_one("#runs", PagedTable)
        try:
            table.reload()
        except Exception as exc:  # noqa: BLE001
            self.app.report(exc)
        self._retitle()
        tree = self.query_one("#outline", Tree)
        line = tree.cursor_line
        self.load_outline()
        tree.move_cursor_to_line(max(line, 0)) if line >= 0 else None
