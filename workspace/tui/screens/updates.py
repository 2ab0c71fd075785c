"""Updates: what changed when a network's tracked parameter sets were re-run on a new version.

The upper pane lists every update, latest first, one row per tracked set; the lower pane holds the
change report of the row under the cursor (scores, node changes, events and moved nodes, with
communities shown by their match in the previous version's run, each in its colour) and the sets the
network tracks. The top row adds (enter or ctrl+t) and removes (ctrl+o) a tracked parameter set of
the chosen network. Reads and writes run in worker threads (a diff of a large network takes a moment).
"""

from __future__ import annotations

from typing import Any

from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal
from textual.screen import Screen
from textual.widgets import Input, Label, Select, Static

from workspace.tui import palette
from workspace.tui.widgets.chrome import Pane, ScreenBar, ScreenFooter, ScrollPane
from workspace.tui.widgets.detail import BAD, MUTED
from workspace.tui.widgets.paged_table import Column, ListSource, PagedTable


def _num(value, row) -> str:
    return "" if value is None else f"{value:.4g}"


UPDATE_COLUMNS = [
    Column("update", "upd", 4, "right"),
    Column("version", "version", 8, "right", format=lambda v, r: f"@{v}" if r.get("first") else ""),
    Column("params", "tracked set", 0, min_width=14, format=lambda v, r: str(v).split("/", 1)[-1]),
    Column("status", "status", 9),
    Column("ari", "ARI", 7, "right", format=_num),
    Column("moved", "moved", 6, "right", format=lambda v, r: "" if v is None else str(v)),
    Column("changes", "changes", 18, drop=2, min_width=10),
    Column("network", "network", 22, drop=3),
]

MAX_MOVED_SHOWN = 200


def update_rows(updates: list[dict[str, Any]]) -> list[dict[str, Any]]:
    """One row per tracked set of each update (latest update first)."""
    from workspace.services.tracking import EVENT_KINDS

    rows = []
    for u in updates:
        for i, st in enumerate(u["sets"] or [{}]):
            sm = st.get("summary") or {}
            ev = sm.get("events") or {}
            rows.append({"update": u["update"] if i == 0 else None, "first": i == 0, "version": u["version"],
                         "network": u["network"], "params": st.get("params", "-"),
                         "status": st.get("status", u["status"]), "ari": sm.get("ari"), "moved": sm.get("moved"),
                         "changes": ", ".join(f"{ev[k]} {k}" for k in EVENT_KINDS if k in ev and k != "kept") or
                         ("none" if sm else ""),
                         "update_id": u["update"], "position": i})
    return rows


def _shown_label(text: Text, label, shown: dict) -> None:
    value = shown.get(label, label)
    style = f"bold {palette.community_colour(value)}" if isinstance(value, int) and value >= 0 else MUTED
    text.append(str(value), style=style)


def report_text(report: dict[str, Any], position: int, names: dict[str, str] | None = None) -> Text:
    """The change report of one tracked set of an update, as the lower pane shows it; ``names``
    (node -> name from the node table) are printed beside the moved nodes' ids."""
    t = Text()
    st = report["sets"][position]
    t.append(f"update {report['update']}", style="bold")
    t.append(f"  {report['ref']}" + (f" against {report['previous']}" if report.get("previous") else "")
             + f"  ({'after import' if report['trigger'] == 'import' else 'on request'}, {report['started']})\n",
             style=MUTED)
    t.append(f"{st['params']}: ", style="bold")
    t.append(f"run {st['run']}" if st.get("run") else "no run")
    if st.get("previous_run"):
        t.append(f" against run {st['previous_run']}")
    t.append(f"  {st['status']}\n", style=BAD if st["status"] in ("failed", "cancelled") else "")
    if st.get("error"):
        t.append(f"{st['error']}\n", style=BAD)
    d = st.get("diff")
    if d is None:
        if st["status"] == "done":
            t.append("nothing to compare with: no earlier version has a finished run of this set\n", style=MUTED)
        return t
    t.append(f"ARI {d['ari']:.4g}   NMI {d['nmi']:.4g}   VI {d['vi_nats']:.4g} nats\n")
    t.append(f"k {d['k_a']} → {d['k_b']}   nodes +{d['only_in_b']} / −{d['only_in_a']}   moved {d['moved']}\n")
    shown = d.get("shown_labels") or {}
    sa = {c: v for c, v in shown.get("a") or []}
    sb = {c: v for c, v in shown.get("b") or []}
    events = [e for e in d.get("events") or [] if e["kind"] != "kept"]
    kept = len(d.get("events") or []) - len(events)
    t.append(f"events: {len(events)} change{'s' if len(events) != 1 else ''}, {kept} kept\n", style=MUTED)
    for e in events:
        t.append(f"  {e['kind']:<10}")
        for i, a in enumerate(e.get("a") or []):
            t.append(", " if i else "")
            _shown_label(t, a, sa)
        t.append(" → ")
        for i, b in enumerate(e.get("b") or []):
            t.append(", " if i else "")
            _shown_label(t, b, sb)
        if not e.get("a") and not e.get("b"):
            t.append("-")
        t.append("\n")
    moved = d.get("moved_nodes") or []
    if moved:
        t.append(f"moved nodes (communities by their match in run {d['a']['run']})\n", style=MUTED)
        for m in moved[:MAX_MOVED_SHOWN]:
            node, f, to = (m["node"], m["from"], m["to"]) if isinstance(m, dict) else m[:3]
            t.append(f"  {node:<12} ")
            if names and names.get(str(node), str(node)) != str(node):
                t.append(f"{names[str(node)]:<20} ", style=MUTED)
            _shown_label(t, f, sa)
            t.append(" → ")
            _shown_label(t, to, sb)
            t.append("\n")
        if d["moved"] > MAX_MOVED_SHOWN:
            t.append(f"  … and {d['moved'] - MAX_MOVED_SHOWN} more (cutbook updates show {report['update']} "
                     "--json lists all)\n", style=MUTED)
    return t


def _moved_names(store, d: dict[str, Any] | None) -> dict[str, str]:
    """Names of the listed moved nodes by the first text attribute of the runs' node tables ({} without)."""
    from workspace.services.nodes import label_attributes, labels_of

    if not d or not d.get("moved_nodes"):
        return {}
    runs = [d["a"]["run"], d["b"]["run"]]
    attrs = label_attributes(store, runs)
    if not attrs:
        return {}
    nodes = [str(m["node"] if isinstance(m, dict) else m[0]) for m in d["moved_nodes"][:MAX_MOVED_SHOWN]]
    return labels_of(store, runs, attrs[0], nodes)


class UpdatesScreen(Screen):
    """Updates, latest first, and the change report of the one under the cursor."""

    TITLE = "Updates"
    BINDINGS = [Binding("ctrl+r", "reload", "Reload", tooltip="read the updates again"),
                Binding("ctrl+d", "open_diff", "Diff", tooltip="open the Diff screen on this set's two runs"),
                Binding("ctrl+f", "set_box", "Set box", priority=True, tooltip="type a parameter set to track"),
                Binding("ctrl+t", "track", "Track", priority=True,
                        tooltip="track the parameter set typed in the box on the chosen network"),
                Binding("ctrl+o", "untrack", "Untrack", priority=True,
                        tooltip="stop tracking the parameter set typed in the box (its runs are kept)")]

    def __init__(self) -> None:
        super().__init__(id="updates")
        self.report: dict[str, Any] | None = None
        self.position = 0

    def compose(self) -> ComposeResult:
        yield ScreenBar("updates")
        with Horizontal(id="updates-top", classes="field-row"):
            yield Label("network", classes="name short")
            yield Select([], prompt="network", id="updates-network", compact=True)
            yield Label("set", classes="name short")
            yield Input("", id="updates-params", placeholder="P/NAME[@V]: enter tracks, ^o untracks", compact=True)
        with Pane(title="Updates, latest first", id="updates-list-pane"):
            yield PagedTable(UPDATE_COLUMNS, id="updates-table",
                             empty_text="no updates yet: track a parameter set (cutbook track add) and import "
                                        "a new version")
        with ScrollPane(title="Change report", id="updates-report-pane"):
            yield Static(Text("move the cursor to an update", style=MUTED), id="updates-report")
            yield Static("", id="updates-tracked")
        yield ScreenFooter("updates")

    def on_mount(self) -> None:
        self.load()
        self.load_networks()

    def on_screen_resume(self) -> None:
        self.query_one("#updates-table", PagedTable).focus()

    def action_reload(self) -> None:
        self.load()

    @work(thread=True, exclusive=True, group="updates-list", exit_on_error=False)
    def load(self) -> None:
        from workspace.services.tracking import list_updates

        try:
            rows = update_rows(list_updates(self.app.store))
        except Exception as exc:  # noqa: BLE001
            self.app.call_from_thread(self.app.report, exc)
            return
        self.app.call_from_thread(self._show_rows, rows)

    def _show_rows(self, rows: list[dict[str, Any]]) -> None:
        table = self.query_one("#updates-table", PagedTable)
        table.set_source(ListSource(rows))
        table.focus()
        if not rows:
            self.query_one("#updates-report", Static).update(Text("no updates yet", style=MUTED))

    @on(PagedTable.Highlighted, "#updates-table")
    def _moved(self, event: PagedTable.Highlighted) -> None:
        if event.row is not None:
            self.show_report(event.row["update_id"], event.row["position"])

    @work(thread=True, exclusive=True, group="updates-report", exit_on_error=False)
    def show_report(self, update_id: int, position: int) -> None:
        from workspace.services.tracking import change_report, list_tracked

        try:
            report = change_report(self.app.store, update_id, moved_limit=MAX_MOVED_SHOWN + 1)
            tracked = list_tracked(self.app.store, report["network"])
            names = _moved_names(self.app.store, report["sets"][position].get("diff"))
        except Exception as exc:  # noqa: BLE001
            self.app.call_from_thread(self.app.report, exc)
            return
        self.app.call_from_thread(self._show_report, report, position, tracked, names)

    def _show_report(self, report: dict[str, Any], position: int, tracked: dict[str, Any],
                     names: dict[str, str] | None = None) -> None:
        self.report, self.position = report, position
        self.query_one("#updates-report", Static).update(report_text(report, position, names))
        self._show_tracked(tracked)
        sel = self.query_one("#updates-network", Select)
        if sel.value != report["network"] and report["network"] in self._networks:
            sel.value = report["network"]

    def _show_tracked(self, tracked: dict[str, Any]) -> None:
        names = [t["params"] for t in tracked["tracked"]]
        self.query_one("#updates-tracked", Static).update(
            Text(f"\n{tracked['network']} tracks: " + (", ".join(names) or "nothing now"), style=MUTED))

    # --- tracked sets of the chosen network ----------------------------------------------------------

    _networks: list[str] = []

    @work(thread=True, exclusive=True, group="updates-networks", exit_on_error=False)
    def load_networks(self) -> None:
        from workspace.services.browse import outline

        try:
            nets = [n["ref"] for p in outline(self.app.store) for n in p["networks"]]
        except Exception as exc:  # noqa: BLE001
            self.app.call_from_thread(self.app.report, exc)
            return
        self.app.call_from_thread(self._set_networks, nets)

    def _set_networks(self, nets: list[str]) -> None:
        self._networks = nets
        sel = self.query_one("#updates-network", Select)
        current = sel.value
        sel.set_options([(n, n) for n in nets])
        if current in nets:
            sel.value = current
        elif self.report is not None and self.report["network"] in nets:
            sel.value = self.report["network"]
        elif len(nets) == 1:
            sel.value = nets[0]

    @on(Select.Changed, "#updates-network")
    def _network_chosen(self, event: Select.Changed) -> None:
        if isinstance(event.value, str):
            self.change_tracked(event.value, None, None)

    @on(Input.Submitted, "#updates-params")
    def _submitted(self, event: Input.Submitted) -> None:
        self.action_track()

    def _target(self) -> tuple[str, str] | None:
        net = self.query_one("#updates-network", Select).value
        params = self.query_one("#updates-params", Input).value.strip()
        if not isinstance(net, str):
            self.notify("choose a network first", severity="error")
            return None
        if not params:
            self.notify("type a parameter set: PROJECT/NAME or PROJECT/NAME@V", severity="error")
            self.query_one("#updates-params", Input).focus()
            return None
        return net, params

    def action_set_box(self) -> None:
        self.query_one("#updates-params", Input).focus()

    def action_track(self) -> None:
        target = self._target()
        if target is not None:
            self.change_tracked(*target, "add")

    def action_untrack(self) -> None:
        target = self._target()
        if target is not None:
            self.change_tracked(*target, "remove")

    @work(thread=True, exclusive=True, group="updates-track", exit_on_error=False)
    def change_tracked(self, network: str, params: str | None, how: str | None) -> None:
        """Add or remove a tracked set (``how``), or only read the list (``how`` None)."""
        from workspace.services import tracking

        try:
            if how == "add":
                res = tracking.add_tracked(self.app.store, network, params)
                note = f"tracking {res['added']['params']} on {network}: each new version runs it"
            elif how == "remove":
                res = tracking.remove_tracked(self.app.store, network, params)
                note = f"no longer tracking {', '.join(res['removed'])} on {network} (its runs are kept)"
            else:
                res, note = tracking.list_tracked(self.app.store, network), None
        except Exception as exc:  # noqa: BLE001
            self.app.call_from_thread(self.app.report, exc)
            return
        self.app.call_from_thread(self._show_tracked, res)
        if note:
            self.app.call_from_thread(self.notify, note)

    def action_open_diff(self) -> None:
        if self.report is None:
            self.notify("no update under the cursor", severity="warning")
            return
        st = self.report["sets"][self.position]
        if not (st.get("run") and st.get("previous_run")):
            self.notify("this set has no pair of runs to compare", severity="warning")
            return
        self.app.diff_pick["a"], self.app.diff_pick["b"] = st["previous_run"], st["run"]
        self.app.action_goto("diff")  # the Diff screen puts the picked runs in its boxes when it shows
