"""Diff: two runs (any versions) side by side — scores, matched communities, events, moved nodes, heat table."""

from __future__ import annotations

from typing import Any

from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.screen import Screen
from textual.widgets import Footer, Input, Label, Select, Static

from workspace.tui.widgets.charts import HeatTable
from workspace.tui.widgets.detail import HEAD, KEY, MUTED, fmt_value
from workspace.tui.widgets.paged_table import Column, ListSource, PagedTable

MATCH_COLUMNS = [
    Column("a", "A", 5, "right"), Column("b", "B", 5, "right"),
    Column("overlap", "overlap", 8, "right"),
    Column("jaccard", "Jaccard", 8, "right", format=lambda v, r: "—" if v is None else f"{v:.3f}"),
    Column("size_a", "size A", 7, "right"), Column("size_b", "size B", 7, "right"),
]
MOVED_COLUMNS = [
    Column("node", "node", 0),
    Column("from", "from (A)", 9, "right", format=lambda v, r: "—" if v is None else str(v)),
    Column("to", "to (B)", 9, "right", format=lambda v, r: "—" if v is None else str(v)),
]


def _event_line(ev: Any) -> str:
    if isinstance(ev, str):
        return ev
    if isinstance(ev, dict) and "a" in ev and "b" in ev:
        kind = ev.get("kind") or ev.get("type") or "event"
        a = ", ".join(f"A{x}" for x in (ev["a"] if isinstance(ev["a"], list) else [ev["a"]])) or "—"
        b = ", ".join(f"B{x}" for x in (ev["b"] if isinstance(ev["b"], list) else [ev["b"]])) or "—"
        sizes = f"  {fmt_value(ev.get('size_a'))} → {fmt_value(ev.get('size_b'))} nodes"
        jac = f", Jaccard {ev['jaccard']:.2f}" if isinstance(ev.get("jaccard"), float) else ""
        return f"{kind:<7} {a} → {b}{sizes}{jac}"
    if isinstance(ev, dict):
        kind = ev.get("type") or ev.get("kind") or ev.get("event") or "event"
        rest = {k: v for k, v in ev.items() if k not in ("type", "kind", "event")}
        return f"{kind}: " + ", ".join(f"{k} {fmt_value(v)}" for k, v in rest.items())
    return str(ev)


def _heat_view(c: dict[str, Any] | None, max_rows: int = 18, max_cols: int = 12
               ) -> tuple[dict[str, Any] | None, str]:
    """The part of a sparse contingency (cells ``[a, b, count]``) the heat table shows: the
    largest A groups, each one's largest B group first, as a small dense table; and a pane
    title that counts what is left out."""
    title = "Contingency (rows: A, columns: B)"
    if not c or not c.get("rows"):
        return c, title
    rows, cols = list(c["rows"]), list(c["cols"])
    size_a = dict(zip(rows, c.get("row_sizes") or []))
    size_b = dict(zip(cols, c.get("col_sizes") or []))
    keep_r = sorted(rows, key=lambda x: -(size_a.get(x) or 0))[:max_rows]
    by_row: dict[Any, list[tuple[int, Any]]] = {x: [] for x in keep_r}
    for a, b, n in c.get("cells") or []:
        if a in by_row:
            by_row[a].append((n, b))
    keep_c: list[Any] = []
    for x in keep_r:  # each row's largest column first: matched pairs on the diagonal
        best = max(by_row[x], key=lambda t: t[0], default=None)
        if best and best[1] not in keep_c:
            keep_c.append(best[1])
    rest = {b for x in keep_r for _, b in by_row[x]} - set(keep_c)
    keep_c = (keep_c + sorted(rest, key=lambda y: -(size_b.get(y) or 0)))[:max_cols]
    col_pos = {y: j for j, y in enumerate(keep_c)}
    counts = [[0] * len(keep_c) for _ in keep_r]
    for i, x in enumerate(keep_r):
        for n, b in by_row[x]:
            if b in col_pos:
                counts[i][col_pos[b]] = n
    nnz = int(c.get("nnz", len(c.get("cells") or [])))
    shown = sum(1 for r in counts for v in r if v)
    if nnz > shown:  # short enough for the pane at 120 columns
        title = (f"Contingency A×B · largest {len(keep_r)}×{len(keep_c)} of {len(rows):,}×{len(cols):,}"
                 f" · {nnz - shown:,} more cells")
    return {"rows": keep_r, "cols": keep_c, "counts": counts,
            "row_sizes": [size_a.get(x, 0) for x in keep_r],
            "col_sizes": [size_b.get(y, 0) for y in keep_c]}, title


class DiffScreen(Screen):
    """Compare two runs."""

    TITLE = "Diff"
    BINDINGS = [
        Binding("ctrl+r", "compare", "Compare", priority=True),
        Binding("ctrl+f", "find", "Find moved node", priority=True),
        Binding("ctrl+o", "swap", "Swap A and B", priority=True),
    ]

    def __init__(self) -> None:
        super().__init__(id="diff")
        self.result: dict[str, Any] | None = None
        self.moved: list[dict[str, Any]] = []

    def compose(self) -> ComposeResult:
        with Horizontal(id="diff-top", classes="field-row"):
            yield Label("run A", classes="name short")
            yield Input("", id="diff-a", type="integer", placeholder="run id")
            yield Label("run B", classes="name short")
            yield Input("", id="diff-b", type="integer", placeholder="run id")
            yield Label("nodes", classes="name short")
            yield Select([("common to both", "common"), ("all (absent = its own group)", "all")],
                         value="common", allow_blank=False, id="diff-nodes")
        with Horizontal(id="diff-upper"):
            with VerticalScroll(id="diff-scores-pane", classes="pane"):
                yield Static("Scores", classes="pane-title")
                yield Static(Text("enter two run ids (or pick them in the Ledger with a / b) and press ctrl+r",
                                  style=MUTED), id="diff-scores")
            with Vertical(id="diff-matches-pane", classes="pane"):
                yield Static("Matched communities", classes="pane-title")
                yield PagedTable(MATCH_COLUMNS, id="diff-matches", empty_text="no diff yet")
            with VerticalScroll(id="diff-events-pane", classes="pane"):
                yield Static("Events", classes="pane-title")
                yield Static("", id="diff-events")
        with Horizontal(id="diff-lower"):
            with Vertical(id="diff-moved-pane", classes="pane"):
                yield Static("Moved nodes", classes="pane-title", id="diff-moved-title")
                yield Input("", id="diff-search", placeholder="search a node id (ctrl+f)")
                yield PagedTable(MOVED_COLUMNS, id="diff-moved", empty_text="no moved nodes")
            with VerticalScroll(id="diff-heat-pane", classes="pane"):
                yield Static("Contingency (rows: A, columns: B)", classes="pane-title")
                yield HeatTable(id="diff-heat")
        yield Footer()

    def on_screen_resume(self) -> None:
        pick = getattr(self.app, "diff_pick", {})
        changed = False
        for side in ("a", "b"):
            if pick.get(side) is not None:
                box = self.query_one(f"#diff-{side}", Input)
                if box.value != str(pick[side]):
                    box.value = str(pick[side])
                    changed = True
        if changed and all(pick.get(s) is not None for s in ("a", "b")):
            self.action_compare()

    def on_mount(self) -> None:
        self.on_screen_resume()

    @on(Input.Submitted, "#diff-a, #diff-b")
    def _submitted(self) -> None:
        self.action_compare()

    def action_swap(self) -> None:
        a, b = self.query_one("#diff-a", Input), self.query_one("#diff-b", Input)
        a.value, b.value = b.value, a.value
        self.action_compare()

    def action_find(self) -> None:
        self.query_one("#diff-search", Input).focus()

    def action_compare(self) -> None:
        try:
            a = int(self.query_one("#diff-a", Input).value)
            b = int(self.query_one("#diff-b", Input).value)
        except ValueError:
            self.notify("type two run ids (whole numbers)", severity="error")
            return
        self.app.diff_pick.update(a=a, b=b)
        nodes = self.query_one("#diff-nodes", Select).value
        self.query_one("#diff-scores", Static).update(Text(f"comparing run {a} with run {b} …", style=MUTED))
        self.compute(a, b, nodes)

    @work(thread=True, exclusive=True, group="diff", exit_on_error=False)
    def compute(self, a: int, b: int, nodes: str) -> None:
        from workspace.services.diffs import diff_runs

        try:
            result = diff_runs(self.app.store, a, b, nodes=nodes)
        except Exception as exc:  # noqa: BLE001
            self.app.call_from_thread(self.app.report, exc)
            self.app.call_from_thread(self.query_one("#diff-scores", Static).update,
                                      Text(f"could not compare: {exc}", style="#d0705a"))
            return
        self.app.call_from_thread(self.show_result, result)

    def show_result(self, d: dict[str, Any]) -> None:
        self.result = d
        t = Text()
        for side in ("a", "b"):
            s = d.get(side) or {}
            what = s.get("method") if s.get("kind") != "attached" else f"attached: {s.get('label')}"
            t.append(f"{side.upper()}  ", style=HEAD)
            t.append(f"run {s.get('run')} · {s.get('ref')} · {what} · k={s.get('k')}\n")
        t.append("\n")
        norm = d.get("nmi_normalization")
        rows = [("ARI", d.get("ari")), (f"NMI ({norm})" if norm else "NMI", d.get("nmi")), ("AMI", d.get("ami")),
                ("VI (nats)", d.get("vi_nats")), ("VI (bits)", d.get("vi_bits")), ("moved nodes", d.get("moved")),
                ("only in A", d.get("only_in_a")), ("only in B", d.get("only_in_b")),
                ("coverage", d.get("coverage")), ("nodes compared", d.get("nodes"))]
        for name, value in rows:
            if value is None:
                continue
            t.append(f"{name:<18}", style=KEY)
            t.append(fmt_value(value) + "\n")
        for note in d.get("notes") or []:
            t.append(f"\n{note}\n", style=MUTED)
        self.query_one("#diff-scores", Static).update(t)
        self.query_one("#diff-matches", PagedTable).set_source(ListSource(d.get("matches") or []))
        events = d.get("events") or []
        ev_text = Text()
        if not events:
            ev_text.append("no splits, merges, births or deaths", style=MUTED)
        for ev in events:
            ev_text.append("• " + _event_line(ev) + "\n")
        self.query_one("#diff-events", Static).update(ev_text)
        self.moved = list(d.get("moved_nodes") or [])
        self._filter_moved(self.query_one("#diff-search", Input).value)
        heat, caption = _heat_view(d.get("contingency"))
        self.query_one("#diff-heat-pane .pane-title", Static).update(caption)
        self.query_one("#diff-heat", HeatTable).show(heat)
        if isinstance(self.focused, Input) and self.focused.id in ("diff-a", "diff-b"):
            self.query_one("#diff-moved", PagedTable).focus()

    @on(Input.Changed, "#diff-search")
    def _search(self, event: Input.Changed) -> None:
        self._filter_moved(event.value)

    @on(Input.Submitted, "#diff-search")
    def _search_done(self) -> None:
        self.query_one("#diff-moved", PagedTable).focus()

    def _filter_moved(self, query: str) -> None:
        q = query.strip().lower()
        rows = self.moved if not q else [r for r in self.moved if q in str(r.get("node", "")).lower()]
        self.query_one("#diff-moved", PagedTable).set_source(ListSource(rows))
        total = (self.result or {}).get("moved", len(self.moved))
        shown = f"{len(rows)} of {total}" if q else f"{total}"
        self.query_one("#diff-moved-title", Static).update(f"Moved nodes · {shown}")
