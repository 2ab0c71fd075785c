"""Chrome shared by every screen: the pane container, the top bar (open store, screens) and the keys help."""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Footer, Static
from textual.widgets._footer import FooterLabel

from workspace.tui import palette


class Pane(Vertical):
    """A titled panel (the title sits in its top border); ``m`` maximises the one holding the focus."""

    ALLOW_MAXIMIZE = True

    def __init__(self, *children, title: str = "", id: str | None = None, classes: str = "") -> None:
        super().__init__(*children, id=id, classes=f"pane {classes}".strip())
        self.border_title = title


class ScrollPane(VerticalScroll):
    """A titled panel whose content scrolls (it takes the focus, so ``m`` can maximise it)."""

    ALLOW_MAXIMIZE = True

    def __init__(self, *children, title: str = "", id: str | None = None, classes: str = "") -> None:
        super().__init__(*children, id=id, classes=f"pane {classes}".strip())
        self.border_title = title


def screen_bar_text(current: str, screens: dict[str, str], store: str, width: int) -> Text:
    """``1 Ledger 2 Launch …`` with the current screen marked, then the open store (cut from the left)."""
    t = Text(no_wrap=True, overflow="crop")
    if width >= 100:
        t.append(" cutbook ", style=f"bold {palette.GROUND} on {palette.PRIMARY}")
        t.append(" ")
    narrow = width < 100  # seven screens: below 100 columns one space between them, so the store still fits
    for i, (name, title) in enumerate(screens.items(), start=1):
        short = "Lookup" if name == "lookup" else title
        if name == current:
            t.append(f" {i} {short} ", style=f"bold {palette.GROUND} on {palette.ACCENT}")
        else:
            t.append(f" {i}", style=palette.PRIMARY)
            t.append(f" {short}" if narrow else f" {short} ", style=palette.DIM)
    room = width - t.cell_len - (2 if narrow else 8)
    label = store
    if len(label) > room:  # the file name matters most: keep it, cut the directories
        base = store.replace("\\", "/").rsplit("/", 1)[-1]
        label = ("…/" + base) if len(base) + 2 <= room else (base[:max(room - 1, 0)] + "…" if room > 4 else "")
    if label:
        t.append(" " if narrow else " store ", style=palette.FAINT)
        t.append(label, style=palette.TEXT)
    return t


class ScreenBar(Static):
    """One line at the top: the screens (current one marked) and which store is open."""

    DEFAULT_CSS = "ScreenBar { dock: top; height: 1; width: 1fr; }"

    def __init__(self, current: str) -> None:
        super().__init__("", id="screen-bar")
        self.current = current

    def on_mount(self) -> None:
        self.redraw()

    def on_resize(self) -> None:
        self.redraw()

    def redraw(self) -> None:
        from workspace.tui.app import SCREEN_NAMES

        store = getattr(self.app, "store_label", "")
        self.update(screen_bar_text(self.current, SCREEN_NAMES, store, self.size.width or 80))

    @property
    def plain(self) -> str:
        from workspace.tui.app import SCREEN_NAMES

        return screen_bar_text(self.current, SCREEN_NAMES, getattr(self.app, "store_label", ""),
                               self.size.width or 80).plain


class ScreenFooter(Footer):
    """The footer: the current screen's name first (marked), then the keys that work here."""

    DEFAULT_CSS = """
    ScreenFooter FooterLabel.footer-screen { margin: 0 1 0 0; text-style: bold; }
    """

    def __init__(self, current: str) -> None:
        super().__init__(compact=True, show_command_palette=False)
        self.current = current

    def compose(self) -> ComposeResult:
        from workspace.tui.app import SCREEN_NAMES

        if self._bindings_ready:
            label = FooterLabel(f" {SCREEN_NAMES.get(self.current, self.current)} ", classes="footer-screen")
            label.styles.background = palette.ACCENT
            label.styles.color = palette.GROUND
            yield label
        yield from super().compose()


def keys_text(screen_title: str, screen_bindings, app_bindings) -> Text:
    """The keys help as plain lines: this screen's keys, then the keys that work everywhere."""
    t = Text()
    for title, rows in ((screen_title, screen_bindings), ("Everywhere", app_bindings)):
        t.append(f"{title}\n", style=f"bold {palette.PRIMARY}")
        for key, desc, tip in rows:
            t.append(f"  {key:<12}", style=f"bold {palette.ACCENT}")
            t.append(desc, style=palette.TEXT)
            if tip:
                t.append(f" — {tip}", style=palette.DIM)
            t.append("\n")
        t.append("\n")
    t.append("esc or ? closes this help", style=palette.FAINT)
    return t


def keys_table(screen_title: str, screen_bindings, app_bindings):
    """The same as :func:`keys_text` laid out as a table whose descriptions wrap under themselves."""
    from rich.table import Table

    table = Table.grid(padding=(0, 2))
    table.add_column(no_wrap=True)
    table.add_column(ratio=1)
    for title, rows in ((screen_title, screen_bindings), ("Everywhere", app_bindings)):
        table.add_row(Text(title, style=f"bold {palette.PRIMARY}"), "")
        for key, desc, tip in rows:
            cell = Text(desc, style=palette.TEXT)
            if tip:
                cell.append(f" — {tip}", style=palette.DIM)
            table.add_row(Text("  " + key, style=f"bold {palette.ACCENT}"), cell)
        table.add_row("", "")
    table.add_row(Text("esc or ?", style=palette.FAINT), Text("closes this help", style=palette.FAINT))
    return table


def _key_name(key: str) -> str:
    names = {"left_square_bracket": "[", "right_square_bracket": "]", "question_mark": "?", "enter": "enter",
             "escape": "esc"}
    return ",".join(names.get(k.strip(), k.strip().replace("ctrl+", "^")) for k in key.split(","))


def describe_bindings(bindings) -> list[tuple[str, str, str]]:
    """(key, description, tooltip) for each shown-or-documented binding, duplicates merged."""
    out: dict[str, list] = {}
    for b in bindings:
        if not isinstance(b, Binding) or not b.description:
            continue
        entry = out.setdefault(b.description, [[], b.tooltip or ""])
        entry[0].append(_key_name(b.key))
    return [(", ".join(keys), desc, tip) for desc, (keys, tip) in out.items()]


class KeysHelp(ModalScreen):
    """``?`` / F1: the keys of the screen underneath and the global ones."""

    BINDINGS = [Binding("escape,question_mark,f1,q", "dismiss", "Close", show=False)]
    DEFAULT_CSS = """
    KeysHelp { align: center middle; }
    KeysHelp > VerticalScroll { width: 90%; max-width: 100; height: 90%; max-height: 40;
                                 border: round $primary; background: $panel; padding: 0 1; }
    """

    def __init__(self, screen_title: str, screen_bindings, app_bindings) -> None:
        super().__init__(id="keys-help")
        self.text = keys_text(screen_title, screen_bindings, app_bindings)  # plain lines (tests read them)
        self.table = keys_table(screen_title, screen_bindings, app_bindings)

    def compose(self) -> ComposeResult:
        with VerticalScroll() as box:
            box.border_title = "Keys"
            yield Static(self.table, id="keys-help-text")
