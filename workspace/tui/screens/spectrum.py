"""Spectrum: a run's computed eigenvalues with the largest gap marked, and its community sizes."""

from __future__ import annotations

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.screen import Screen
from textual.widgets import Input, Label, Static

from workspace.tui.widgets.charts import SizeHistogram, SpectrumPlot
from workspace.tui.widgets.chrome import ScreenBar, ScreenFooter, ScrollPane
from workspace.tui.widgets.detail import fmt_value, label

# diagnostics keys under which a method may report the k it derived from the spectrum itself
SUGGESTED_KEYS = ("eigengap_suggestion", "suggested_k", "k_suggested", "eigengap_k", "auto_k", "k_auto")


class SpectrumScreen(Screen):
    """Eigenvalue bars and community-size histogram of one run."""

    TITLE = "Spectrum"
    BINDINGS = [
        Binding("left_square_bracket", "step(-1)", "Older", tooltip="the run before this one"),
        Binding("right_square_bracket", "step(1)", "Newer", tooltip="the run after this one"),
        Binding("ctrl+f", "focus_run", "Run id", priority=True, tooltip="type a run id"),
    ]

    def __init__(self) -> None:
        super().__init__(id="spectrum")
        self.run_id: int | None = None

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
