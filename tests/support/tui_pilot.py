"""Helpers of the terminal-workspace pilot tests (Textual ``App.run_test``, headless): open the app on
a store, wait for its workers and for conditions (bounded), and read what the screen shows."""

from __future__ import annotations

import contextlib
import time
from pathlib import Path

from workspace.services.store import open_workspace


@contextlib.asynccontextmanager
async def workspace(path: Path, size=(120, 36)):
    """The app on the store at ``path``, in a headless terminal of ``size``: yields ``(app, pilot)``."""
    from workspace.tui.app import CutbookApp

    store = open_workspace(path)
    app = CutbookApp(store, poll_interval=0.05)
    try:
        async with app.run_test(size=size) as pilot:
            await pilot.pause()
            yield app, pilot
    finally:
        store.dispose()


async def settle(app, pilot) -> None:
    """Let workers (detail loads, diffs) finish and the screen catch up."""
    await pilot.pause()
    await app.workers.wait_for_complete()
    await pilot.pause()
    await pilot.pause()


async def wait_until(pilot, condition, timeout: float, what: str) -> None:
    """Pause until ``condition()`` holds; fails after ``timeout`` seconds."""
    deadline = time.monotonic() + timeout
    while not condition():
        if time.monotonic() > deadline:
            raise AssertionError(f"timed out after {timeout} s waiting for {what}")
        await pilot.pause(0.05)


def static_text(widget) -> str:
    """The plain text a Static-like widget shows."""
    content = widget.content if hasattr(widget, "content") else widget.renderable
    return getattr(content, "plain", str(content))


def toasts(app) -> str:
    """Messages the app has shown as notifications (errors included)."""
    return "\n".join(message for _severity, message in getattr(app, "shown", []))


def on_screen(app, widget, *, min_width: int = 1, min_height: int = 1) -> None:
    """The widget is laid out inside the terminal with at least this many cells."""
    w, h = app.size
    r = widget.region
    assert r.width >= min_width, f"{widget!r} is {r.width} cells wide (need {min_width}) at {w}x{h}"
    assert r.height >= min_height, f"{widget!r} is {r.height} rows high (need {min_height}) at {w}x{h}"
    assert r.x >= 0 and r.y >= 0 and r.right <= w and r.bottom <= h, f"{widget!r} at {r} leaves the {w}x{h} screen"


async def footer_keys(app, pilot) -> list[str]:
    """Keys the footer shows whole (inside the screen width). The footer composes its keys after a
    screen or focus change, a few frames later on a loaded machine: waited for, at most ~5 s."""
    from textual.widgets._footer import FooterKey

    w, _ = app.size
    keys: list[str] = []
    for _ in range(100):
        keys = [k.key_display for k in app.screen.query(FooterKey)
                if k.region.width > 0 and k.region.right <= w]
        if keys:
            break
        await pilot.pause(0.05)
    return keys


def table_lines(table) -> list[str]:
    """The table's rendered lines (header first) as plain text."""
    return [table.render_line(y).text for y in range(min(table.row_count + 1, table.size.height))]


def walk(node):
    """A tree node and all its descendants, depth first."""
    yield node
    for child in node.children:
        yield from walk(child)
