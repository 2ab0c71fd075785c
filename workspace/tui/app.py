"""The cutbook terminal workspace: seven screens over one store.

Screens (switch with 1–7, the command palette, or the keys each screen shows):
Ledger (browse), Launch, Spectrum, Diff, Node lookup, Sweep, Updates. The app owns the store,
the one run job at a time, and the cross-screen picks (current run, diff
sides). Long work never runs on the event loop: the solver runs in a spawned
process polled by a timer; store reads that can be slow run in worker threads.
"""

from __future__ import annotations

from functools import partial
from typing import Any

from textual.app import App
from textual.binding import Binding
from textual.command import DiscoveryHit, Hit, Hits, Provider

from workspace.errors import CutbookError
from workspace.tui import palette
from workspace.tui.messages import RunEnded, RunProgress, RunStarted, StoreChanged, run_end_line
from workspace.tui.screens.ledger import LedgerScreen  # the first screen; the others load on first use

SCREEN_NAMES = {"ledger": "Ledger", "launch": "Launch", "spectrum": "Spectrum", "diff": "Diff",
                "lookup": "Node lookup", "sweep": "Sweep", "updates": "Updates"}
SCREEN_CLASSES = {"ledger": ("ledger", "LedgerScreen"), "launch": ("launch", "LaunchScreen"),
                  "spectrum": ("spectrum", "SpectrumScreen"), "diff": ("diff", "DiffScreen"),
                  "lookup": ("lookup", "LookupScreen"), "sweep": ("sweep", "SweepScreen"),
                  "updates": ("updates", "UpdatesScreen")}
SCREEN_HELP = {
    "ledger": "browse projects, networks, versions and runs",
    "launch": "start a run from a parameter set or the method's form",
    "spectrum": "eigenvalues with the largest gap, community sizes",
    "diff": "compare two runs: scores, matches, events, moved nodes",
    "lookup": "where a node sits across runs and versions",
    "sweep": "quality and stability against k, recommended k, how communities split",
    "updates": "what changed when tracked parameter sets re-ran on a new version, latest first",
}


def _start_process_helpers() -> None:
    """Start multiprocessing's resource tracker while stderr is still the real one.

    Textual replaces ``sys.stderr`` while the app runs; the tracker, started
    lazily by the first spawned run, would then fail to pass that stream to its
    process ("bad value(s) in fds_to_keep"). Starting it up front avoids that.
    """
    from multiprocessing import resource_tracker

    try:
        resource_tracker.ensure_running()
    except (OSError, ValueError):  # no usable stderr at all: runs will report their own failure
        pass


class WorkspaceCommands(Provider):
    """Command-palette entries for the main actions, and 'run N' to open a run."""

    def _commands(self) -> list[tuple[str, str, Any]]:
        app: CutbookApp = self.app  # type: ignore[assignment]
        out = [(f"Go to {title}", SCREEN_HELP[name], partial(app.action_goto, name))
               for name, title in SCREEN_NAMES.items()]
        out += [
            ("Start run", "start the run set up on the Launch screen", app.palette_start),
            ("Stop run", "ask the computing run to stop", app.palette_stop),
            ("Compare picked runs", "open the Diff of the runs picked as A and B", partial(app.action_goto, "diff")),
            ("Refresh lists", "count runs and versions again", app.action_refresh_all),
        ]
        return out

    async def discover(self) -> Hits:
        for title, help_text, callback in self._commands():
            yield DiscoveryHit(title, callback, help=help_text)

    async def search(self, query: str) -> Hits:
        matcher = self.matcher(query)
        app: CutbookApp = self.app  # type: ignore[assignment]
        for title, help_text, callback in self._commands():
            score = matcher.match(title)
            if score > 0:
                yield Hit(score, matcher.highlight(title), callback, help=help_text)
        words = query.strip().lower().split()
        if words and words[-1].isdigit():
            run_id = int(words[-1])
            yield Hit(1.0, f"Spectrum of run {run_id}", partial(app.open_run, run_id, "spectrum"),
                      help="eigenvalues and community sizes of that run")
            yield Hit(0.9, f"Diff side A = run {run_id}", partial(app.pick, "a", run_id))
            yield Hit(0.9, f"Diff side B = run {run_id}", partial(app.pick, "b", run_id))


class CutbookApp(App):
    """Terminal workspace over one open store."""

    TITLE = "cutbook"
    CSS_PATH = "app.tcss"
    COMMANDS = App.COMMANDS | {WorkspaceCommands}
    # screens get these classes from the terminal size; app.tcss lays panes out per class
    HORIZONTAL_BREAKPOINTS = [(0, "-narrow"), (110, "-wide"), (160, "-xwide")]
    VERTICAL_BREAKPOINTS = [(0, "-short"), (30, "-tall")]
    ALLOW_IN_MAXIMIZED_VIEW = "Footer, ScreenBar"
    # the screen keys live in the top bar (current screen marked), so the footer keeps room for each screen's own
    BINDINGS = [
        Binding("1", "goto('ledger')", "Ledger", show=False, tooltip="browse the store"),
        Binding("2", "goto('launch')", "Launch", show=False, tooltip="start a run"),
        Binding("3", "goto('spectrum')", "Spectrum", show=False, tooltip="eigenvalues and sizes of a run"),
        Binding("4", "goto('diff')", "Diff", show=False, tooltip="compare two runs"),
        Binding("5", "goto('lookup')", "Lookup", show=False, tooltip="where a node sits across runs"),
        Binding("6", "goto('sweep')", "Sweep", show=False, tooltip="quality and stability across a range of k"),
        Binding("7", "goto('updates')", "Updates", show=False, tooltip="change reports of tracked parameter sets"),
        Binding("question_mark,f1", "keys_help", "Keys", tooltip="this list of keys"),
        Binding("m", "maximise", "Max", tooltip="the pane holding the focus fills the screen; m again restores"),
        Binding("ctrl+p", "command_palette", "Palette", show=False, tooltip="every command by name; 'run N' opens a run"),
        Binding("ctrl+q", "quit", "Quit", show=False, priority=True, tooltip="stop a computing run and leave"),
        Binding("escape", "leave_field", "Leave field", show=False),
    ]

    def __init__(self, store, *, poll_interval: float = 0.1) -> None:
        super().__init__()
        self.store = store
        self.poll_interval = poll_interval
        self.job = None
        self.current_run: int | None = None
        self.diff_pick: dict[str, int | None] = {"a": None, "b": None}
        self.launch_version: str | None = None
        self.lookup_network: str | None = None
        self.workspace_screens: dict[str, Any] = {}
        self.register_theme(palette.theme())
        self.theme = "cutbook-fjord"
        _start_process_helpers()

    @property
    def store_label(self) -> str:
        """The open store as the top bar shows it: the SQLite path, or the URL without a password."""
        url = self.store.url
        if url.startswith("sqlite:///"):
            return url.removeprefix("sqlite:///")
        try:
            from sqlalchemy.engine import make_url

            return make_url(url).render_as_string(hide_password=True)
        except Exception:  # noqa: BLE001 - a label only
            return url.split("@")[-1]

    def get_theme_variable_defaults(self) -> dict[str, str]:
        """Our own CSS variables ($dim, $faint, $rule, $bar-ground), from the palette."""
        return {**super().get_theme_variable_defaults(), **palette.theme().variables}

    def on_mount(self) -> None:
        self.sub_title = self.store_label
        if getattr(self.store, "readonly", None):  # browsing works; launching and saving are refused
            self.sub_title += f"  (read-only: {self.store.readonly})"
        ledger = self.workspace_screen("ledger")
        self.size_classes(ledger)
        self.push_screen(ledger)
        self.set_interval(self.poll_interval, self._poll_job, name="run-job-poll")

    # --- navigation ----------------------------------------------------------------------------------

    def workspace_screen(self, name: str):
        """The screen called ``name``, created (and its module imported) on first use."""
        screen = self.workspace_screens.get(name)
        if screen is None and name == "ledger":
            screen = LedgerScreen()
            self.workspace_screens[name] = screen
            self.install_screen(screen, name)
        if screen is None:
            import importlib

            module, cls = SCREEN_CLASSES[name]
            screen = getattr(importlib.import_module(f"workspace.tui.screens.{module}"), cls)()
            self.workspace_screens[name] = screen
            self.install_screen(screen, name)
        return screen

    def size_classes(self, screen) -> None:
        """Give ``screen`` its size classes now (Textual adds them on its first resize, one frame late)."""
        width, height = self.size
        for points, value in ((self.HORIZONTAL_BREAKPOINTS, width), (self.VERTICAL_BREAKPOINTS, height)):
            chosen = None
            for limit, cls in points:
                if value >= limit:
                    chosen = cls
            for _, cls in points:
                screen.set_class(cls == chosen, cls)

    def action_goto(self, name: str) -> None:
        if name not in SCREEN_NAMES:
            return
        screen = self.workspace_screen(name)
        if self.screen is screen:
            return
        self.size_classes(screen)
        self.switch_screen(name)

    def action_leave_field(self) -> None:
        """Escape from a text box: focus leaves it, so 1–5 switch screens again."""
        from textual.widgets import Input

        if isinstance(self.focused, Input):
            left = self.focused
            self.screen.set_focus(None)
            hook = getattr(self.screen, "after_leave_field", None)
            if hook is not None:
                hook(left)

    def action_keys_help(self) -> None:
        """``?`` / F1: the keys of the current screen and the global ones, in a closable window."""
        from workspace.tui.widgets.chrome import KeysHelp, describe_bindings

        screen = self.screen
        if isinstance(screen, KeysHelp):
            screen.dismiss()
            return
        title = SCREEN_NAMES.get(screen.id or "", getattr(screen, "TITLE", "") or "This screen")
        own = list(getattr(screen, "BINDINGS", []))
        if screen.id == "ledger":
            own.append(Binding("enter", "noop", "Open", tooltip="the run's spectrum and community sizes"))
        self.push_screen(KeysHelp(f"{title} screen", describe_bindings(own), describe_bindings(self.BINDINGS)))

    def action_maximise(self) -> None:
        """Toggle: the pane holding the focus fills the screen (the top bar and footer stay)."""
        screen = self.screen
        if screen.maximized is not None:
            screen.minimize()
            return
        node = self.focused
        while node is not None and not node.has_class("pane"):
            node = node.parent
        if node is None:
            panes = list(screen.query(".pane"))
            node = panes[0] if panes else None
        if node is None:
            self.notify("no pane to maximise here", severity="warning")
            return
        screen.maximized = node

    def open_run(self, run_id: int, where: str = "spectrum") -> None:
        self.current_run = run_id
        self.action_goto(where)
        screen = self.workspace_screens.get(where)
        if where == "spectrum" and screen is not None and screen.is_mounted:
            screen.show_run(run_id)

    def pick(self, side: str, run_id: int) -> None:
        """Make ``run_id`` diff side A or B; on the Diff screen the box changes and the comparison runs."""
        self.diff_pick[side] = run_id
        self.notify(f"run {run_id} is diff side {side.upper()}")
        diff = self.workspace_screens.get("diff")
        if diff is not None and self.screen is diff:
            diff.apply_picks()

    def action_refresh_all(self) -> None:
        ledger = self.workspace_screens.get("ledger")
        if ledger is not None and ledger.is_mounted:
            ledger.post_message(StoreChanged())

    def palette_start(self) -> None:
        self.action_goto("launch")
        self.call_after_refresh(self.workspace_screen("launch").action_start)

    def palette_stop(self) -> None:
        if self.job is None or self.job.finished:
            self.notify("nothing is computing", severity="warning")
            return
        self.job.cancel()
        self.notify("asked the run to stop")

    # --- errors --------------------------------------------------------------------------------------

    def notify(self, message: str, *, title: str = "", severity: str = "information", **kwargs) -> None:
        """Show a toast, and keep the last 50 (severity, message) pairs in ``shown`` (tests read them)."""
        self.shown = (getattr(self, "shown", []) + [(severity, str(message))])[-50:]
        super().notify(message, title=title, severity=severity, **kwargs)

    def report(self, exc: BaseException) -> None:
        """Show an error in the UI (one line; never a traceback over the screen)."""
        if isinstance(exc, CutbookError):
            self.notify(str(exc), title="cutbook", severity="error", timeout=8, markup=False)
        else:
            self.notify(f"{type(exc).__name__}: {exc}", title="unexpected error", severity="error", timeout=12,
                        markup=False)

    def on_worker_state_changed(self, event) -> None:
        worker = event.worker
        if worker.error is not None:
            self.report(worker.error)

    # --- the run job ---------------------------------------------------------------------------------

    def start_job(self, spec) -> None:
        from workspace.jobs import RunJob

        if getattr(self.store, "readonly", None):
            self.report(self.store.refusal())
            return
        try:
            self.job = RunJob(self.store.url, spec).start()
        except Exception as exc:  # noqa: BLE001
            self.job = None
            self.report(exc)

    def _poll_job(self) -> None:
        job = self.job
        if job is None:
            return
        try:
            events = job.poll()
        except Exception as exc:  # noqa: BLE001
            self.report(exc)
            return
        launch = self.workspace_screens.get("launch")
        for ev in events:
            if ev["type"] == "started":
                msg = RunStarted(ev["run"])
            elif ev["type"] == "progress":
                msg = RunProgress(ev["stage"], ev["done"], ev.get("total"))
            elif ev["type"] == "finished":
                msg = RunEnded(ev.get("run"), ev["status"], ev.get("message"))
                severity = {"done": "information", "cancelled": "warning"}.get(ev["status"], "error")
                self.notify(run_end_line(ev.get("run"), ev["status"], ev.get("message")), severity=severity,
                            markup=False)
                if ev.get("run") is not None and ev["status"] == "done":
                    self.current_run = ev["run"]
                self.action_refresh_all()
            else:
                continue
            if launch is not None and launch.is_mounted:
                launch.post_message(msg)

    def _stop_job(self, wait: float = 10.0) -> None:
        job = self.job
        if job is None or job.finished:
            return
        job.cancel()
        job.wait(timeout=wait)
        if not job.finished:
            job.kill()

    async def action_quit(self) -> None:
        self._stop_job()
        self.exit(0)

    def on_unmount(self) -> None:
        self._stop_job(wait=5.0)
