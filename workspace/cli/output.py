"""Rendering for the CLI: JSON to stdout, human text to stdout (or stderr under --json),
progress on stderr. Imports rich lazily so `cutbook --help` stays quick."""

from __future__ import annotations

import json
import math
import shutil
import sys
import time
from typing import Any, Iterable, Sequence


def _default(o: Any):
    import numpy as np

    if isinstance(o, np.integer):
        return int(o)
    if isinstance(o, np.floating):
        return None if not math.isfinite(float(o)) else float(o)
    if isinstance(o, np.ndarray):
        return o.tolist()
    if hasattr(o, "isoformat"):
        return o.isoformat()
    raise TypeError(f"not JSON serialisable: {type(o).__name__}")


def _clean(o: Any):
    """Replace non-finite floats by None so the output is strict JSON."""
    if isinstance(o, float):
        return o if math.isfinite(o) else None
    if isinstance(o, dict):
        return {k: _clean(v) for k, v in o.items()}
    if isinstance(o, (list, tuple)):
        return [_clean(v) for v in o]
    return o


def emit_json(doc: Any) -> None:
    sys.stdout.write(json.dumps(_clean(doc), default=_default, indent=2, allow_nan=False) + "\n")
    sys.stdout.flush()


class Out:
    """Where human text goes: stdout normally, stderr when --json owns stdout."""

    def __init__(self, json_mode: bool) -> None:
        self.json_mode = json_mode
        self._console = None

    @property
    def console(self):
        if self._console is None:
            from rich.console import Console

            stream = sys.stderr if self.json_mode else sys.stdout
            # piped output is read by people and scripts alike: do not fold it at 80 columns
            width = None if stream.isatty() else 200
            self._console = Console(file=stream, highlight=False, soft_wrap=False, width=width)
        return self._console

    def line(self, text: str = "") -> None:
        """One line of plain text, as is (rich loads only for tables and styled output)."""
        if self._console is not None:
            self._console.print(text, markup=False)
            return
        stream = sys.stderr if self.json_mode else sys.stdout
        stream.write(text + "\n")

    def words(self, items: Iterable[str], indent: str = "  ", first: str | None = None) -> None:
        """Items two spaces apart, folded into lines no wider than the terminal (100 columns when the
        output is not a terminal), each line starting with ``indent`` (the first with ``first`` when
        given); an item wider than that gets a line of its own, never cut."""
        stream = sys.stderr if self.json_mode else sys.stdout
        width = shutil.get_terminal_size((100, 24)).columns if stream.isatty() else 100
        line, start = "", indent if first is None else first
        for item in items:
            if line and len(start) + len(line) + 2 + len(item) > width:
                self.line(start + line)
                line, start = "", indent
            line = f"{line}  {item}" if line else item
        if line or start != indent:
            self.line(start + line)

    def rich(self, renderable) -> None:
        self.console.print(renderable)

    def note(self, text: str) -> None:
        """A remark that is never part of the result: always stderr."""
        sys.stderr.write(text + "\n")

    def table(self, columns: Sequence[str], rows: Iterable[Sequence[Any]], *, title: str | None = None,
              right: Sequence[str] = ()) -> None:
        """A table in rich's ``SIMPLE_HEAD`` layout (header, a rule, rows).

        Tables of plain ASCII text that fit the width are laid out here, character for
        character as rich lays them out, so listings start without loading rich; anything
        else (wide or non-ASCII text, a table wider than the terminal) goes to rich.
        """
        if title:
            self.line(title)
        cells = [[fmt(x) for x in r] for r in rows]
        if not self._plain_table(list(columns), cells, right):
            from rich import box
            from rich.table import Table

            t = Table(box=box.SIMPLE_HEAD, pad_edge=False, header_style="bold")
            for c in columns:
                t.add_column(c, justify="right" if c in right else "left", overflow="fold")
            for r in cells:
                t.add_row(*r)
            self.console.print(t)

    def _plain_table(self, columns: list[str], rows: list[list[str]], right: Sequence[str]) -> bool:
        """Write the table without rich when it is printable ASCII and fits; False otherwise."""
        if any(len(r) != len(columns) for r in rows):
            return False
        texts = columns + [c for r in rows for c in r]
        if not all(t.isascii() and t.isprintable() for t in texts):
            return False
        stream = sys.stderr if self.json_mode else sys.stdout
        tty = stream.isatty()
        if tty:
            import os
            width = shutil.get_terminal_size().columns
            bold = not os.environ.get("NO_COLOR") and os.environ.get("TERM") != "dumb"
        else:
            width, bold = 200, False  # as the rich console of this class
        widths = [max([len(c)] + [len(r[i]) for r in rows]) for i, c in enumerate(columns)]
        last = len(columns) - 1

        def line(values: list[str], header: bool = False) -> str:
            parts = []
            for i, (text, w) in enumerate(zip(values, widths)):
                pad = " " * (w - len(text))
                text = f"\x1b[1m{text}\x1b[0m" if header and bold else text
                text = pad + text if columns[i] in right else text + pad
                parts.append(("" if i == 0 else " ") + text + ("" if i == last else " "))
            return " " + " ".join(parts) + " "

        total = sum(widths) + 3 * last + 2
        if total > width:
            return False
        out = [" " * total, line(columns, header=True), " " + "─" * (total - 2) + " "]
        out += [line(r) for r in rows]
        out.append(" " * total)
        stream.write("\n".join(out) + "\n")
        return True

    def fields(self, pairs: Iterable[tuple[str, Any]], *, title: str | None = None) -> None:
        pairs = list(pairs)
        if title:
            self.line(title)
        width = max((len(k) for k, _ in pairs), default=0)
        for k, v in pairs:
            self.line(f"  {k.ljust(width)}  {fmt(v)}")


def fmt(x: Any) -> str:
    if x is None:
        return "-"
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, float):
        if not math.isfinite(x):
            return str(x)
        if x != 0 and (abs(x) < 1e-3 or abs(x) >= 1e6):
            return f"{x:.4g}"
        return f"{x:.4f}".rstrip("0").rstrip(".") if x != int(x) else f"{x:.0f}"
    if isinstance(x, (list, tuple)):
        return ", ".join(fmt(v) for v in x)
    return str(x)


def fmt_spectrum(values: Sequence[float], limit: int = 12) -> str:
    """Eigenvalues to 4 significant digits; rounding noise (|x| below 1e-12 of the largest) shows as 0."""
    vals = [float(v) for v in values]
    scale = max((abs(v) for v in vals if math.isfinite(v)), default=1.0) or 1.0
    text = " ".join("0" if math.isfinite(v) and abs(v) < 1e-12 * max(scale, 1.0) else f"{v:.4g}" for v in vals[:limit])
    return text + (" …" if len(vals) > limit else "")


class ProgressBar:
    """A rich progress bar on stderr that appears only once work has run for a second.

    Call it as ``progress(stage, done, total)``; ``total=None`` shows a spinner-like
    count. ``close()`` removes it.
    """

    DELAY_S = 1.0

    def __init__(self, enabled: bool = True) -> None:
        self.enabled = enabled and sys.stderr.isatty()
        self._t0 = time.monotonic()
        self._progress = None
        self._tasks: dict[str, int] = {}

    def __call__(self, stage: str, done: int = 0, total: int | None = None) -> None:
        if not self.enabled:
            return
        if self._progress is None:
            if time.monotonic() - self._t0 < self.DELAY_S:
                return
            from rich.console import Console
            from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

            self._progress = Progress(TextColumn("{task.description:>12}"), BarColumn(), MofNCompleteColumn(),
                                      TimeElapsedColumn(), console=Console(file=sys.stderr), transient=True)
            self._progress.start()
        task = self._tasks.get(stage)
        if task is None:
            task = self._tasks[stage] = self._progress.add_task(stage, total=total)
        self._progress.update(task, completed=done, total=total)

    def close(self) -> None:
        if self._progress is not None:
            self._progress.stop()
            self._progress = None
