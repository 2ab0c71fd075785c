"""Terminal charts drawn with unicode block characters (no plotting dependency).

* :class:`SpectrumPlot` — eigenvalues as vertical bars, the largest gap marked
  and the number of communities it suggests.
* :class:`SizeHistogram` — community sizes as horizontal bars (one per
  community, or binned by powers of two when there are many).
* :class:`HeatTable` — a contingency table as a heat table: cell shade is the
  share of the row community that lands in the column community.
"""

from __future__ import annotations

import math
from typing import Any, Sequence

from rich.console import RenderableType
from rich.style import Style
from rich.text import Text
from textual.widget import Widget

VERTICAL = " ▁▂▃▄▅▆▇█"
HORIZONTAL = " ▏▎▍▌▋▊▉█"

from workspace.tui import palette

INK_MUTED = palette.FAINT
HEAT = palette.HEAT


def largest_gap(values: Sequence[float]) -> tuple[int, float] | None:
    """Position of the largest gap between consecutive eigenvalues, in the order given.

    For values ``λ_1, …, λ_m`` the gap after position ``i`` is ``|λ_{i+1} − λ_i|``;
    the returned index ``i`` (1-based count of values before the gap) is the k the
    eigengap heuristic suggests.

    Parameters
    ----------
    values : sequence of float, length m
        Eigenvalues in the order the solver reported them.

    Returns
    -------
    (k, gap) : tuple of (int, float), or None when m < 2
        ``k`` in ``1 … m−1`` and the size of the gap.

    Notes
    -----
    Ties go to the first (smallest k) gap.

    References
    ----------
    von Luxburg (2007), A tutorial on spectral clustering, Statistics and
    Computing 17(4), section 8.1 (the eigengap heuristic).
    """
    if len(values) < 2:
        return None
    best_k, best_gap = 1, -1.0
    for i in range(len(values) - 1):
        gap = abs(float(values[i + 1]) - float(values[i]))
        if gap > best_gap:
            best_k, best_gap = i + 1, gap
    return best_k, best_gap


def size_bins(sizes: Sequence[int]) -> list[tuple[str, int]]:
    """Communities counted by size in power-of-two bins ``[2^j, 2^(j+1))``: ``[(label, count)]``.

    Only bins holding at least one community are returned (a run of one giant
    and many singleton communities would otherwise draw a dozen empty rows);
    the labels say which size ranges the rows cover.
    """
    if not sizes:
        return []
    top = max(int(s) for s in sizes)
    out = []
    j = 0
    while (1 << j) <= top:
        lo, hi = 1 << j, (1 << (j + 1)) - 1
        n = sum(1 for s in sizes if lo <= s <= hi)
        if n:
            out.append((f"{lo}" if lo == hi else f"{lo}–{hi}", n))
        j += 1
    return out


def _fmt(x: float, scale: float = 1.0) -> str:
    """An axis or gap figure; values below 1e-9 of the plot's ``scale`` are rounding noise and read 0."""
    if x == 0 or abs(x) < 1e-9 * max(abs(scale), 1e-300):
        return "0"
    if abs(x) >= 1e4 or abs(x) < 1e-3:
        return f"{x:.2e}"
    return f"{x:.4g}"


class SpectrumPlot(Widget):
    """Eigenvalues as bars; the run's eigengap suggestion, when it has one, is marked."""

    DEFAULT_CSS = "SpectrumPlot { height: auto; }"

    def __init__(self, *, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(id=id, classes=classes)
        self.values: list[float] = []
        self.suggested: int | None = None
        self.gap_k: int | None = None
        self.note = ""

    EMPTY = "no eigenvalues recorded for this run (attached groupings and some baselines have none)"

    def show(self, values: Sequence[float], *, suggested: int | None = None, note: str = "",
             empty: str | None = None, gap_k: int | None = None) -> None:
        """Plot ``values``; with none, say ``empty`` (default: the run recorded none).

        ``gap_k``: the k the run's own eigengap rule suggested; only that gap is marked
        (None: no gap is marked - the run's spectrum carries no meaningful suggestion)."""
        self.values = [float(v) for v in values]
        self.suggested = suggested
        self.note = note
        self.empty = empty or self.EMPTY
        self.gap_k = gap_k if gap_k is not None and 1 <= gap_k < len(self.values) else None
        self.refresh(layout=True)

    def get_content_height(self, container, viewport, width: int) -> int:
        """Two lines for "no eigenvalues"; else a plot that fits short terminals (12 rows) or 18."""
        if not self.values:
            return 2
        short = self.screen.has_class("-short") if self.is_attached else False
        return 12 if short else 18

    def render(self) -> RenderableType:
        values = self.values
        if not values:
            return Text(getattr(self, "empty", self.EMPTY), style=INK_MUTED)
        width = max(self.size.width, 30)
        rows = max(self.size.height - 5, 4)
        gap = None if self.gap_k is None else (self.gap_k, abs(values[self.gap_k] - values[self.gap_k - 1]))
        m = len(values)
        axis_w = 10
        bar_w = max(1, min(5, (width - axis_w - 1) // max(m, 1) - 1))
        shown = min(m, max(1, (width - axis_w - 1) // (bar_w + 1)))
        scale = max(abs(v) for v in values[:shown]) or 1.0
        lo = min(0.0, min(values[:shown]))
        hi = max(values[:shown])
        if abs(lo) < 1e-9 * scale:  # -2.7e-14 is a zero eigenvalue's rounding, not a negative axis
            lo = 0.0
        if hi - lo < 1e-12:
            hi = lo + 1.0
        heights = [(v - lo) / (hi - lo) * rows * 8 for v in values[:shown]]
        text = Text()
        for r in range(rows):
            level = (rows - 1 - r) * 8
            label = _fmt(hi, scale) if r == 0 else (_fmt(lo, scale) if r == rows - 1 else "")
            text.append(label.rjust(axis_w - 1) + "│", style=INK_MUTED)
            for i, h in enumerate(heights):
                fill = int(max(0.0, min(8.0, h - level)))
                before = gap is not None and i < gap[0]
                text.append(VERTICAL[fill] * bar_w, style=palette.BEFORE_GAP if before else palette.AFTER_GAP)
                text.append(" ")
            text.append("\n")
        text.append(" " * (axis_w - 1) + "└" + "─" * (shown * (bar_w + 1)) + "\n", style=INK_MUTED)
        ticks = " " * axis_w
        for i in range(shown):
            ticks += str(i + 1)[-bar_w:].ljust(bar_w + 1) if bar_w >= 2 or (i + 1) % 5 == 0 or i == 0 \
                else " " * (bar_w + 1)
        text.append(ticks.rstrip() + "\n", style=INK_MUTED)
        if gap is not None and gap[0] <= shown:
            k, size = gap
            marker = " " * (axis_w + k * (bar_w + 1) - 1) + "▲"
            text.append(marker, style=Style(color=palette.GAP_MARK, bold=True))
            words = f" eigengap λ{k}→λ{k + 1} = {_fmt(size, scale)}  ⇒  k = {k}"
            if len(marker) + len(words) > width:  # no room right of the marker: say it on the next line
                words = "\n" + " " * axis_w + words.lstrip()
            text.append(words, style=palette.GAP_MARK)
        if self.suggested is not None:
            text.append(f"\nthe run found k = {self.suggested}", style=palette.TEXT)
        if shown < m:
            text.append(f"\n({shown} of {m} eigenvalues shown; widen the terminal for more)", style=INK_MUTED)
        if self.note:
            text.append("\n" + self.note, style=INK_MUTED)
        return text


class SizeHistogram(Widget):
    """Community sizes as horizontal bars."""

    DEFAULT_CSS = "SizeHistogram { height: auto; }"

    def __init__(self, *, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(id=id, classes=classes)
        self.sizes: list[tuple[str, int]] = []
        self.binned = False

    def show(self, communities: Sequence[dict[str, Any]], *, max_bars: int = 24, empty: str | None = None) -> None:
        self.empty = empty or "no communities recorded"
        # a tracked run's communities carry ``shown``: their label matched to the previous version's run
        rows = [(f"c{c.get('shown', c['community'])}", int(c["size"])) for c in communities]
        if len(rows) > max_bars:
            self.sizes = size_bins([s for _, s in rows])
            self.binned = True
        else:
            self.sizes = sorted(rows, key=lambda r: -r[1])
            self.binned = False
        self.refresh(layout=True)

    def get_content_height(self, container, viewport, width: int) -> int:
        return max(len(self.sizes), 1) + 1

    def render(self) -> RenderableType:
        if not self.sizes:
            return Text(getattr(self, "empty", "no communities recorded"), style=INK_MUTED)
        width = max(self.size.width, 30)
        label_w = max(len(lbl) for lbl, _ in self.sizes) + 1
        top = max(n for _, n in self.sizes) or 1
        count_w = len(str(top)) + 1
        bar_room = max(min(width - label_w - count_w - 2, 72), 4)
        text = Text()
        head = "number of communities per size range (nodes); empty ranges left out" if self.binned \
            else "nodes per community"
        text.append(head + "\n", style=INK_MUTED)
        for lbl, n in self.sizes:
            eighths = int(round(n / top * bar_room * 8))
            bar = "█" * (eighths // 8) + (HORIZONTAL[eighths % 8] if eighths % 8 else "")
            # one colour per community (its label, cycling through the palette's seven); bins share one
            colour = palette.community_colour(int(lbl[1:])) if not self.binned and lbl[1:].isdigit() \
                else palette.BARS
            text.append(lbl.rjust(label_w) + " ", style=colour if not self.binned else INK_MUTED)
            text.append(bar.ljust(bar_room), style=colour)
            text.append(str(n).rjust(count_w) + "\n")
        return text


def dense_counts(contingency: dict[str, Any]) -> list[list[int]]:
    """The contingency ``counts`` as a dense row-major list, whatever form the diff service gave.

    Accepts a dense ``counts`` list of lists, or coordinate cells
    (``cell_row``, ``cell_col``, ``cell_count``) as positions into ``rows``/``cols``.
    """
    rows, cols = contingency.get("rows") or [], contingency.get("cols") or []
    counts = contingency.get("counts")
    if counts is not None and (not counts or isinstance(counts[0], (list, tuple))):
        return [list(map(int, r)) for r in counts]
    dense = [[0] * len(cols) for _ in rows]
    cells = contingency.get("cells")
    if cells is not None:  # [[row_pos, col_pos, count], ...]
        for r, c, n in cells:
            dense[int(r)][int(c)] = int(n)
        return dense
    for r, c, n in zip(contingency.get("cell_row", []), contingency.get("cell_col", []),
                       contingency.get("cell_count", counts or [])):
        dense[int(r)][int(c)] = int(n)
    return dense


def _label(x: Any) -> str:
    return {-1: "–", -2: "∅"}.get(x, str(x)) if isinstance(x, int) else str(x)


class HeatTable(Widget):
    """Contingency of run A's communities (rows) against run B's (columns)."""

    DEFAULT_CSS = "HeatTable { height: auto; }"

    def __init__(self, *, max_rows: int = 18, max_cols: int = 12, id: str | None = None,
                 classes: str | None = None) -> None:
        super().__init__(id=id, classes=classes)
        self.max_rows, self.max_cols = max_rows, max_cols
        self.table: dict[str, Any] | None = None

    def show(self, contingency: dict[str, Any] | None) -> None:
        self.table = contingency
        self.refresh(layout=True)

    def _layout(self):
        t = self.table
        rows, cols = list(t.get("rows") or []), list(t.get("cols") or [])
        counts = dense_counts(t)
        row_sizes = t.get("row_sizes") or [sum(r) for r in counts]
        col_sizes = t.get("col_sizes") or [sum(c) for c in zip(*counts)] if counts else []
        r_order = sorted(range(len(rows)), key=lambda i: -row_sizes[i])[:self.max_rows]
        # columns follow the rows: each row's largest column first, so matched pairs sit on the diagonal
        c_order: list[int] = []
        for i in r_order:
            best = max(range(len(cols)), key=lambda j: counts[i][j], default=None)
            if best is not None and counts[i][best] and best not in c_order:
                c_order.append(best)
        c_order += [j for j in sorted(range(len(cols)), key=lambda j: -col_sizes[j]) if j not in c_order]
        c_order = c_order[:self.max_cols]
        return rows, cols, counts, row_sizes, col_sizes, r_order, c_order

    def get_content_height(self, container, viewport, width: int) -> int:
        if not self.table:
            return 1
        return len(self._layout()[5]) + 3

    def render(self) -> RenderableType:
        if not self.table or not self.table.get("rows"):
            return Text("no contingency table", style=INK_MUTED)
        rows, cols, counts, row_sizes, col_sizes, r_order, c_order = self._layout()
        cell_w = max(6, max((len(str(counts[i][j])) for i in r_order for j in c_order), default=1) + 2)
        width = self.size.width
        if width:  # as many B columns as fit beside the row labels and the size column: never wrapped
            size_w = 3 + max((len(str(row_sizes[i])) for i in r_order), default=1)
            c_order = c_order[:max(1, (width - 8 - size_w) // cell_w)]
        text = Text()
        text.append("A \\ B".ljust(8), style=INK_MUTED)
        for j in c_order:
            text.append(_label(cols[j]).center(cell_w), style=Style(color=palette.PRIMARY, bold=True))
        text.append("   size\n", style=INK_MUTED)
        for i in r_order:
            text.append(_label(rows[i]).rjust(6) + "  ", style=Style(color=palette.PRIMARY, bold=True))
            for j in c_order:
                n = counts[i][j]
                share = n / row_sizes[i] if row_sizes[i] else 0.0
                shade = HEAT[min(len(HEAT) - 1, int(math.ceil(share * (len(HEAT) - 1))))] if n else HEAT[0]
                fg = palette.HEAT_TEXT_DARK if share > 0.6 else palette.HEAT_TEXT_LIGHT
                text.append((str(n) if n else "·").center(cell_w), style=Style(bgcolor=shade, color=fg))
            text.append(f"  {row_sizes[i]}\n", style=INK_MUTED)
        hidden_r, hidden_c = len(rows) - len(r_order), len(cols) - len(c_order)
        note = "shade: share of the A community that lands in the B community"
        if hidden_r or hidden_c:
            note += f"  ({hidden_r} smaller A and {hidden_c} smaller B communities not shown)"
        text.append(note, style=INK_MUTED)
        return text
