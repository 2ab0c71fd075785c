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
from textual.containers import Container
from textual.screen import Screen
from textual.widgets import Input, Tree

from workspace.tui import palette
from workspace.tui.messages import StoreChanged
from workspace.tui.widgets.chrome import Pane, ScreenBar, ScreenFooter
from workspace.tui.widgets.detail import (STATUS_STYLE, DetailPane, fmt_value, network_text, project_text, run_text,
                                          store_text, version_text)
from workspace.tui.widgets.paged_table import CallbackSource, Column, PagedTable

STATUS_FILTERS = (None, "done", "running", "failed", "cancelled", "interrupted")
#: the orders `o` steps through (keys of workspace.services.browse.ledger_runs)
SORT_CYCLE = ("run", "modularity", "conductance", "k", "version", "method", "status", "param_set")


def _what(value, row) -> str:
    if row["kind"] == "attached":
        return f"⇲ {row.get('label') or 'attached'}"
    return row["method"]


def _measure(name: str):
    return lambda v, r: fmt_value((r.get("quality") or {}).get(name))


RUN_COLUMNS = [
    Column("run", "run", 5, "right"),
    Column("status", "status", 11, style=lambda r: STATUS_STYLE.get(r["status"])),
    Column("ref", "version", 0, format=lambda v, r: (v or "").split("/", 1)[-1], min_width=12),  # project: outline
    Column("method", "method / grouping", 0, format=_what, min_width=19),
    Column("k", "k", 3, "right"),
    Column("modularity", "modularity", 10, "right", format=_measure("modularity"), drop=2),
    Column("conductance", "conductance", 11, "right", format=_measure("conductance"), drop=4),
    Column("param_set", "parameter set", 14, format=lambda v, r: (v or "—").split("/", 1)[-1], drop=3),
    Column("created", "started", 11, format=lambda v, r: (v or "").replace("T", " ")[5:16], drop=1),
    Column("by", "by", 9, format=lambda v, r: v or "—", drop=5),  # who started it (created_by)
]


class LedgerScreen(Screen):
    """Browse what the store holds."""

    TITLE = "Ledger"
    BINDINGS = [
        Binding("s", "spectrum", "Spectrum", show=False, tooltip="eigenvalues and community sizes of the run (enter too)"),
        Binding("a", "pick('a')", "Side A", tooltip="use the run as side A of a diff"),
        Binding("b", "pick('b')", "Side B", tooltip="use the run as side B of a diff"),
        Binding("l", "launch_here", "Launch", tooltip="launch a run on this version (a network: its newest)"),
        Binding("w", "where", "Where", tooltip="find a node across the runs and versions of this network"),
        Binding("f", "filter", "Filter", tooltip="type words to keep only matching runs (method, version, status, set)"),
        Binding("o", "sort", "Sort", tooltip="order runs by the next column (run, modularity, conductance, k …)"),
        Binding("O", "reverse", "Reverse", show=False, tooltip="reverse the order"),
        Binding("F", "cycle_status", "Status", show=False, tooltip="show only runs of one status (cycles)"),
        Binding("r", "refresh", "Refresh", show=False, tooltip="count runs and versions again"),
    ]

    def __init__(self) -> None:
        super().__init__(id="ledger")
        self.scope: str | None = None
        self.status_filter: str | None = None
        self.text_filter: str = ""
        self.sort: str = "run"
        self.descending: bool | None = None
        self.outline_data: dict[str, Any] = {"kind": "store"}
        self.projects: list[dict[str, Any]] = []
        self.detail_kind: str | None = None  # what the detail pane shows: store, project, network, version, run
        self._filter_timer = None

    def compose(self) -> ComposeResult:
        yield ScreenBar("ledger")
        with Container(id="ledger-body"):
            with Pane(title="Runs", id="runs-pane"):
                yield Input("", id="runs-filter", placeholder="filter: words to find (enter keeps, esc leaves)",
                            compact=True)
                yield PagedTable(RUN_COLUMNS, id="runs", empty_text="no runs here yet — press l to launch one")
            with Pane(title="Outline", id="outline-pane"):
                yield Tree("store", id="outline")
            with Pane(title="Detail", id="detail-pane"):
                yield DetailPane(id="detail")
        yield ScreenFooter("ledger")

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
        root.data = {"kind": "store", "scope": None}
        try:
            self.projects = projects = outline(self.app.store)
        except Exception as exc:  # noqa: BLE001 - shown, never raised over the screen
            self.app.report(exc)
            return
        for p in projects:
            newest = next((n["versions"][-1]["ref"] for n in p["networks"] if n["versions"]), None)
            # the parameter-set count lives in the project's detail pane: beside the name it was cut
            # to "1 s" in the outline's 30 columns at 80x24
            pnode = root.add(Text(p["project"], style="bold"),
                             data={"kind": "project", "scope": p["project"], "project": p["project"],
                                   "launch": newest, "info": p}, expand=True)
            for n in p["networks"]:
                newest_v = n["versions"][-1]["ref"] if n["versions"] else None
                nnode = pnode.add(n["network"], data={"kind": "network", "scope": n["ref"], "project": p["project"],
                                                       "network": n["ref"], "launch": newest_v, "info": n},
                                  expand=True)
                for v in n["versions"]:
                    label = Text.assemble((f"@{v['version']}", palette.ACCENT), f" {v['nodes']}n",
                                          (f" · {v['runs']} run{'s' if v['runs'] != 1 else ''}", palette.FAINT))
                    nnode.add_leaf(label, data={"kind": "version", "scope": v["ref"], "version": v["ref"],
                                                "project": p["project"], "network": n["ref"], "launch": v["ref"]})
        root.expand()

    def runs_source(self) -> CallbackSource:
        from workspace.services.browse import count_ledger_runs, ledger_runs

        store, scope, status, text = self.app.store, self.scope, self.status_filter, self.text_filter
        sort, descending = self.sort, self.descending
        return CallbackSource(lambda: count_ledger_runs(store, scope, status=status, text=text),
                              lambda off, lim: ledger_runs(store, scope, status=status, text=text, sort=sort,
                                                           descending=descending, limit=lim, offset=off))

    def set_runs_scope(self, scope: str | None) -> None:
        self.scope = scope
        self._reload_runs()

    def _reload_runs(self) -> None:
        table = self.query_one("#runs", PagedTable)
        try:
            table.set_source(self.runs_source())
        except Exception as exc:  # noqa: BLE001
            self.app.report(exc)
            return
        self._retitle()

    def _retitle(self) -> None:
        from workspace.services.browse import DESCENDING_BY_DEFAULT

        table = self.query_one("#runs", PagedTable)
        bits = [f"Runs in {self.scope or 'all projects'}"]
        if self.status_filter:
            bits.append(f"{self.status_filter} only")
        if self.text_filter:
            bits.append(f"“{self.text_filter}”")
        descending = self.descending if self.descending is not None else self.sort in DESCENDING_BY_DEFAULT
        if self.sort != "run" or self.descending is not None:
            bits.append(f"by {self.sort.replace('_', ' ')} {'↓' if descending else '↑'}")
        bits.append(str(table.row_count))
        self.query_one("#runs-pane", Pane).border_title = " · ".join(bits)

    @property
    def runs_title(self) -> str:
        return str(self.query_one("#runs-pane", Pane).border_title)

    # --- events -------------------------------------------------------------------------------------

    @on(Tree.NodeHighlighted, "#outline")
    def _outline_moved(self, event: Tree.NodeHighlighted) -> None:
        data = event.node.data or {"kind": "store"}
        self.outline_data = data
        if data.get("scope") != self.scope:
            self.set_runs_scope(data.get("scope"))
        if self.query_one("#outline", Tree).has_focus or self.detail_kind is None:
            self.show_outline_detail()

    def show_outline_detail(self) -> None:
        """The detail pane follows the outline row: the store, a project, a network or a version."""
        data = self.outline_data
        kind = data.get("kind", "store")
        if kind == "version":
            self.load_version(data["version"])
        elif kind == "network":
            self._show_detail("network", "Network", network_text(data["info"]))
        elif kind == "project":
            self._show_detail("project", "Project", project_text(data["info"]))
        else:
            self._show_detail("store", "Store", store_text(self.projects, getattr(self.app, "store_label", "")))

    @on(PagedTable.Highlighted, "#runs")
    def _run_moved(self, event: PagedTable.Highlighted) -> None:
        if event.row is not None:
            self.app.current_run = event.row["run"]
            if event.table.has_focus:  # moving in the outline shows the outline row, not a run
                self.load_run(event.row["run"])

    def on_descendant_focus(self, event) -> None:
        table = self.query_one("#runs", PagedTable)
        if event.widget is table:
            if table.current_row is not None:
                self.load_run(table.current_row["run"])
        elif event.widget is self.query_one("#outline", Tree):
            self.show_outline_detail()

    @on(PagedTable.Chosen, "#runs")
    def _run_chosen(self, event: PagedTable.Chosen) -> None:
        """Enter on a run opens it (its spectrum and community sizes)."""
        self.app.open_run(event.row["run"], "spectrum")

    @work(thread=True, exclusive=True, group="ledger-detail", exit_on_error=False)
    def load_run(self, run_id: int) -> None:
        from workspace.services.runs import show_run

        try:
            run = show_run(self.app.store, run_id)
            if run.get("status") == "done":  # its make-up by the version's categorical node attributes
                from workspace.services.reports import run_compositions

                run["compositions"] = run_compositions(self.app.store, run_id)
        except Exception as exc:  # noqa: BLE001
            self.app.call_from_thread(self.app.report, exc)
            return
        self.app.call_from_thread(self._show_detail, "run", f"Run {run_id}", run_text(run))

    @work(thread=True, exclusive=True, group="ledger-detail", exit_on_error=False)
    def load_version(self, ref: str) -> None:
        from workspace.services.networks import show_version

        try:
            # compared with its parent up to services.networks.PARENT_CHANGES_MAX_EDGES edges, as `cutbook show`
            v = show_version(self.app.store, ref)
        except Exception as exc:  # noqa: BLE001
            self.app.call_from_thread(self.app.report, exc)
            return
        self.app.call_from_thread(self._show_detail, "version", "Version", version_text(v))

    def _show_detail(self, kind: str, title: str, text: Text) -> None:
        self.detail_kind = kind
        self.query_one("#detail-pane", Pane).border_title = title
        self.query_one("#detail", DetailPane).show(text)

    def on_store_changed(self, _message: StoreChanged) -> None:
        self.action_refresh()

    # --- actions ------------------------------------------------------------------------------------

    def _current_run(self) -> dict[str, Any] | None:
        return self.query_one("#runs", PagedTable).current_row

    def _run_in_focus(self) -> bool:
        """True when the runs list (not the outline) is what the user is working in."""
        focused = self.focused
        if focused is not None and focused.id == "outline":
            return False
        return self.detail_kind == "run" or (focused is not None and focused.id == "runs")

    def action_spectrum(self) -> None:
        row = self._current_run()
        if row is None:
            self.notify("choose a run first", severity="warning")
            return
        self.app.open_run(row["run"], "spectrum")

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

    def launch_ref(self) -> str | None:
        """The version `l` launches on: the run's in the runs list, else the outline row's (a network: its newest)."""
        row = self._current_run()
        if self._run_in_focus() and row is not None:
            return row["ref"]
        ref = self.outline_data.get("launch")
        if ref is None and self.outline_data.get("kind") == "store" and row is not None:
            return row["ref"]
        return ref

    def action_launch_here(self) -> None:
        ref = self.launch_ref()
        if ref is None and self.outline_data.get("kind") in ("project", "network"):
            self.notify("this network has no version yet — import one with `cutbook import`", severity="warning")
            return
        self.app.launch_version = ref
        self.app.action_goto("launch")

    def action_where(self) -> None:
        row = self._current_run()
        if self._run_in_focus() and row is not None:
            self.app.lookup_network = row["network"]
        else:
            self.app.lookup_network = self.outline_data.get("network") or (row["network"] if row else None)
        self.app.action_goto("lookup")

    def action_filter(self) -> None:
        box = self.query_one("#runs-filter", Input)
        box.add_class("-shown")
        box.focus()

    @on(Input.Changed, "#runs-filter")
    def _filter_typed(self, event: Input.Changed) -> None:
        if self._filter_timer is not None:
            self._filter_timer.stop()
        self._filter_timer = self.set_timer(0.15, self._apply_filter)

    def _apply_filter(self) -> None:
        self._filter_timer = None
        text = self.query_one("#runs-filter", Input).value.strip()
        if text != self.text_filter:
            self.text_filter = text
            self._reload_runs()

    @on(Input.Submitted, "#runs-filter")
    def _filter_done(self) -> None:
        self._apply_filter()
        self.query_one("#runs", PagedTable).focus()

    def after_leave_field(self, field) -> None:
        """Esc in the filter box: back to the runs list (the filter stays until the box is emptied)."""
        if field.id == "runs-filter":
            self._apply_filter()
            self.query_one("#runs", PagedTable).focus()

    def on_descendant_blur(self, event) -> None:
        box = self.query_one("#runs-filter", Input)
        if event.widget is box and not box.value.strip():
            box.remove_class("-shown")

    def action_sort(self) -> None:
        i = SORT_CYCLE.index(self.sort) if self.sort in SORT_CYCLE else -1
        self.sort = SORT_CYCLE[(i + 1) % len(SORT_CYCLE)]
        self.descending = None
        self._reload_runs()

    def action_reverse(self) -> None:
        from workspace.services.browse import DESCENDING_BY_DEFAULT

        current = self.descending if self.descending is not None else self.sort in DESCENDING_BY_DEFAULT
        self.descending = not current
        self._reload_runs()

    def action_cycle_status(self) -> None:
        i = STATUS_FILTERS.index(self.status_filter)
        self.status_filter = STATUS_FILTERS[(i + 1) % len(STATUS_FILTERS)]
        self._reload_runs()

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
        if line >= 0:
            tree.move_cursor_to_line(line)
