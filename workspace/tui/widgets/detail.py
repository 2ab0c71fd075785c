"""Read-only detail panes: what is recorded on a version or a run, as styled text."""

from __future__ import annotations

from typing import Any

from rich.text import Text
from textual.containers import VerticalScroll
from textual.widgets import Static

HEAD = "bold #e0a34a"
KEY = "#9aa3ad"
MUTED = "#7d8794"
WARN = "#d9a441"
BAD = "#d0705a"
GOOD = "#8fb58a"

STATUS_STYLE = {"done": GOOD, "running": "#6fa8c0", "failed": BAD, "cancelled": WARN, "interrupted": WARN}


def fmt_value(value: Any) -> str:
    """Compact display of a recorded value (numbers to 4 significant digits)."""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        if value != value:
            return "nan"
        return f"{value:.4g}" if abs(value) >= 1e-3 or value == 0 else f"{value:.3e}"
    if value is None:
        return "—"
    if isinstance(value, (list, tuple)):
        if len(value) > 8:
            return "[" + ", ".join(fmt_value(v) for v in value[:8]) + f", … ({len(value)} values)]"
        return "[" + ", ".join(fmt_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return ", ".join(f"{k}={fmt_value(v)}" for k, v in value.items())
    return str(value)


def _section(text: Text, title: str) -> None:
    text.append(f"\n{title}\n", style=HEAD)


def _pairs(text: Text, items: dict[str, Any] | None, *, skip: tuple[str, ...] = ()) -> None:
    if not items:
        text.append("  (none)\n", style=MUTED)
        return
    width = min(max(len(k) for k in items) + 2, 26)
    for key, value in items.items():
        if key in skip:
            continue
        text.append("  " + f"{key}".ljust(width), style=KEY)
        text.append(fmt_value(value) + "\n")


def run_text(run: dict[str, Any]) -> Text:
    """Everything :func:`workspace.services.runs.show_run` returns, grouped for reading."""
    t = Text()
    t.append(f"Run {run['run']}", style="bold")
    t.append("  ")
    t.append(run["status"], style=STATUS_STYLE.get(run["status"], ""))
    t.append(f"  {run['ref']}\n")
    what = run["method"] if run["kind"] == "computed" else f"attached: {run.get('label') or run['method']}"
    t.append(f"{what}", style="bold")
    if run.get("param_set"):
        t.append(f"  from {run['param_set']}", style=KEY)
    t.append("\n")
    _pairs(t, {"k (found)": run.get("k"), "k (asked)": run.get("k_requested"), "seed": run.get("seed"),
               "repeats": run.get("repeats"), "started": run.get("created"), "finished": run.get("finished"),
               "wall time (s)": run.get("wall_time_s"), "membership": (run.get("membership_hash") or "")[:16]})
    if run.get("error"):
        _section(t, "Error")
        t.append("  " + run["error"] + "\n", style=BAD)
    _section(t, "Quality measures")
    _pairs(t, run.get("quality"))
    _section(t, "Parameters")
    _pairs(t, run.get("params"))
    _section(t, "Warnings")
    if run.get("warnings"):
        for w in run["warnings"]:
            t.append("  ! " + str(w) + "\n", style=WARN)
    else:
        t.append("  (none)\n", style=MUTED)
    _section(t, "Solver diagnostics")
    _pairs(t, run.get("diagnostics"))
    comms = run.get("communities") or []
    if comms:
        _section(t, f"Communities ({len(comms)})")
        for c in comms[:12]:
            t.append(f"  c{c['community']:<4}", style=KEY)
            t.append(f"size {c['size']:<7} conductance {fmt_value(c.get('conductance'))}\n")
        if len(comms) > 12:
            t.append(f"  … {len(comms) - 12} more (see Spectrum for the size histogram)\n", style=MUTED)
    _section(t, "Provenance")
    _pairs(t, run.get("provenance"))
    return t


def version_text(v: dict[str, Any]) -> Text:
    """A version as :func:`workspace.services.networks.show_version` returns it."""
    t = Text()
    t.append(v["ref"], style="bold")
    t.append(f"  {v['nodes']} nodes · {v['edges']} edges · total weight {fmt_value(v.get('total_weight'))}\n")
    if v.get("message"):
        t.append(v["message"] + "\n", style="italic")
    _pairs(t, {"source": v.get("source"), "format": v.get("format"), "created": v.get("created"),
               "content hash": (v.get("content_hash") or "")[:16], "parent": v.get("parent")})
    _section(t, "Import report")
    _pairs(t, v.get("report"))
    _section(t, "Import policy")
    _pairs(t, v.get("policy"))
    _section(t, "Change from parent")
    ch = v.get("changes_from_parent")
    if not ch:
        t.append("  first version (no parent)\n", style=MUTED)
    else:
        _pairs(t, {k: val for k, val in ch.items() if not isinstance(val, (list, dict))})
        for k, val in ch.items():
            if isinstance(val, (list, dict)) and val:
                t.append("  " + k.ljust(20), style=KEY)
                t.append(fmt_value(val) + "\n")
    return t


class DetailPane(VerticalScroll):
    """A scrollable pane holding one detail text."""

    DEFAULT_CSS = "DetailPane > Static { width: 1fr; }"

    def compose(self):
        yield Static(Text("Pick a version or a run to see what is recorded on it.", style=MUTED), id="detail-body")

    def show(self, content: Text | str) -> None:
        self.query_one("#detail-body", Static).update(content)
        self.scroll_home(animate=False)

    @property
    def plain(self) -> str:
        """The pane's text without styles (tests read it)."""
        body = self.query_one("#detail-body", Static)
        content = body.content if hasattr(body, "content") else body.renderable
        return content.plain if isinstance(content, Text) else str(content)
