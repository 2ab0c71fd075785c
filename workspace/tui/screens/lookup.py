"""Node lookup: where one node sits in every run of every version of a network."""

from __future__ import annotations

from typing import Any

from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal
from textual.screen import Screen
from textual.widgets import Input, Label, Select, Static

from workspace.tui.widgets.chrome import Pane, ScreenBar, ScreenFooter
from workspace.tui.widgets.detail import BAD, MUTED, fmt_value
from workspace.tui.widgets.paged_table import Column, ListSource, PagedTable


def _what(value, row) -> str:
    return row["method"] if row.get("kind") != "attached" else f"⇲ {row.get('label') or 'attached'}"


WHERE_COLUMNS = [
    Column("run", "run", 6, "right"),
    Column("version", "version", 8, "right", format=lambda v, r: f"@{v}"),
    Column("method", "method / grouping", 0, format=_what),
    Column("k", "k", 4, "right"),
    Column("community", "community", 10, "right",
           format=lambda v, r: ("absent" if not r.get("present") else "—") if v is None
           else f"c{r.get('shown_community', v)}"),  # a tracked run: numbered by its match in the previous run
    Column("community_size", "its size", 9, "right", format=lambda v, r: "" if v is None else str(v)),
    Column("stability", "stability", 9, "right", format=lambda v, r: "" if v is None else f"{v:.2f}"),
]


class LookupScreen(Screen):
    """Follow a node across runs and versions."""

    TITLE = "Node lookup"
    BINDINGS = [Binding("ctrl+f", "find", "Node box", priority=True, tooltip="type a node id or name"),
                Binding("ctrl+n", "network", "Network", priority=True, tooltip="choose the network")]

    def __init__(self) -> None:
        super().__init__(id="lookup")
        self.result: dict[str, Any] | None = None

    def compose(self) -> ComposeResult:
        yield ScreenBar("lookup")
        with Horizontal(id="lookup-top", classes="field-row"):
            yield Label("network", classes="name short")
            yield Select([], prompt="network", id="lookup-network", compact=True)
            yield Label("node", classes="name short")
            yield Input("", id="lookup-node", placeholder="node id or name, then enter", compact=True)
        with Pane(title="Where the node sits", id="lookup-pane"):
            yield Static(Text("choose a network, type a node id (or its name) and press enter", style=MUTED),
                         id="lookup-summary")
            yield PagedTable(WHERE_COLUMNS, id="lookup-runs", empty_text="no runs to show")
        yield ScreenFooter("lookup")

    def on_mount(self) -> None:
        self._load_networks()
        self.on_screen_resume()

    def _load_networks(self) -> None:
        from workspace.services.browse import outline

        try:
            nets = [n["ref"] for p in outline(self.app.store) for n in p["networks"]]
        except Exception as exc:  # noqa: BLE001
            self.app.report(exc)
            return
        sel = self.query_one("#lookup-network", Select)
        current = sel.value
        sel.set_options([(n, n) for n in nets])
        if current in nets:
            sel.value = current
        elif len(nets) == 1:
            sel.value = nets[0]

    def on_screen_resume(self) -> None:
        net = getattr(self.app, "lookup_network", None)
        sel = self.query_one("#lookup-network", Select)
        if net:
            self.app.lookup_network = None
            self._load_networks()
            if sel.value != net:
                sel.value = net
        # the focus goes where the next thing to do is: the network first, then the node
        if isinstance(sel.value, str):
            self.query_one("#lookup-node", Input).focus()
        else:
            sel.focus()

    def action_find(self) -> None:
        self.query_one("#lookup-node", Input).focus()

    def action_network(self) -> None:
        self.query_one("#lookup-network", Select).focus()

    @on(Select.Changed, "#lookup-network")
    def _network_chosen(self, event: Select.Changed) -> None:
        """A network chosen: look up the node already typed, else move on to the node box."""
        node = self.query_one("#lookup-node", Input).value.strip()
        if isinstance(event.value, str) and node:
            self.lookup(node, event.value)
        elif isinstance(event.value, str):
            self.query_one("#lookup-node", Input).focus()

    @on(Input.Submitted, "#lookup-node")
    def _submitted(self, event: Input.Submitted) -> None:
        net = self.query_one("#lookup-network", Select).value
        node = event.value.strip()
        if not isinstance(net, str):
            self.notify("choose a network first (ctrl+n)", severity="error")
            self.query_one("#lookup-network", Select).focus()
            return
        if not node:
            self.notify("type a node id or name", severity="error")
            return
        self.lookup(node, net)

    @work(thread=True, exclusive=True, group="lookup", exit_on_error=False)
    def lookup(self, node: str, network: str) -> None:
        from workspace.services.nodes import node_attributes
        from workspace.services.runs import where_node

        try:
            result = where_node(self.app.store, node, network)
            # what the node is (its node table row), shown above where it sat
            result = dict(result, node_data=node_attributes(self.app.store, network, result["node"]))
        except Exception as exc:  # noqa: BLE001
            self.app.call_from_thread(self.app.report, exc)
            self.app.call_from_thread(self.query_one("#lookup-summary", Static).update,
                                      Text(str(exc), style=BAD))
            self.app.call_from_thread(self.query_one("#lookup-runs", PagedTable).set_source, ListSource([]))
            return
        self.app.call_from_thread(self.show_result, result)

    def show_result(self, r: dict[str, Any]) -> None:
        self.result = r
        runs = r.get("runs") or []
        t = Text()
        if r.get("found_by"):
            fb = r["found_by"]
            t.append(f"found by {fb['attribute']} {fb['value']!r}: ", style=MUTED)
        t.append(f"{r['node']}", style="bold")
        present = r["versions_with_node"]
        t.append(f" in {r['network']}: present in version{'s' if len(present) != 1 else ''} "
                 f"{', '.join('@' + str(v) for v in present)}; "
                 f"{len(runs)} finished run{'s' if len(runs) != 1 else ''}")
        data = r.get("node_data")
        if data:
            t.append(f"\nnode data of @{data['version']}: ", style=MUTED)
            t.append("  ".join(f"{name} {fmt_value(value) if value is not None else '—'}"
                               for name, _kind, value in data["attributes"]))
        # community labels belong to one run each, so they are never pooled across runs (the table has them)
        per_version: dict[int, int] = {}
        for row in runs:
            if row.get("present") and row.get("community") is not None:
                per_version[row["version"]] = per_version.get(row["version"], 0) + 1
        if per_version:
            t.append("\nplaced in a community by " + "; ".join(
                f"{n} run{'s' if n != 1 else ''} of @{v}" for v, n in sorted(per_version.items()))
                + " — each run numbers its communities its own way", style=MUTED)
        self.query_one("#lookup-summary", Static).update(t)
        self.query_one("#lookup-runs", PagedTable).set_source(ListSource(runs))
