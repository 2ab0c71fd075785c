"""Diff: two runs (any versions) side by side — scores, matched communities, events, moved nodes, heat table."""

from __future__ import annotations

import dataclasses
from typing import Any

from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.screen import Screen
from textual.widgets import Input, Label, Select, Static

from workspace.tui.widgets.charts import HeatTable
from workspace.tui.widgets.chrome import Pane, ScreenBar, ScreenFooter, ScrollPane
from workspace.tui.widgets.detail import BAD, HEAD, KEY, MUTED, fmt_value, next_label_attribute
from workspace.tui.widgets.paged_table import Column, ListSource, PagedTable

MATCH_COLUMNS = [
    Column("a", "A", 4, "right"), Column("b", "B", 4, "right"),
    Column("overlap", "overlap", 7, "right"),
    Column("jaccard", "Jaccard", 7, "right", format=lambda v, r: "—" if v is None else f"{v:.3f}"),
    Column("size_a", "size A", 6, "right", drop=2), Column("size_b", "size B", 6, "right", drop=1),
]


def match_columns(rows: list[dict[str, Any]]) -> list[Column]:
    """The matched-community columns, each count column as wide as its largest value: a community
    of 1.25M nodes is seven digits, which the default six-cell size columns cut to ``12499…``."""
    counts = ("a", "b", "overlap", "size_a", "size_b")
    widest = {key: max([len(str(r[key])) for r in rows if r.get(key) is not None], default=0) for key in counts}
    return [dataclasses.replace(c, width=max(c.width, widest[c.key])) if c.key in widest else c
            for c in MATCH_COLUMNS]


MOVED_COLUMNS = [
    Column("node", "node", 0),
    Column("from", "from (A)", 9, "right", format=lambda v, r: "—" if v is None else str(v)),
    Column("to", "to (B)", 9, "right", format=lambda v, r: "—" if v is None else str(v)),
    # the B side is shown numbered by its match in A (one numbering: never "from 3 to 3"); B's own number here
    Column("stored", "B stored", 9, "right", format=lambda v, r: "—" if v is None else str(v), drop=1),
]


def moved_columns(label_by: str | None, rows: list[dict[str, Any]]) -> list[Column]:
    """The moved-node columns; with ``label_by`` a column of that node attribute beside the id."""
    if label_by is None:
        return MOVED_COLUMNS
    id_width = min(max([len(str(r.get("node", ""))) for r in rows] + [4]), 14)
    # narrow: B's stored number goes first, then the id; the name stays
    return [Column("node", "node", id_width, drop=1), Column("label", label_by, 0, min_width=8),
            *MOVED_COLUMNS[1:3], dataclasses.replace(MOVED_COLUMNS[3], drop=2)]


def shown_moved_rows(d: dict[str, Any]) -> list[dict[str, Any]]:
    """Moved nodes with both sides in one numbering (the diff's ``shown_labels``) and B's stored number."""
    shown = d.get("shown_labels") or {}
    sa = {c: v for c, v in shown.get("a") or []}
    sb = {c: v for c, v in shown.get("b") or []}
    return [dict(m, **{"from": sa.get(m["from"], m["from"]), "to": sb.get(m["to"], m["to"]), "stored": m["to"]})
            for m in d.get("moved_nodes") or []]


def _sides(value: Any, prefix: str) -> str:
    items = value if isinstance(value, list) else ([] if value is None else [value])
    return ", ".join(f"{prefix}{x}" for x in items)


def _event_line(ev: Any) -> str:
    """One split / merge / birth / death in words; a missing side is left out, never printed as "—"."""
    if isinstance(ev, str):
        return ev
    if isinstance(ev, dict) and "a" in ev and "b" in ev:
        kind = ev.get("kind") or ev.get("type") or "event"
        a, b = _sides(ev["a"], "A"), _sides(ev["b"], "B")
        size_a, size_b = ev.get("size_a"), ev.get("size_b")
        if a and b:
            what = f"{a} → {b}"
            if size_a is not None and size_b is not None and size_a == size_b:   # one size: said once
                what += f"  {fmt_value(size_a)} nodes"
            elif size_a is not None and size_b is not None:
                what += f"  {fmt_value(size_a)} → {fmt_value(size_b)} nodes"
            elif size_a is not None or size_b is not None:  # a split (size of A) or a merge (size of B)
                what += f"  {fmt_value(size_a if size_a is not None else size_b)} nodes"
        elif a:  # gone in B
            what = a + (f"  {fmt_value(size_a)} nodes" if size_a is not None else "")
        else:  # new in B
            what = b + (f"  {fmt_value(size_b)} nodes" if size_b is not None else "")
        jac = f"  J {ev['jaccard']:.2f}" if isinstance(ev.get("jaccard"), float) else ""
        return f"{kind} {what}{jac}"
    if isinstance(ev, dict):
        kind = ev.get("type") or ev.get("kind") or ev.get("event") or "event"
        rest = {k: v for k, v in ev.items() if k not in ("type", "kind", "event") and v is not None}
        return f"{kind}: " + ", ".join(f"{k.replace('_', ' ')} {fmt_value(v)}" for k, v in rest.items())
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


NO_DIFF = "enter two run ids (or pick them in the Ledger with a / b) and press ctrl+r"


class DiffScreen(Screen):
    """Compare two runs."""

    TITLE = "Diff"
    BINDINGS = [
        Binding("ctrl+r", "compare", "Compare", priority=True, tooltip="compare the runs in the A and B boxes"),
        Binding("ctrl+f", "find", "Find node", priority=True, tooltip="search the moved nodes"),
        Binding("ctrl+o", "swap", "Swap", priority=True, tooltip="swap sides A and B"),
        Binding("ctrl+l", "label_by", "Label by", priority=True,
                tooltip="name the moved nodes by the next text attribute of the node table, or by id only"),
    ]

    def __init__(self) -> None:
        super().__init__(id="diff")
        self.result: dict[str, Any] | None = None
        self.moved: list[dict[str, Any]] = []
        self.label_attrs: list[str] = []        # text attributes of the compared versions' node tables
        self.label_by: str | None = None        # the one naming the moved nodes (None: ids only)
        self.labels_off = False                 # the user stepped to "ids only"
        self.labels: dict[str, str] = {}

    def compose(self) -> ComposeResult:
        yield ScreenBar("diff")
        with Horizontal(id="diff-top", classes="field-row"):
            yield Label("run A", classes="name short")
            yield Input("", id="diff-a", type="integer", placeholder="run id", compact=True)
            yield Label("run B", classes="name short")
            yield Input("", id="diff-b", type="integer", placeholder="run id", compact=True)
            yield Label("nodes", classes="name short")
            yield Select([("common to both", "common"), ("all (absent = own group)", "all")],
                         value="common", allow_blank=False, id="diff-nodes", compact=True)
        with VerticalScroll(id="diff-body"):
            with Horizontal(id="diff-upper"):
                with ScrollPane(title="Scores", id="diff-scores-pane"):
                    yield Static(Text(NO_DIFF, style=MUTED), id="diff-scores")
                with Pane(title="Matched communities", id="diff-matches-pane"):
                    yield PagedTable(MATCH_COLUMNS, id="diff-matches", empty_text="no diff yet")
                with ScrollPane(title="Events", id="diff-events-pane"):
                    yield Static("", id="diff-events")
            with Horizontal(id="diff-lower"):
                with Pane(title="Moved nodes", id="diff-moved-pane"):
                    yield Input("", id="diff-search", placeholder="search a node id (ctrl+f)", compact=True)
                    yield PagedTable(MOVED_COLUMNS, id="diff-moved", empty_text="no moved nodes")
                with ScrollPane(title="Contingency (rows: A, columns: B)", id="diff-heat-pane"):
                    yield HeatTable(id="diff-heat")
        yield ScreenFooter("diff")

    def apply_picks(self) -> None:
        """Put the runs picked as sides A / B (Ledger a / b, the palette) in the boxes; compare when both changed."""
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

    def on_screen_resume(self) -> None:
        self.apply_picks()

    def on_mount(self) -> None:
        self.apply_picks()

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
            self.app.call_from_thread(self.clear_result, f"could not compare run {a} with run {b}: {exc}")
            return
        try:
            attrs, label_by, labels = self._labels_for(result, a, b, None, choose=True)
        except Exception as exc:  # noqa: BLE001  (names are a convenience: the diff still shows)
            self.app.call_from_thread(self.app.report, exc)
            attrs, label_by, labels = [], None, {}
        self.app.call_from_thread(self.show_result, result, attrs, label_by, labels)

    def _labels_for(self, result: dict[str, Any], a: int, b: int, label_by: str | None, *, choose: bool = False
                    ) -> tuple[list[str], str | None, dict[str, str]]:
        """(text attributes, the one in use, node -> label of the listed moved nodes); worker thread.
        ``choose``: keep the attribute in use when the new runs have it, else take the first one
        (unless the user stepped to ids only)."""
        from workspace.services.nodes import label_attributes, labels_of

        attrs = label_attributes(self.app.store, [a, b])
        if choose:
            label_by = self.label_by if self.label_by in attrs else (
                None if self.labels_off or not attrs else attrs[0])
        nodes = [str(m["node"]) for m in result.get("moved_nodes") or []]
        labels = labels_of(self.app.store, [a, b], label_by, nodes) if label_by and nodes else {}
        return attrs, label_by, labels

    def action_label_by(self) -> None:
        if self.result is None:
            self.notify("compare two runs first", severity="warning")
            return
        if not self.label_attrs:
            self.notify("the compared versions have no node table with text attributes "
                        "(add one: cutbook nodes add REF FILE)", severity="warning")
            return
        nxt = next_label_attribute(self.label_attrs, self.label_by)
        self.labels_off = nxt is None
        self.relabel(self.result, nxt)

    @work(thread=True, exclusive=True, group="diff-labels", exit_on_error=False)
    def relabel(self, result: dict[str, Any], label_by: str | None) -> None:
        a, b = (result.get("a") or {}).get("run"), (result.get("b") or {}).get("run")
        try:
            attrs, label_by, labels = self._labels_for(result, a, b, label_by)
        except Exception as exc:  # noqa: BLE001
            self.app.call_from_thread(self.app.report, exc)
            return
        self.app.call_from_thread(self._apply_labels, attrs, label_by, labels, result)

    def _apply_labels(self, attrs: list[str], label_by: str | None, labels: dict[str, str],
                      result: dict[str, Any] | None = None) -> None:
        if result is not None and result is not self.result:
            return  # another comparison came in while these names were read
        self.label_attrs, self.label_by, self.labels = attrs, label_by, labels
        self.moved = [dict(r, label=labels.get(str(r.get("node")), "")) for r in self.moved]
        self.query_one("#diff-moved", PagedTable).columns = moved_columns(label_by, self.moved)
        self.query_one("#diff-moved-pane", Pane).set_class(label_by is not None, "-named")
        self.query_one("#diff-search", Input).placeholder = (
            f"search a node id or {label_by} (ctrl+f)" if label_by else "search a node id (ctrl+f)")
        self._filter_moved(self.query_one("#diff-search", Input).value)
        self.query_one("#diff-moved", PagedTable).refresh()

    def clear_result(self, message: str) -> None:
        """A failed comparison: say why, and leave nothing of the previous one on screen."""
        self.result = None
        self.moved = []
        self.query_one("#diff-scores", Static).update(Text(message, style=BAD))
        self.query_one("#diff-matches", PagedTable).set_source(ListSource([]))
        self.query_one("#diff-events", Static).update("")
        self._filter_moved(self.query_one("#diff-search", Input).value)
        self.show_contingency(None)

    def show_result(self, d: dict[str, Any], attrs: list[str] | None = None, label_by: str | None = None,
                    labels: dict[str, str] | None = None) -> None:
        self.result = d
        t = Text()
        for side in ("a", "b"):
            s = d.get(side) or {}
            # an attached run by its label, marked as in the Ledger; run and k first, what the run is
            # below (with the label on the first line it wrapped in the 30-column pane at 120x36)
            what = s.get("method") if s.get("kind") != "attached" else f"⇲ {s.get('label') or 'attached'}"
            t.append(f"{side.upper()}  ", style=HEAD)
            t.append(f"run {s.get('run')}  k = {s.get('k')}\n")
            t.append(f"   {what}\n")
            t.append(f"   {s.get('ref')}\n", style=KEY)
        t.append("\n")
        norm = d.get("nmi_normalization")
        rows = [("ARI", d.get("ari")), (f"NMI ({norm})" if norm else "NMI", d.get("nmi")), ("AMI", d.get("ami")),
                ("VI (nats)", d.get("vi_nats")), ("VI (bits)", d.get("vi_bits")), ("moved nodes", d.get("moved")),
                ("only in A", d.get("only_in_a")), ("only in B", d.get("only_in_b")),
                ("coverage", d.get("coverage")),
                ("nodes scored", None if d.get("n_scored") is None else
                 f"{d['n_scored']} ({'common to both' if d.get('nodes') == 'common' else 'all; absent = own group'})")]
        for name, value in rows:
            if value is None:
                continue
            t.append(f"{name:<18}", style=KEY)
            t.append(fmt_value(value) + "\n")
        if d.get("moved_nodes_truncated"):
            t.append(f"\nmoved nodes listed: the first {len(d.get('moved_nodes') or [])} of {d.get('moved')}\n",
                     style=MUTED)
        for note in d.get("notes") or []:
            t.append(f"\n{note}\n", style=MUTED)
        self.query_one("#diff-scores", Static).update(t)
        matches = self.query_one("#diff-matches", PagedTable)
        matches.columns = match_columns(d.get("matches") or [])
        matches.set_source(ListSource(d.get("matches") or []))
        events = d.get("events") or []
        ev_text = Text()
        if not events:
            ev_text.append("no splits, merges, births or deaths", style=MUTED)
        else:
            ev_text.append("J: Jaccard overlap\n", style=MUTED)
        for ev in events:
            ev_text.append("• " + _event_line(ev) + "\n")
        self.query_one("#diff-events", Static).update(ev_text)
        self.moved = shown_moved_rows(d)
        self._apply_labels(attrs or [], label_by, labels or {})
        self.show_contingency(d)
        if isinstance(self.focused, Input) and self.focused.id in ("diff-a", "diff-b"):
            self.query_one("#diff-moved", PagedTable).focus(scroll_visible=False)
        self.call_after_refresh(self.query_one("#diff-body").scroll_home, animate=False)  # scores first

    # --- contingency panel (kept in one function: the diff-at-scale work feeds it from a sparse table) ---

    def show_contingency(self, d: dict[str, Any] | None) -> None:
        """Fill the contingency panel from a diff result (None clears it): the largest cells of
        the sparse table, with a title that counts the rest."""
        heat, caption = _heat_view((d or {}).get("contingency"))
        self.query_one("#diff-heat-pane").border_title = caption
        self.query_one("#diff-heat", HeatTable).show(heat)

    @on(Input.Changed, "#diff-search")
    def _search(self, event: Input.Changed) -> None:
        self._filter_moved(event.value)

    @on(Input.Submitted, "#diff-search")
    def _search_done(self) -> None:
        self.query_one("#diff-moved", PagedTable).focus()

    def _filter_moved(self, query: str) -> None:
        q = query.strip().lower()
        rows = self.moved if not q else [r for r in self.moved if q in str(r.get("node", "")).lower()
                                         or q in str(r.get("label", "")).lower()]
        self.query_one("#diff-moved", PagedTable).set_source(ListSource(rows))
        if self.result is None:
            self.query_one("#diff-moved-pane", Pane).border_title = "Moved nodes"
            return
        total = self.result.get("moved", len(self.moved))
        shown = f"{len(rows)} of {total}" if q else f"{total}"
        self.query_one("#diff-moved-pane", Pane).border_title = f"Moved nodes · {shown}"
