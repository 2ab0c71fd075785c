"""Sweep: quality and stability against k with the recommended k marked, the measures per k, the split
view, and a sweep computing in its own process (progress per task, stop keeps the finished runs).

A sweep is launched from the Launch screen (``ctrl+w``, with the k range typed in its "sweep k" box,
the repeats box as the number of seeds and its "sweep on" box naming the executor: empty for this
machine's threads (or ``$CUTBOOK_SCHEDULER`` when set), a number N for a Dask cluster of N worker
processes started here, or a Dask scheduler's address) or with ``cutbook sweep``; this screen shows any recorded
sweep by id. Enter on a row of the table opens that k's run on the Spectrum screen.
"""

from __future__ import annotations

from typing import Any

from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.screen import Screen
from textual.widget import Widget
from textual.widgets import DataTable, Input, Label, ProgressBar, Static

from workspace.tui import palette
from workspace.tui.widgets.chrome import Pane, ScreenBar, ScreenFooter

from workspace.errors import CutbookError

BARS = " ▁▂▃▄▅▆▇█"
QUALITY_STYLE = palette.ACCENT      # orange and sky blue stay apart under colour-vision deficiencies
STABILITY_STYLE = palette.PRIMARY
MARK_STYLE = f"bold {palette.TEXT}"
MUTED_STYLE = palette.FAINT


def _bar_cells(value: float | None, top: float, height: int) -> list[str]:
    """Glyphs of one vertical bar, top row first, for ``value`` on a 0..``top`` scale."""
    if value is None or top <= 0:
        return [" "] * height
    eighths = int(round(max(0.0, min(value, top)) / top * height * 8))
    cells = []
    for row in range(height, 0, -1):
        fill = eighths - (row - 1) * 8
        cells.append(BARS[max(0, min(8, fill))])
    return cells


class SweepPlot(Widget):
    """Modularity (amber) and mean pairwise ARI among repeats (green) as bars against k; the recommended k
    marked below its column. ``values`` keeps exactly what is drawn (read by tests and the summary)."""

    DEFAULT_CSS = """
    SweepPlot { height: auto; min-height: 12; }
    """

    def __init__(self, *, id: str | None = None) -> None:  # noqa: A002 - Textual's keyword
        super().__init__(id=id)
        self.values: dict[str, Any] = {"k": [], "modularity": [], "ari_mean": [], "recommended": None}
        self.chart_height = 8

    def show(self, ks: list, modularity: list, ari: list, recommended: int | None) -> None:
        self.values = {"k": list(ks), "modularity": list(modularity), "ari_mean": list(ari),
                       "recommended": recommended}
        self.refresh(layout=True)

    def render(self) -> Text:
        ks = self.values["k"]
        if not ks:
            return Text("no finished k yet", style=MUTED_STYLE)
        width = max(20, self.size.width or 80)
        cell = 4 if 6 + 4 * len(ks) <= width else 3
        h = self.chart_height
        mods = self.values["modularity"]
        top_q = max([1.0] + [m for m in mods if m is not None])
        cols = [(_bar_cells(m, top_q, h), _bar_cells(a, 1.0, h)) for m, a in zip(mods, self.values["ari_mean"])]
        out = Text()
        for row in range(h):
            axis = "1.0 " if row == 0 else ("0.5 " if row == h // 2 else "    ")
            out.append(axis, style=MUTED_STYLE)
            for q, a in cols:
                out.append(q[row] * (cell - 2), style=QUALITY_STYLE)
                out.append(a[row], style=STABILITY_STYLE)
                out.append(" ")
            out.append("\n")
        out.append("  k ", style=MUTED_STYLE)
        for k in ks:
            out.append(str(k).rjust(cell - 1)[: cell - 1] + " ")
        out.append("\n    ")
        rec = self.values["recommended"]
        for k in ks:
            out.append(("▲" if k == rec else " ").rjust(cell - 1) + " ", style=MARK_STYLE)
        out.append("\n")
        out.append("modularity", style=QUALITY_STYLE)
        out.append(f" (scale 0..{top_q:.2g})  ")
        out.append("stability: mean ARI", style=STABILITY_STYLE)
        out.append(" (0..1)  ")
        out.append("▲ recommended" if rec is not None else "no k recommended", style=MARK_STYLE)
        return out


class SweepScreen(Screen):
    """One sweep: plot, table of measures per k, recommendation with reasons, split view."""

    TITLE = "Sweep"
    # local layout (kept beside the screen so the shared stylesheet needs no edit)
    DEFAULT_CSS = """
    #sweep-top Input { width: 16; }
    #sweep-summary { padding: 1 0 0 1; color: $dim; }
    #sweep-body .pane { height: auto; }
    #sweep-plot { height: 12; }
    #sweep-table { height: auto; max-height: 16; }
    #sweep-bar { width: 1fr; }
    """
    BINDINGS = [
        Binding("left_square_bracket", "step(-1)", "Older sweep"),
        Binding("right_square_bracket", "step(1)", "Newer sweep"),
        Binding("ctrl+f", "focus_id", "Sweep id box", priority=True),
        Binding("ctrl+t", "stop", "Stop sweep", priority=True),
        Binding("enter", "open_run", "Open k's run", show=True),
    ]

    def __init__(self) -> None:
        super().__init__(id="sweep")
        self.sweep_id: int | None = None
        self.job = None
        self.points: list[dict[str, Any]] = []
        self._timer = None
        self._pending = None   # a sweep asked for before the screen was composed
        self._ready = False

    def compose(self) -> ComposeResult:
        yield ScreenBar("sweep")
        with Horizontal(id="sweep-top", classes="field-row"):
            yield Label("sweep", classes="name")
            yield Input("", id="sweep-id", placeholder="sweep id, then enter", type="integer", compact=True)
            yield Static("", id="sweep-summary")
        with VerticalScroll(id="sweep-body"):
            with Pane(title="Progress", id="sweep-progress-pane"):
                yield Static("idle — no sweep computing (launch one from Launch with ctrl+w)", id="sweep-state")
                yield ProgressBar(total=None, show_eta=False, id="sweep-bar")
            with Pane(title="Quality and stability against k"):
                yield SweepPlot(id="sweep-plot")
            with Pane(title="Measures per k (▲ rec: recommended · enter: open the run)"):
                yield DataTable(id="sweep-table", cursor_type="row", zebra_stripes=True)
            with Pane(title="Recommendation"):
                yield Static("", id="sweep-recommendation")
            with Pane(title="How communities split as k grows"):
                yield Static("", id="sweep-splits")
        yield ScreenFooter("sweep")

    def on_mount(self) -> None:
        self._ready = True
        for pane in self.query("#sweep-body .pane"):   # the shared stylesheet makes panes fill; these stack
            pane.styles.height = "auto"
        self.query_one("#sweep-bar", ProgressBar).display = False   # shown while a sweep computes
        self._set_columns(None)
        if self._pending is not None:
            (spec, executor), self._pending = self._pending, None
            self.start(spec, executor)
            return
        if self.sweep_id is None:
            from workspace.services.sweeps import list_sweeps

            try:
                rows = list_sweeps(self.app.store)
            except CutbookError as exc:
                self.app.report(exc)
                return
            if rows:
                self.show_sweep(rows[0]["sweep"])
        self.on_screen_resume()

    def _set_columns(self, varied: str | None) -> None:
        """The table's columns: a column of the varied parameter's values (named after it) only when
        the sweep varies one (a k-only sweep showed a column of dashes)."""
        table = self.query_one("#sweep-table", DataTable)
        table.clear(columns=True)
        table.add_columns("k", *([varied] if varied else []), "run", "modularity", "ncut", "conductance",
                          "coverage", "eigengap", "ARI mean", "ARI sd", "VI mean", "VI sd", "")

    def on_screen_resume(self) -> None:
        # the focus goes where the next thing to do is: the id box until a sweep is shown, then the
        # table of measures (so that 1-7, [ ] and enter act on the screen instead of typing digits
        # into the id box), without scrolling the plot above it out of a small terminal
        if self.sweep_id is None:
            self.query_one("#sweep-id", Input).focus()
        else:
            self.query_one("#sweep-table", DataTable).focus(scroll_visible=False)

    def action_focus_id(self) -> None:
        self.query_one("#sweep-id", Input).focus()

    @on(Input.Submitted, "#sweep-id")
    def _typed(self, event: Input.Submitted) -> None:
        try:
            sweep_id = int(event.value)
        except ValueError:
            self.notify("type a sweep id (a whole number)", severity="error")
            return
        self.show_sweep(sweep_id)
        if self.sweep_id == sweep_id:
            self.on_screen_resume()

    def action_step(self, delta: int) -> None:
        if self.sweep_id is not None:
            self.show_sweep(max(1, self.sweep_id + delta))

    # --- showing ------------------------------------------------------------------------------------------

    def show_sweep(self, sweep_id: int) -> None:
        from workspace.services.sweeps import show_sweep

        try:
            sw = show_sweep(self.app.store, sweep_id)
        except Exception as exc:  # noqa: BLE001
            self.app.report(exc)
            return
        self.sweep_id = sweep_id
        self.query_one("#sweep-id", Input).value = str(sweep_id)
        vary = f" · {sw['vary']['name']} varied" if sw["vary"] else ""
        self.query_one("#sweep-summary", Static).update(
            f"  {sw['ref']} · {sw['method']}{vary} · {sw['seeds']} seed(s) · {sw['status']} · "
            f"runs {sw['tasks']['done']}/{sw['tasks']['total']}")
        self.points = sw["points"]
        recs = {repr(r["value"]): r for r in sw["recommendations"]}
        first_value = sw["points"][0]["value"] if sw["points"] else None
        plotted = [p for p in sw["points"] if p["value"] == first_value and p["k"] is not None]
        rec = recs.get(repr(first_value))
        self.query_one(SweepPlot).show([p["k"] for p in plotted], [p["modularity"] for p in plotted],
                                       [p["ari_mean"] for p in plotted], rec["recommended"] if rec else None)
        table = self.query_one("#sweep-table", DataTable)
        self._set_columns(sw["vary"]["name"] if sw["vary"] else None)
        for i, p in enumerate(sw["points"]):
            r = recs.get(repr(p["value"]))
            mark = "▲ rec" if r is not None and r["recommended"] == p["k"] else ("stable" if p["stable"] else "")
            varied = (p["value"],) if sw["vary"] else ()
            table.add_row(*[_fmt(x) for x in (p["k"] if p["k"] is not None else p["k_found"], *varied, p["run"],
                                              p["modularity"], p["normalized_cut"], p["conductance"], p["coverage"],
                                              p["eigengap"], p["ari_mean"], p["ari_sd"], p["vi_mean"], p["vi_sd"])],
                          mark, key=str(i))
        lines = []
        for r in sw["recommendations"]:
            label = f" ({sw['vary']['name']} = {_fmt(r['value'])})" if sw["vary"] else ""
            lines.append(f"recommended k = {r['recommended']}{label}" if r["recommended"] is not None
                         else f"no k recommended{label}")
            lines += [f"  note: {n}" for n in r["notes"]]
            for c in r["candidates"][:3]:
                lines.append(f"  {c['rank']}. k = {c['k']}")
                lines += [f"      - {reason}" for reason in c["reasons"]]
        if not sw["recommendations"]:
            lines.append("no k was swept (a parameter only): compare the rows above")
        self.query_one("#sweep-recommendation", Static).update(Text("\n".join(lines)))
        split_lines = []
        for s in sw["splits"]:
            split_lines.append(f"k = {s['from_k']} → {s['to_k']}" + (f"  ({_fmt(s['value'])})" if sw["vary"] else ""))
            for row in s["communities"]:
                kids = ", ".join(f"{c['community']} ({c['size']})" for c in row["children"])
                verb = {"split": "splits into", "kept": "stays as", "reshaped": "becomes"}.get(row["kind"])
                split_lines.append(f"  {row['community']} ({row['size']}) {verb} {kids}" if verb else
                                   f"  {row['community']} ({row['size']}) is spread over other communities")
        self.query_one("#sweep-splits", Static).update(Text("\n".join(split_lines) or "one k only"))

    def action_open_run(self) -> None:
        table = self.query_one("#sweep-table", DataTable)
        if not self.points or table.cursor_row is None or table.cursor_row >= len(self.points):
            return
        run = self.points[table.cursor_row]["run"]
        if run is not None:
            self.app.open_run(run, "spectrum")

    @on(DataTable.RowSelected, "#sweep-table")
    def _row_selected(self, event: DataTable.RowSelected) -> None:
        self.action_open_run()

    # --- a sweep computing ----------------------------------------------------------------------------

    def start(self, spec, executor=None) -> None:
        """Start a validated :class:`workspace.services.sweeps.SweepSpec` in its own process (its tasks on
        ``executor``, a :class:`workspace.jobs.executors.ExecutorSpec`; default this machine's threads)."""
        from workspace.jobs.sweeps import SweepJob

        if self.job is not None and not self.job.finished:
            self.notify("a sweep is already computing; stop it first (ctrl+t)", severity="warning")
            return
        if not self._ready:
            self._pending = (spec, executor)
            return
        try:
            self.job = SweepJob(self.app.store.url, spec, executor).start()
        except Exception as exc:  # noqa: BLE001
            self.job = None
            self.app.report(exc)
            return
        where = "" if executor is None or executor.kind == "local" else f" (tasks on {executor.label})"
        self.query_one("#sweep-state", Static).update(
            f"starting a process for the sweep on {spec.version_ref}{where} …")
        bar = self.query_one("#sweep-bar", ProgressBar)
        bar.display = True
        bar.update(total=None, progress=0)
        if self._timer is None:
            self._timer = self.app.set_interval(getattr(self.app, "poll_interval", 0.1), self._poll,
                                                name="sweep-job-poll")

    def action_stop(self) -> None:
        if self.job is None or self.job.finished:
            self.notify("no sweep is computing", severity="warning")
            return
        self.job.cancel()
        self.query_one("#sweep-state", Static).update("stopping … finished runs are kept")

    def _poll(self) -> None:
        job = self.job
        if job is None:
            return
        try:
            events = job.poll()
        except Exception as exc:  # noqa: BLE001
            self.app.report(exc)
            return
        for ev in events:
            if ev["type"] == "started":
                self.query_one("#sweep-state", Static).update(f"sweep {ev['sweep']} computing (its own process)")
            elif ev["type"] == "progress":
                self.query_one("#sweep-bar", ProgressBar).update(total=ev["total"], progress=ev["done"])
                failed = f" · {ev['failed']} failed" if ev.get("failed") else ""
                self.query_one("#sweep-state", Static).update(
                    f"sweep {job.sweep_id}: {ev['done']}/{ev['total']} tasks{failed} · {ev['elapsed_s']:.1f} s · "
                    f"{ev['task']} ({ev['stage']})")
                if ev["stage"] == "stored" and job.sweep_id is not None and self.is_mounted:
                    self.show_sweep(job.sweep_id)
            elif ev["type"] == "finished":
                severity = {"done": "information", "cancelled": "warning"}.get(ev["status"], "error")
                self.app.notify(f"sweep {ev.get('sweep')} {ev['status']}"
                                + (f": {ev['message']}" if ev.get("message") and ev["status"] != "done" else ""),
                                severity=severity, markup=False)
                self.query_one("#sweep-state", Static).update(f"sweep {ev.get('sweep')} {ev['status']}")
                if ev.get("sweep") is not None:
                    self.show_sweep(ev["sweep"])
                if self._timer is not None:
                    self._timer.stop()
                    self._timer = None

    def on_unmount(self) -> None:
        if self.job is not None and not self.job.finished:
            self.job.cancel()
            self.job.wait(timeout=10)
            if not self.job.finished:
                self.job.kill()


def launch_sweep_from(launch) -> None:
    """``ctrl+w`` on the Launch screen: the form's method and parameters, k from its "sweep k" box,
    seeds from its repeats box; start the sweep and show it here."""
    from textual.widgets import Select

    from workspace.errors import UsageError
    from workspace.jobs.executors import executor_from_text
    from workspace.services.sweeps import prepare_sweep
    from workspace.tui.widgets.param_form import ParamForm

    try:
        version = launch.query_one("#launch-version", Select).value
        if not isinstance(version, str):
            raise UsageError("choose a network version first")
        form = launch.query_one(ParamForm)
        _, values = form.validated()
        ks = launch.query_one("#launch-sweep-k", Input).value.strip() or None
        executor = executor_from_text(launch.query_one("#launch-sweep-on", Input).value)
        seeds = launch._int("#launch-repeats", "repeats")
        seed = launch._int("#launch-seed", "seed")
        set_ref = launch.query_one("#launch-set", Select).value
        if set_ref in launch.sets:
            spec = prepare_sweep(launch.app.store, version, params_ref=set_ref, sets=values, ks=ks, seeds=seeds,
                                 seed=seed)
        else:
            spec = prepare_sweep(launch.app.store, version, method=form.method["name"], sets=values, ks=ks,
                                 seeds=seeds, seed=seed)
    except CutbookError as exc:
        launch.app.report(exc)
        return
    screen = launch.app.workspace_screen("sweep")
    screen.start(spec, executor)   # started at once, or as soon as the screen is composed
    launch.app.action_goto("sweep")


def _fmt(x) -> str:
    if x is None:
        return "-"
    if isinstance(x, float):
        return f"{x:.4g}"
    return str(x)
