"""A virtual table: rows are fetched a page at a time, only for the lines on screen.

The widget never holds more than a few pages, so a list of 10 000 runs (or
100 000 moved nodes) paints as fast as a list of ten: the line API draws only
the visible lines, and each visible line asks its page from the row source
(one SQL ``LIMIT/OFFSET`` query per page for stored runs).
"""

from __future__ import annotations

from collections import OrderedDict
from dataclasses import dataclass
from typing import Any, Callable, Protocol, Sequence

from rich.cells import cell_len, set_cell_size
from rich.segment import Segment
from rich.style import Style
from textual.binding import Binding
from textual.geometry import Size
from textual.message import Message
from textual.reactive import reactive
from textual.scroll_view import ScrollView
from textual.strip import Strip


class RowSource(Protocol):
    """Where a :class:`PagedTable` gets its rows."""

    def count(self) -> int: ...

    def fetch(self, offset: int, limit: int) -> list[dict[str, Any]]: ...


class ListSource:
    """Rows already in memory (a diff's moved nodes, a node's runs)."""

    def __init__(self, rows: Sequence[dict[str, Any]]) -> None:
        self.rows = rows

    def count(self) -> int:
        return len(self.rows)

    def fetch(self, offset: int, limit: int) -> list[dict[str, Any]]:
        return list(self.rows[offset:offset + limit])


class CallbackSource:
    """Rows from two callables (e.g. ``count_runs_in`` and ``list_runs(limit=, offset=)``)."""

    def __init__(self, count: Callable[[], int], fetch: Callable[[int, int], list[dict[str, Any]]]) -> None:
        self._count, self._fetch = count, fetch

    def count(self) -> int:
        return self._count()

    def fetch(self, offset: int, limit: int) -> list[dict[str, Any]]:
        return self._fetch(offset, limit)


@dataclass(frozen=True)
class Column:
    """One column: ``key`` into the row dict, header ``title``, cell ``width`` (0 = take the rest).

    A flexible column (``width`` 0) never gets fewer than ``min_width`` cells.
    When the table is too narrow for every column, columns are left out by
    ``drop`` (highest first; 0 = always shown) instead of being cut to a few
    unreadable cells.
    """

    key: str
    title: str
    width: int = 0
    align: str = "left"
    format: Callable[[Any, dict[str, Any]], str] | None = None
    style: Callable[[dict[str, Any]], str | None] | None = None
    min_width: int = 10
    drop: int = 0

    def text(self, row: dict[str, Any]) -> str:
        value = row.get(self.key)
        if self.format is not None:
            return self.format(value, row)
        return "" if value is None else str(value)


class PagedTable(ScrollView, can_focus=True):
    """Keyboard- and mouse-driven virtual table over a :class:`RowSource`."""

    COMPONENT_CLASSES = {"paged-table--header", "paged-table--cursor", "paged-table--cursor-blurred",
                         "paged-table--empty"}

    BINDINGS = [
        Binding("up", "cursor(-1)", "Up", show=False),
        Binding("down", "cursor(1)", "Down", show=False),
        Binding("pageup", "page(-1)", "Page up", show=False),
        Binding("pagedown", "page(1)", "Page down", show=False),
        Binding("home", "first", "First row", show=False),
        Binding("end", "last", "Last row", show=False),
        Binding("enter", "choose", "Open row", show=False),
    ]

    cursor: reactive[int] = reactive(0, always_update=True, repaint=False)

    class Highlighted(Message):
        """The cursor moved to ``row`` (``None`` when the table is empty)."""

        def __init__(self, table: "PagedTable", index: int, row: dict[str, Any] | None) -> None:
            super().__init__()
            self.table, self.index, self.row = table, index, row

        @property
        def control(self) -> "PagedTable":
            return self.table

    class Chosen(Message):
        """Enter (or a double click) on ``row``."""

        def __init__(self, table: "PagedTable", index: int, row: dict[str, Any]) -> None:
            super().__init__()
            self.table, self.index, self.row = table, index, row

        @property
        def control(self) -> "PagedTable":
            return self.table

    def __init__(self, columns: Sequence[Column], source: RowSource | None = None, *, page_size: int = 200,
                 cached_pages: int = 6, empty_text: str = "nothing here yet", name: str | None = None,
                 id: str | None = None, classes: str | None = None) -> None:
        super().__init__(name=name, id=id, classes=classes)
        self.columns = list(columns)
        self.page_size = page_size
        self.cached_pages = cached_pages
        self.empty_text = empty_text
        self._source: RowSource = source or ListSource([])
        self._pages: OrderedDict[int, list[dict[str, Any]]] = OrderedDict()
        self._count = 0
        self.fetches = 0  # pages fetched so far (the benchmark reports it)

    # --- data -----------------------------------------------------------------------------------

    @property
    def row_count(self) -> int:
        return self._count

    def on_mount(self) -> None:
        self.reload(keep_cursor=False)

    def set_source(self, source: RowSource) -> None:
        """Show another source's rows, cursor on the first."""
        self._source = source
        self.reload(keep_cursor=False)

    def reload(self, *, keep_cursor: bool = True) -> None:
        """Count again and forget cached pages (new runs appear)."""
        self._pages.clear()
        self._count = max(0, int(self._source.count()))
        self.virtual_size = Size(0, self._count + 1)
        target = min(self.cursor, self._count - 1) if keep_cursor else 0
        if not keep_cursor:
            self.scroll_to(y=0, animate=False)
        self.cursor = max(target, 0)
        self.refresh()

    def row_at(self, index: int) -> dict[str, Any] | None:
        if not 0 <= index < self._count:
            return None
        page_no = index // self.page_size
        page = self._pages.get(page_no)
        if page is None:
            page = self._source.fetch(page_no * self.page_size, self.page_size)
            self.fetches += 1
            self._pages[page_no] = page
            while len(self._pages) > self.cached_pages:
                self._pages.popitem(last=False)
        else:
            self._pages.move_to_end(page_no)
        pos = index - page_no * self.page_size
        return page[pos] if pos < len(page) else None

    @property
    def current_row(self) -> dict[str, Any] | None:
        return self.row_at(self.cursor)

    def visible_rows(self) -> list[dict[str, Any]]:
        """Rows currently on screen (for tests and the benchmark)."""
        top = int(self.scroll_y)
        rows = []
        for i in range(top, min(top + max(self.size.height - 1, 0), self._count)):
            row = self.row_at(i)
            if row is not None:
                rows.append(row)
        return rows

    # --- cursor -------------------------------------------------------------------------------------

    def _body_height(self) -> int:
        return max(self.scrollable_content_region.height - 1, 1)

    def watch_cursor(self, old: int, new: int) -> None:
        if self._count == 0:
            self.post_message(self.Highlighted(self, 0, None))
            self.refresh()
            return
        top = int(self.scroll_y)
        body = self._body_height()
        if new < top:
            self.scroll_to(y=new, animate=False, immediate=True)
        elif new >= top + body:
            self.scroll_to(y=new - body + 1, animate=False, immediate=True)
        self.refresh()
        self.post_message(self.Highlighted(self, new, self.row_at(new)))

    def move_to(self, index: int) -> None:
        if self._count:
            self.cursor = max(0, min(index, self._count - 1))

    def action_cursor(self, delta: int) -> None:
        self.move_to(self.cursor + delta)

    def action_page(self, direction: int) -> None:
        self.move_to(self.cursor + direction * self._body_height())

    def action_first(self) -> None:
        self.move_to(0)

    def action_last(self) -> None:
        self.move_to(self._count - 1)

    def action_choose(self) -> None:
        row = self.current_row
        if row is not None:
            self.post_message(self.Chosen(self, self.cursor, row))

    def on_click(self, event) -> None:
        offset = event.get_content_offset(self)
        if offset is None or offset.y < 1:
            return
        index = int(self.scroll_y) + offset.y - 1
        if 0 <= index < self._count:
            self.focus()
            self.cursor = index
            if getattr(event, "chain", 1) >= 2:
                self.action_choose()

    # --- painting -----------------------------------------------------------------------------------

    def _widths(self, total: int) -> list[int]:
        """Cell width per column for a line of ``total`` cells; 0 for a column left out."""
        shown = list(range(len(self.columns)))

        def need(idx: list[int]) -> int:
            cols = [self.columns[i] for i in idx]
            return sum(c.width or c.min_width for c in cols) + len(cols) - 1

        droppable = sorted((i for i, c in enumerate(self.columns) if c.drop), key=lambda i: -self.columns[i].drop)
        while need(shown) > total and droppable:
            shown.remove(droppable.pop(0))
        cols = [self.columns[i] for i in shown]
        fixed = sum(c.width for c in cols if c.width) + len(cols) - 1
        flex = [c for c in cols if not c.width]
        # each flexible column gets its minimum, then an equal share of what is left
        spare = max(total - fixed - sum(c.min_width for c in flex), 0)
        extra = spare // max(len(flex), 1)
        out = []
        for i, c in enumerate(self.columns):
            out.append(0 if i not in shown else (c.width if c.width else c.min_width + extra))
        return out

    def shown_columns(self) -> list[str]:
        """Titles of the columns that fit the present width (tests read it)."""
        width = self.scrollable_content_region.width or self.size.width
        return [c.title for c, w in zip(self.columns, self._widths(width)) if w]

    def _content_width(self) -> int:
        return sum(c.width or 16 for c in self.columns) + len(self.columns) - 1

    def _cells(self, texts: list[str], widths: list[int]) -> list[str]:
        out = []
        for col, text, width in zip(self.columns, texts, widths):
            if not width:
                continue
            text = text.replace("\n", " ")
            if cell_len(text) > width:
                text = set_cell_size(text, max(width - 1, 0)) + "…" if width > 1 else set_cell_size(text, width)
            elif col.align == "right":
                text = " " * (width - cell_len(text)) + text
            else:
                text = set_cell_size(text, width)
            out.append(text)
        return out

    def render_line(self, y: int) -> Strip:
        width = self.scrollable_content_region.width or self.size.width
        base = self.rich_style
        widths = self._widths(width)
        if y == 0:
            style = base + self.get_component_rich_style("paged-table--header")
            text = " ".join(self._cells([c.title for c in self.columns], widths))
            return Strip([Segment(set_cell_size(text, width), style)], width)
        index = int(self.scroll_y) + y - 1
        if self._count == 0:
            if y == 1:
                style = base + self.get_component_rich_style("paged-table--empty")
                return Strip([Segment(set_cell_size(" " + self.empty_text, width), style)], width)
            return Strip.blank(width, base)
        row = self.row_at(index)
        if row is None:
            return Strip.blank(width, base)
        line_style = base
        if index == self.cursor:
            line_style = base + self.get_component_rich_style(
                "paged-table--cursor" if self.has_focus else "paged-table--cursor-blurred")
        cells = self._cells([c.text(row) if w else "" for c, w in zip(self.columns, widths)], widths)
        shown = [c for c, w in zip(self.columns, widths) if w]
        segments: list[Segment] = []
        for i, (col, cell) in enumerate(zip(shown, cells)):
            style = line_style
            if col.style is not None:
                extra = col.style(row)
                if extra:
                    style = line_style + Style.parse(extra)
            segments.append(Segment(cell, style))
            if i < len(cells) - 1:
                segments.append(Segment(" ", line_style))
        used = sum(cell_len(s.text) for s in segments)
        if used < width:
            segments.append(Segment(" " * (width - used), line_style))
        return Strip(segments).crop(0, width)

    def on_focus(self) -> None:
        self.refresh()

    def on_blur(self) -> None:
        self.refresh()

    def on_resize(self) -> None:
        self.virtual_size = Size(0, self._count + 1)
        self.refresh()
