"""Spectrum: a run's computed eigenvalues with the largest gap marked, its community sizes, and the
members of one community (named by the version's node table when it has text attributes)."""

from __future__ import annotations

from typing import Any

from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.screen import Screen
from textual.widgets import Input, Label, Select, Static

from workspace.tui.widgets.charts import SizeHistogram, SpectrumPlot
from workspace.tui.widgets.chrome import Pane, ScreenBar, ScreenFooter, ScrollPane
from workspace.tui.widgets.detail import fmt_value, label, next_label_attribute
from workspace.tui.widgets.paged_table import Column, ListSource, PagedTable


def member_columns(label_by: str | None, stability: bool) -> list[Column]:
    """Columns of the members table: the node id, its name by ``label_by``, its stability."""
    cols = [Column("node", "node", 14 if label_by else 0, drop=1 if label_by else 0)]
    if label_by:
        cols.append(Column("label", label_by, 0, min_width=8))
    if stability:
        cols.append(Column("stability", "stability", 9, "right",
                           format=lambda v, r: "" if v is None else f"{v:.2f}"))
    return cols

MAX_CHOICES = 1000   # communities offered in the Members chooser, largest first

# diagnostics keys under which a method may report the k it derived from the spectrum itself
SUGGESTED_KEYS = ("eigengap_suggestion", "suggested_k", "k_suggested", "eigengap_k", "auto_k", "k_auto")


class SpectrumScreen(Screen):
    """Eigenvalue bars and community-size histogram of one run."""

    TITLE = "Spectrum"
    BINDINGS = [
        Binding("left_square_bracket", "step(-1)", "Older", tooltip="the run before this one"),
        Binding("right_square_bracket", "step(1)", "Newer", tooltip="the run after this one"),
        Binding("ctrl+f", "focus_run", "Run id", priority=True, tooltip="type a run id"),
        Binding("ctrl+l", "label_by", "Label by", priority=True,
                tooltip="name the members by the next text attribute of the node table, or by id only"),
    ]

    def __init__(self) -> None:
        super().__init__(id="spectrum")
        self.run_id: int | None = None
        self.label_attrs: list[str] = []   # text attributes of the run's version's node table
        self.label_by: str | None = None
        self.labels_off = False            # the user stepped to "ids only"
        self.members: dict[str, Any] | None = None
        self.members_index = None          # the open run's RunMembers: each community without a reload

    def compose(self) -> ComposeResult:
        yield ScreenBar("spectrum")
        with Horizontal(id="spectrum-top", classes="field-row"):
            yield Label("run", classes="name short")
            yield Input("", id="spectrum-run", placeholder="run id, enter", type="integer", compact=True)
            yield Static("", id="spectrum-summary")
        with VerticalScroll(id="spectrum-body"):
            with ScrollPane(title="Eigenvalues (solver order)", id="spectrum-plot-pane"):
                yield SpectrumPlot(id="spectrum-plot")
            with ScrollPane(title="Community sizes", id="spectrum-sizes-pane"):
                yield SizeHistogram(id="size-histogram")
            with Pane(title="Members", id="spectrum-members-pane"):
                yield Select([], prompt="community", id="members-community", compact=True)
                yield PagedTable(member_columns(None, False), id="members-table",
                                 empty_text="choose a community")
        yield ScreenFooter("spectrum")

    def on_screen_resume(self) -> None:
        run = getattr(self.app, "current_run", None)
        if run is not None and run != self.run_id:
            self.show_run(run)
        # the focus goes where the next thing to do is: the run box until a run is shown
        if self.run_id is None:
            self.query_one("#spectrum-run", Input).focus()
        else:
            self.query_one("#spectrum-plot-pane").focus()

    def clear(self, message: str) -> None:
        """A run that cannot be shown: say why, and leave nothing of the previous run on screen."""
        from rich.text import Text

        from workspace.tui.widgets.detail import BAD

        self.run_id = None
        self.query_one("#spectrum-summary", Static).update(Text(message, style=BAD))
        self.query_one(SpectrumPlot).show([], empty="—")
        self.query_one(SizeHistogram).show([], empty="—")
        self._set_communities([])

    def on_mount(self) -> None:
        self.on_screen_resume()

    def action_focus_run(self) -> None:
        self.query_one("#spectrum-run", Input).focus()

    @on(Input.Submitted, "#spectrum-run")
    def _typed(self, event: Input.Submitted) -> None:
        try:
            run = int(event.value)
        except ValueError:
            self.notify("type a run id (a whole number)", severity="error")
            return
        self.show_run(run)

    def action_step(self, delta: int) -> None:
        """``[`` / ``]``: the stored run before / after this one (ids may have gaps); a message at either end."""
        from workspace.services.browse import adjacent_run

        if self.run_id is None:
            self.notify("open a run first (type its id, or enter on a run in the Ledger)", severity="warning")
            return
        try:
            target = adjacent_run(self.app.store, self.run_id, delta)
        except Exception as exc:  # noqa: BLE001
            self.app.report(exc)
            return
        if target is None:
            self.notify(f"run {self.run_id} is the {'newest' if delta > 0 else 'oldest'} run in the store",
                        severity="information")
            return
        self.show_run(target)

    def show_run(self, run_id: int) -> None:
        from workspace.services.runs import show_run

        try:
            run = show_run(self.app.store, run_id)
        except Exception as exc:  # noqa: BLE001
            self.app.report(exc)
            self.clear(f"could not open run {run_id}: {exc}")
            return
        self.run_id = run_id
        self.app.current_run = run_id
        self.query_one("#spectrum-run", Input).value = str(run_id)
        what = run["method"] if run["kind"] == "computed" else f"attached: {run.get('label')}"
        self.query_one("#spectrum-summary", Static).update(
            f"{run['ref']} · {what} · {run['status']} · k = {fmt_value(run.get('k'))}")
        diag = run.get("diagnostics") or {}
        suggested = next((diag[k] for k in SUGGESTED_KEYS if isinstance(diag.get(k), int)), None)
        if suggested is not None and suggested < 2:   # runs recorded before the trivial gap was excluded
            suggested = None
        note_bits = [f"{label(k)}: {fmt_value(diag[k], snap=k != 'residual_norm_max')}"
                     for k in ("operator", "solver", "matvecs", "eigensolves", "residual_norm_max", "r") if k in diag]
        if suggested is not None:
            note_bits.insert(0, f"solver's eigengap suggestion: k = {suggested}")
        self.query_one(SpectrumPlot).show(run.get("eigenvalues") or [], suggested=run.get("k"),
                                          note="  ".join(note_bits), gap_k=suggested)
        self.query_one(SizeHistogram).show(run.get("communities") or [])
        self._set_communities(run.get("communities") or [])

    # --- members of one community -------------------------------------------------------------

    def _set_communities(self, communities: list[dict[str, Any]]) -> None:
        """Fill the community chooser (shown labels, largest first) and show the largest one's members."""
        select = self.query_one("#members-community", Select)
        table = self.query_one("#members-table", PagedTable)
        self.members = None
        table.set_source(ListSource([]))
        # the largest MAX_CHOICES (a run may have thousands of communities; `cutbook members` lists any)
        rows = sorted(communities, key=lambda c: (-(c.get("size") or 0), c.get("shown", c["community"])))
        rows = rows[:MAX_CHOICES]
        select.set_options([(f"c{c.get('shown', c['community'])} · {c.get('size')} nodes",
                             c.get("shown", c["community"])) for c in rows])
        self.query_one("#spectrum-members-pane", Pane).border_title = "Members"
        if rows and self.run_id is not None:
            select.value = rows[0].get("shown", rows[0]["community"])   # Select.Changed loads them

    @on(Select.Changed, "#members-community")
    def _community_chosen(self, event: Select.Changed) -> None:
        if self.run_id is not None and isinstance(event.value, int):   # not the blank choice
            self.load_members(self.run_id, int(event.value), None, choose=True)

    def action_label_by(self) -> None:
        if self.members is None:
            self.notify("open a run and choose a community first", severity="warning")
            return
        if not self.label_attrs:
            self.notify("this run's version has no node table with text attributes "
                        "(add one: cutbook nodes add REF FILE)", severity="warning")
            return
        nxt = next_label_attribute(self.label_attrs, self.label_by)
        self.labels_off = nxt is None
        self.load_members(self.members["run"], self.members["shown"], nxt)

    @work(thread=True, exclusive=True, group="members", exit_on_error=False)
    def load_members(self, run_id: int, shown: int, label_by: str | None, *, choose: bool = False) -> None:
        """One community's nodes (and names) in a worker: a community may hold millions of nodes."""
        from workspace.services.members import RunMembers
        from workspace.services.nodes import label_attributes, labels_of

        try:
            index = self.members_index
            if index is None or index.run_id != run_id:
                index = self.members_index = RunMembers(self.app.store, run_id)
            doc = index.page(shown)
            attrs = label_attributes(self.app.store, [run_id])
            if choose:
                label_by = self.label_by if self.label_by in attrs else (
                    None if self.labels_off or not attrs else attrs[0])
            comm = doc["communities"][0]
            names = labels_of(self.app.store, [run_id], label_by, comm["nodes"]) if label_by else {}
        except Exception as exc:  # noqa: BLE001
            self.app.call_from_thread(self.app.report, exc)
            return
        stability = comm.get("stability")
        rows = [{"node": node, "label": names.get(node, ""),
                 "stability": None if stability is None else stability[i]} for i, node in enumerate(comm["nodes"])]
        self.app.call_from_thread(self._show_members, {"run": run_id, "shown": shown, "size": comm["size"],
                                                       "rows": rows, "stability": stability is not None},
                                  attrs, label_by)

    def _show_members(self, members: dict[str, Any], attrs: list[str], label_by: str | None) -> None:
        if members["run"] != self.run_id:
            return  # another run was opened meanwhile
        self.members, self.label_attrs, self.label_by = members, attrs, label_by
        table = self.query_one("#members-table", PagedTable)
        table.columns = member_columns(label_by, members["stability"])
        table.set_source(ListSource(members["rows"]))
        table.refresh()
        self.query_one("#spectrum-members-pane", Pane).border_title = (
            f"Members of c{members['shown']} · {members['size']} nodes")
