"""Read-only detail panes: what is recorded on a version or a run, as styled text."""

from __future__ import annotations

from typing import Any

from rich.text import Text
from textual.containers import VerticalScroll
from textual.widgets import Static

from workspace.tui import palette

HEAD = f"bold {palette.PRIMARY}"
KEY = palette.DIM
MUTED = palette.FAINT
WARN = palette.CANCELLED
BAD = palette.FAILED
GOOD = palette.DONE

STATUS_STYLE = {status: palette.status_style(status) for status in palette.STATUS}

#: below this magnitude a float is rounding noise of an exact zero (e.g. 4.441e-16) and shows as 0
NOISE = 1e-12

#: recorded keys that read better in words
LABELS = {
    "k": "communities", "k_requested": "communities asked", "wall_time_s": "wall time (s)",
    "time_limit_s": "time limit (s)", "residual_norm_max": "largest residual", "eig_tol": "eigen tolerance",
    "tie_tol": "tie tolerance", "min_gain": "smallest gain", "max_matvecs": "matvec limit",
    "n_nodes": "nodes", "n_edges": "edges", "normalized_cut": "normalized cut", "ratio_cut": "ratio cut",
    "conductance": "conductance (worst)", "conductance_mean": "conductance (mean)", "min_size": "smallest community",
    "max_size": "largest community", "eigengap_suggestion": "eigengap suggests k", "matvecs": "matrix products",
    "eigensolves": "eigen solves", "content_hash": "content hash", "blas_threads": "BLAS threads",
}
#: keys whose tiny values are real measurements, never snapped to 0
_KEEP_TINY = ("resid", "tol", "gain")


def label(key: str) -> str:
    """A recorded key in words: ``wall_time_s`` -> ``wall time (s)``, ``extra_eigenvalues`` -> ``extra eigenvalues``."""
    if key in LABELS:
        return LABELS[key]
    text = key.replace("_", " ")
    return text[:-2] + " (s)" if text.endswith(" s") else text


def fmt_number(x: float, *, snap: bool = True) -> str:
    """A float to 4 significant digits; |x| below :data:`NOISE` is 0 (rounding noise) unless ``snap`` is off."""
    if x != x:
        return "nan"
    if x in (float("inf"), float("-inf")):
        return "∞" if x > 0 else "−∞"
    if snap and abs(x) < NOISE:
        return "0"
    if x == int(x) and abs(x) < 1e15:
        return str(int(x))
    return f"{x:.4g}" if abs(x) >= 1e-3 else f"{x:.2e}"


def fmt_when(value: str | None) -> str:
    """An ISO timestamp as ``2026-12-02 11:28:35``."""
    return (value or "—").replace("T", " ")


def fmt_value(value: Any, *, snap: bool = True) -> str:
    """Compact display of a recorded value (numbers to 4 significant digits, lists summarised)."""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return fmt_number(value, snap=snap)
    if value is None:
        return "—"
    if isinstance(value, (list, tuple)):
        if not value:
            return "none"
        if all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in value):
            if len(value) <= 6:
                return " · ".join(fmt_value(v, snap=snap) for v in value)
            return (f"{len(value)} values, {fmt_value(min(value), snap=snap)} to "
                    f"{fmt_value(max(value), snap=snap)}")
        if len(value) <= 4:
            return ", ".join(fmt_value(v, snap=snap) for v in value)
        return ", ".join(fmt_value(v, snap=snap) for v in value[:4]) + f" and {len(value) - 4} more"
    if isinstance(value, dict):
        return ", ".join(f"{label(str(k))} {fmt_value(v, snap=snap)}" for k, v in value.items())
    return str(value)


def _section(text: Text, title: str) -> None:
    text.append(f"\n{title}\n", style=HEAD)


def _pairs(text: Text, items: dict[str, Any] | None, *, skip: tuple[str, ...] = (), raw: bool = False) -> None:
    """``key  value`` lines; ``raw`` keeps the keys as recorded (parameter names are what `--set` takes)."""
    if not items:
        text.append("  (none)\n", style=MUTED)
        return
    shown = {k: v for k, v in items.items() if k not in skip}
    name_of = (lambda k: k) if raw else label
    width = min(max((len(name_of(k)) for k in shown), default=0) + 2, 24)
    for key, value in shown.items():
        name = name_of(key)
        text.append("  " + name.ljust(width), style=KEY)
        if len(name) >= width:
            text.append("\n" + " " * (width + 2))
        # parameters are settings, never rounding noise: they keep their value however small
        text.append(fmt_value(value, snap=not raw and not any(t in key for t in _KEEP_TINY)) + "\n")


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
    _pairs(t, {"k": run.get("k"), "k_requested": run.get("k_requested"), "seed": run.get("seed"),
               "repeats": run.get("repeats"), "started": fmt_when(run.get("created")),
               "finished": fmt_when(run.get("finished")), "wall_time_s": run.get("wall_time_s"),
               "membership": (run.get("membership_hash") or "")[:16] or None,
               "by": run.get("by") or "unknown", "host": run.get("host")})
    if run.get("error"):
        _section(t, "Error")
        t.append("  " + run["error"] + "\n", style=BAD)
    _section(t, "Quality measures")
    # per-community lists are in the Communities section below; k is already shown above
    _pairs(t, {k: v for k, v in (run.get("quality") or {}).items()
               if k not in ("k", "sizes") and not k.endswith("_per_community")})
    _section(t, "Parameters")
    _pairs(t, run.get("params"), raw=True)  # the method's own parameter names, as the Launch form shows them
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
            t.append(f"size {c['size']:<7} conductance {fmt_value(c.get('conductance'))}")
            if c.get("stability") is not None:
                t.append(f"  stability {fmt_value(c['stability'])}")
            t.append("\n")
        if len(comms) > 12:
            t.append(f"  … {len(comms) - 12} more (see Spectrum for the size histogram)\n", style=MUTED)
    for comp in run.get("compositions") or []:
        _section(t, f"Composition by {comp['attribute']}")
        t.append(f"  ARI {fmt_value(comp['ari'])}  NMI {fmt_value(comp['nmi'])}  purity {fmt_value(comp['purity'])}"
                 f"  ({comp['nodes']} nodes, {len(comp['categories'])} values)\n")
        for c in comp["communities"][:12]:
            t.append(f"  c{c['community']:<4}", style=KEY)
            t.append(f"{c['dominant']}  {fmt_value(100 * c['dominant_share'])}% of {c['size']}\n")
        if len(comp["communities"]) > 12:
            t.append(f"  … {len(comp['communities']) - 12} more (`cutbook composition` lists them)\n", style=MUTED)
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
    _pairs(t, {"source": v.get("source"), "format": v.get("format"), "created": fmt_when(v.get("created")),
               "by": v.get("by") or "unknown", "content hash": (v.get("content_hash") or "")[:16], "parent": v.get("parent")})
    table = v.get("node_table")
    if table:
        _section(t, "Node attributes")
        coords = table.get("coords")
        t.append(f"  from {table['source']}, {table['rows']} rows"
                 + (f"; positions {coords['x']}, {coords['y']}" if coords else "") + "\n", style=MUTED)
        for c in table["columns"]:
            t.append("  " + str(c["name"]).ljust(20), style=KEY)
            t.append(f"{c['type']:<8} {c['distinct']} distinct"
                     + (f", {c['missing']} missing" if c["missing"] else "") + "\n")
    _section(t, "Import report")
    _pairs(t, v.get("report"))
    _section(t, "Import policy")
    _pairs(t, v.get("policy"))
    _section(t, "Change from parent")
    ch = v.get("changes_from_parent")
    if not ch and v.get("changes_not_computed"):
        t.append(f"  {v['changes_not_computed']}\n", style=MUTED)
    elif not ch:
        t.append("  first version (no parent)\n", style=MUTED)
    else:
        _pairs(t, {k: val for k, val in ch.items() if not isinstance(val, (list, dict))})
        listings = ch.get("listings") if isinstance(ch.get("listings"), dict) else {}
        for k, val in ch.items():
            if k != "listings" and isinstance(val, (list, dict)) and val:
                t.append("  " + label(k).ljust(20), style=KEY)
                t.append(fmt_value(val) + "\n")
        for k, items in listings.items():
            if not items:
                continue
            _section(t, label(k).capitalize())
            for item in items[:6]:
                t.append("  " + _change_item(item) + "\n")
            total = ch.get(k) if isinstance(ch.get(k), int) else len(items)  # listings are cut; counts are not
            if total > min(len(items), 6):
                t.append(f"  … {total - min(len(items), 6)} more (`cutbook changes` lists them)\n", style=MUTED)
    return t


def _change_item(item: Any) -> str:
    """One listed change: a node id, an edge ``u — v``, or a weight change ``u — v  13 → 4``."""
    if isinstance(item, (list, tuple)):
        if len(item) == 2:
            return f"{item[0]} — {item[1]}"
        if len(item) == 4:
            return f"{item[0]} — {item[1]}  {fmt_value(item[2])} → {fmt_value(item[3])}"
        return ", ".join(fmt_value(x) for x in item)
    if isinstance(item, dict):
        return fmt_value(item)
    return str(item)


def _plural(n: int, word: str, plural: str | None = None) -> str:
    return f"{n} {word if n == 1 else (plural or word + 's')}"


def store_text(projects: list[dict[str, Any]], store_label: str = "") -> Text:
    """The whole store, from :func:`workspace.services.browse.outline`."""
    t = Text()
    t.append("All projects", style="bold")
    if store_label:
        t.append(f"  {store_label}", style=KEY)
    t.append("\n")
    if not projects:
        t.append("  the store is empty — import a network with `cutbook import`\n", style=MUTED)
        return t
    for p in projects:
        runs = sum(v["runs"] for n in p["networks"] for v in n["versions"])
        t.append(f"  {p['project']}", style=HEAD)
        t.append(f"  {_plural(len(p['networks']), 'network')} · {_plural(runs, 'run')} · "
                 f"{_plural(p['param_sets'], 'parameter set')}\n")
    return t


def project_text(p: dict[str, Any]) -> Text:
    """One project of the outline: its networks with their versions and runs."""
    t = Text()
    t.append(p["project"], style="bold")
    runs = sum(v["runs"] for n in p["networks"] for v in n["versions"])
    t.append(f"  {_plural(len(p['networks']), 'network')} · {_plural(runs, 'run')} · "
             f"{_plural(p['param_sets'], 'parameter set')}\n")
    for n in p["networks"]:
        _section(t, n["network"])
        _versions(t, n["versions"])
    t.append("\nl launches a run on the newest version of the network under the cursor\n", style=MUTED)
    return t


def network_text(n: dict[str, Any]) -> Text:
    """One network of the outline: every version with its size and number of runs."""
    t = Text()
    t.append(n["ref"], style="bold")
    versions = n["versions"]
    runs = sum(v["runs"] for v in versions)
    t.append(f"  {_plural(len(versions), 'version')} · {_plural(runs, 'run')}\n")
    _section(t, "Versions")
    _versions(t, versions)
    if versions:
        t.append(f"\nl launches a run on @{versions[-1]['version']} (the newest)\n", style=MUTED)
    return t


def _versions(t: Text, versions: list[dict[str, Any]]) -> None:
    if not versions:
        t.append("  no versions\n", style=MUTED)
    for v in versions:
        t.append(f"  @{v['version']:<4}", style=f"bold {palette.ACCENT}")
        t.append(f"{v['nodes']} nodes · {v['edges']} edges · {_plural(v['runs'], 'run')}\n")
        if v.get("message"):
            t.append(f"        {v['message']}\n", style=KEY)


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


def next_label_attribute(attrs: list[str], current: str | None) -> str | None:
    """The attribute after ``current`` in ``attrs`` and then None (ids only), round again: what
    ``ctrl+l`` ("Label by") steps through on the screens that name nodes."""
    cycle = [*attrs, None]
    return cycle[(cycle.index(current) + 1) % len(cycle)] if current in cycle else cycle[0]
