"""Launch: pick a version and a parameter set (or fill the method's form), start, watch, cancel.

The run computes in a spawned process (:class:`workspace.jobs.RunJob`); the
app polls it from a timer and posts :mod:`workspace.tui.messages`, which this
screen turns into the progress bar, the stage line and the matvec count.
"""

from __future__ import annotations

from typing import Any

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.screen import Screen
from textual.widgets import Button, Input, Label, ProgressBar, Select, Static

from workspace.errors import CutbookError
from workspace.tui.messages import RunEnded, RunProgress, RunStarted, run_end_line
from workspace.tui.widgets.chrome import ScreenBar, ScreenFooter, ScrollPane
from workspace.tui.widgets.detail import STATUS_STYLE, fmt_value, label
from workspace.tui.widgets.param_form import ParamForm

NO_SET = "__form__"


class LaunchScreen(Screen):
    """Set up and start a run; follow its progress."""

    TITLE = "Launch"
    BINDINGS = [
        Binding("ctrl+r", "start", "Start run", priority=True),
        Binding("ctrl+t", "stop", "Stop run", priority=True),
        Binding("ctrl+s", "save_set", "Save parameter set", priority=True),
        Binding("ctrl+w", "sweep", "Sweep k", priority=True),
    ]

    def __init__(self) -> None:
        super().__init__(id="launch")
        self.methods: dict[str, dict[str, Any]] = {}
        self.sets: dict[str, dict[str, Any]] = {}
        self.versions: list[str] = []
        self.last_run: int | None = None
        self.started_at: float | None = None  # monotonic time the current run was started
        self.last_progress: str = ""

    def compose(self) -> ComposeResult:
        yield ScreenBar("launch")
        with Horizontal(id="launch-body"):
            with VerticalScroll(id="launch-form-pane", classes="pane") as form_pane:
                form_pane.border_title = "What to run"
                with Horizontal(classes="field-row"):
                    yield Label("version", classes="name")
                    yield Select([], prompt="network version", id="launch-version", compact=True)
                with Horizontal(classes="field-row"):
                    yield Label("saved set", classes="name")
                    yield Select([("none — fill the method's form", NO_SET)], value=NO_SET, id="launch-set",
                                 allow_blank=False, compact=True)
                with Horizontal(classes="field-row"):
                    yield Label("method", classes="name")
                    yield Select([], prompt="method", id="launch-method", compact=True)
                yield Static("", id="method-summary", classes="help")
                yield ParamForm(id="launch-form")
                with Horizontal(classes="field-row"):
                    yield Label("seed", classes="name")
                    yield Input("0", id="launch-seed", type="integer", compact=True)
                    yield Label("repeats", classes="name short")
                    yield Input("1", id="launch-repeats", type="integer", compact=True)
                with Horizontal(classes="field-row"):
                    yield Label("sweep k", classes="name")
                    yield Input("", id="launch-sweep-k", compact=True,
                                placeholder="e.g. 2..10 (ctrl+w; repeats = seeds)")
                with Horizontal(classes="field-row"):
                    yield Label("sweep on", classes="name")
                    yield Input("", id="launch-sweep-on", compact=True,
                                placeholder="this process · N Dask workers · tcp://host:port")
                with Horizontal(classes="field-row"):
                    yield Label("save as", classes="name")
                    yield Input("", id="launch-save-name", placeholder="name for a new parameter set", compact=True)
                    yield Button("Save ^s", id="launch-save", variant="default", compact=True)
                with Horizontal(id="launch-buttons"):
                    yield Button("Start ^r", id="launch-start", variant="primary", compact=True)
                    yield Button("Stop ^t", id="launch-stop", variant="error", disabled=True, compact=True)
            with ScrollPane(title="Progress", id="launch-progress-pane"):
                yield Static("idle — nothing is computing", id="run-state")
                yield ProgressBar(total=None, show_eta=False, show_percentage=False, id="run-bar")
                yield Static("", id="run-stage")
                yield Static("", id="run-outcome")
        yield ScreenFooter("launch")

    def on_unmount(self) -> None:
        self.started_at = None

    # --- filling --------------------------------------------------------------------------------------

    def on_mount(self) -> None:
        from workspace.services.catalog import describe_methods

        try:
            self.methods = {m["name"]: m for m in describe_methods()}
        except Exception as exc:  # noqa: BLE001
            self.app.report(exc)
            return
        self.query_one("#launch-method", Select).set_options(
            [(f"{name}  ({m['family']})", name) for name, m in self.methods.items()])
        self._load_versions()
        self._apply_requested_version()
        self._sync_job_state()

    def _load_versions(self) -> None:
        from workspace.services.browse import outline

        try:
            self.versions = [v["ref"] for p in outline(self.app.store) for n in p["networks"] for v in n["versions"]]
        except Exception as exc:  # noqa: BLE001
            self.app.report(exc)
            return
        select = self.query_one("#launch-version", Select)
        current = select.value
        select.set_options([(v, v) for v in self.versions])
        if current in self.versions:
            select.value = current

    def on_screen_resume(self) -> None:
        self._apply_requested_version()
        self._sync_job_state()

    def _apply_requested_version(self) -> None:
        ref = getattr(self.app, "launch_version", None)
        select = self.query_one("#launch-version", Select)
        if not ref and select.value is Select.NULL and getattr(self.app, "current_run", None) is not None:
            from workspace.services.runs import show_run

            try:  # start from the version of the run last looked at
                ref = show_run(self.app.store, self.app.current_run)["ref"]
            except Exception:  # noqa: BLE001 - a convenience only
                ref = None
        if not ref:
            return
        self.app.launch_version = None
        select = self.query_one("#launch-version", Select)
        if ref not in self.versions:
            self._load_versions()
        if ref in self.versions:
            select.value = ref
        else:
            self.notify(f"{ref} is not in the store", severity="warning")

    def _project(self) -> str | None:
        ref = self.query_one("#launch-version", Select).value
        return ref.split("/", 1)[0] if isinstance(ref, str) else None

    @on(Select.Changed, "#launch-version")
    def _version_changed(self, event: Select.Changed) -> None:
        from workspace.services.params import list_params

        project = self._project()
        self.sets = {}
        if project:
            try:
                self.sets = {p["ref"]: p for p in list_params(self.app.store, project)}
            except Exception as exc:  # noqa: BLE001
                self.app.report(exc)
        options = [("none — fill the method's form", NO_SET)]
        options += [(f"{ref}  {p['method']} k={p['k'] or 'default'}", ref) for ref, p in self.sets.items()]
        sel = self.query_one("#launch-set", Select)
        sel.set_options(options)
        sel.value = NO_SET

    @on(Select.Changed, "#launch-set")
    async def _set_changed(self, event: Select.Changed) -> None:
        ref = event.value
        method_select = self.query_one("#launch-method", Select)
        if ref in self.sets:
            p = self.sets[ref]
            method_select.disabled = True
            method_select.value = p["method"]
            await self.query_one(ParamForm).set_method(self.methods[p["method"]], k=p["k"], values=p["params"])
            self._describe(p["method"], f"from saved set {ref}; edits become overrides")
        else:
            method_select.disabled = False
            if method_select.value is not Select.NULL:
                await self._fill_method(method_select.value)

    @on(Select.Changed, "#launch-method")
    async def _method_changed(self, event: Select.Changed) -> None:
        if self.query_one("#launch-set", Select).value in self.sets:
            return
        if event.value is not Select.NULL:
            await self._fill_method(event.value)

    async def _fill_method(self, name: str) -> None:
        await self.query_one(ParamForm).set_method(self.methods[name])
        self._describe(name)

    def _describe(self, name: str, extra: str = "") -> None:
        m = self.methods[name]
        text = f"{m['summary']}\n{m['reference']}"
        if extra:
            text += f"\n{extra}"
        self.query_one("#method-summary", Static).update(text)

    # --- building the request ---------------------------------------------------------------------

    def _int(self, wid: str, what: str) -> int:
        from workspace.errors import ParameterError

        text = self.query_one(wid, Input).value.strip()
        try:
            return int(text)
        except ValueError:
            raise ParameterError(f"{what} must be an integer, got {text!r}") from None

    def prepare(self):
        """The validated :class:`RunSpec` for the form as it stands (raises a CutbookError)."""
        from workspace.errors import UsageError
        from workspace.services.runs import prepare_run

        version = self.query_one("#launch-version", Select).value
        if not isinstance(version, str):
            raise UsageError("choose a network version first")
        form = self.query_one(ParamForm)
        k, values = form.validated()
        seed, repeats = self._int("#launch-seed", "seed"), self._int("#launch-repeats", "repeats")
        set_ref = self.query_one("#launch-set", Select).value
        if set_ref in self.sets:
            saved = self.sets[set_ref]
            _, saved_values = self._validated_saved(saved)
            overrides = {key: val for key, val in values.items() if saved_values.get(key) != val}
            k_override = None if k == saved["k"] else k
            return prepare_run(self.app.store, version, params_ref=set_ref, sets=overrides, k=k_override,
                               seed=seed, repeats=repeats)
        return prepare_run(self.app.store, version, method=form.method["name"], sets=values, k=k, seed=seed,
                           repeats=repeats)

    @staticmethod
    def _validated_saved(saved: dict[str, Any]):
        from workspace.services.params import validate

        return validate(saved["method"], saved["k"], saved["params"])

    # --- actions ----------------------------------------------------------------------------------------

    def action_start(self) -> None:
        if self.app.job is not None and not self.app.job.finished:
            self.notify("a run is already computing; stop it first (ctrl+t)", severity="warning")
            return
        try:
            spec = self.prepare()
        except CutbookError as exc:
            self.app.report(exc)
            return
        self.app.start_job(spec)
        if self.app.job is None:
            return
        import time

        self.started_at = time.monotonic()
        self.last_progress = "starting"
        self.query_one("#run-outcome", Static).update("")
        self.query_one("#run-state", Static).update(f"starting a process for {spec.method} on {spec.version_ref} …")
        bar = self.query_one("#run-bar", ProgressBar)
        bar.update(total=None, progress=0)
        bar.add_class("-busy")
        self._tick()
        self._sync_job_state()

    def action_sweep(self) -> None:
        """Start a sweep over the k typed in 'sweep k' (see workspace/tui/screens/sweep.py)."""
        from workspace.tui.screens.sweep import launch_sweep_from

        launch_sweep_from(self)

    def action_stop(self) -> None:
        if self.app.job is None or self.app.job.finished:
            self.notify("nothing is computing", severity="warning")
            return
        self.app.job.cancel()
        self.query_one("#run-state", Static).update("stopping … (the solver checks between matrix products)")

    def action_save_set(self) -> None:
        from workspace.errors import UsageError
        from workspace.services.params import save_params

        name = self.query_one("#launch-save-name", Input).value.strip()
        project = self._project()
        try:
            if not project:
                raise UsageError("choose a network version first (parameter sets belong to its project)")
            if not name:
                raise UsageError("type a name for the parameter set in 'save as'")
            form = self.query_one(ParamForm)
            k, values = form.validated()
            saved = save_params(self.app.store, f"{project}/{name}", method=form.method["name"], k=k,
                                values=values)
        except CutbookError as exc:
            self.app.report(exc)
            return
        verb = "saved" if saved["created_new"] else "already saved as"
        self.notify(f"{verb} {saved['ref']}")
        self._version_changed(None)  # list the new set
        self.query_one("#launch-set", Select).value = saved["ref"]

    @on(Button.Pressed, "#launch-start")
    def _start_pressed(self) -> None:
        self.action_start()

    @on(Button.Pressed, "#launch-stop")
    def _stop_pressed(self) -> None:
        self.action_stop()

    @on(Button.Pressed, "#launch-save")
    def _save_pressed(self) -> None:
        self.action_save_set()

    # --- progress -----------------------------------------------------------------------------------------

    def _sync_job_state(self) -> None:
        busy = self.app.job is not None and not self.app.job.finished
        self.query_one("#launch-start", Button).disabled = busy
        self.query_one("#launch-stop", Button).disabled = not busy

    def _tick(self) -> None:
        """Refresh the stage line's elapsed time every half second while a run computes."""
        import time

        if self.started_at is None:
            return
        elapsed = time.monotonic() - self.started_at
        self.query_one("#run-stage", Static).update(f"{self.last_progress}  ·  {elapsed:.1f} s elapsed")
        self.set_timer(0.5, self._tick)

    def on_run_started(self, message: RunStarted) -> None:
        self.query_one("#run-state", Static).update(f"run {message.run_id} computing (its own process)")

    def on_run_progress(self, message: RunProgress) -> None:
        bar = self.query_one("#run-bar", ProgressBar)
        bar.add_class("-busy")
        if message.total:
            bar.update(total=message.total, progress=message.done)
            share = f"  ·  {100 * message.done / message.total:.0f}%"
        else:
            bar.update(total=None)  # unknown length: the bar pulses while the elapsed time counts
            share = ""
        total = f" of {message.total}" if message.total else ""
        self.last_progress = f"stage: {message.stage}  ·  {message.done}{total} matvecs{share}"
        self._tick_once()

    def _tick_once(self) -> None:
        import time

        elapsed = f"  ·  {time.monotonic() - self.started_at:.1f} s elapsed" if self.started_at is not None else ""
        self.query_one("#run-stage", Static).update(self.last_progress + elapsed)

    def on_run_ended(self, message: RunEnded) -> None:
        import time

        from rich.text import Text

        bar = self.query_one("#run-bar", ProgressBar)
        bar.update(total=1, progress=1 if message.status == "done" else 0)
        bar.remove_class("-busy")  # an idle bar would pulse forever
        elapsed = time.monotonic() - self.started_at if self.started_at is not None else None
        self.started_at = None
        self._sync_job_state()
        self.last_run = message.run_id
        line = run_end_line(message.run_id, message.status, message.message)
        state = Text(line)
        head = len(f"run {message.run_id if message.run_id is not None else '?'} ")
        state.stylize(STATUS_STYLE.get(message.status, ""), head, head + len(message.status))
        self.query_one("#run-state", Static).update(state)
        self.query_one("#run-stage", Static).update(
            f"{self.last_progress}  ·  {elapsed:.1f} s in all" if elapsed is not None and self.last_progress else "")
        outcome = self.query_one("#run-outcome", Static)
        if message.status == "done" and message.run_id is not None:
            from workspace.services.runs import show_run

            try:
                run = show_run(self.app.store, message.run_id)
            except Exception as exc:  # noqa: BLE001
                self.app.report(exc)
                return
            lines = [f"k = {run['k']}   wall time {fmt_value(run.get('wall_time_s'))} s"]
            lines += [f"  {label(name):<22}{fmt_value(v)}" for name, v in (run.get("quality") or {}).items()
                      if not isinstance(v, (list, dict)) and name != "k"]
            for w in run.get("warnings") or []:
                lines.append(f"  ! {w}")
            lines.append("\nenter on the run in the Ledger (1) or 3 opens its spectrum")
            outcome.update("\n".join(lines))
        else:
            outcome.update("")
