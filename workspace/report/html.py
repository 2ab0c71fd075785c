"""Self-contained HTML pages for a run and for a diff of two runs.

One file: inline CSS, figures as inline ``<svg>``, no scripts, no links to
anything outside the page; readable offline and printable (a print style keeps
figures and table rows whole).
"""

from __future__ import annotations

from html import escape
from typing import Any, Callable

import numpy as np

from workspace import palette
from workspace.report import figures as F
from workspace.report.render import inline_svg

#: Figures of a run report, in page order (``network`` only up to ``figures.DRAW_LIMIT`` nodes).
RUN_FIGURES = ("spectrum", "sizes", "stability", "composition", "network")
#: Figures of a diff report.
DIFF_FIGURES = ("contingency",)
#: Figures of a sweep report and of a chain report.
SWEEP_FIGURES = ("quality", "stability")
CHAIN_FIGURES = ("flow",)
#: Moved nodes listed by default (the rest summed up as "and N more").
MOVED_SHOWN = 50

_CSS = f"""
:root {{ color-scheme: light; }}
body {{ font-family: system-ui, -apple-system, "Segoe UI", Roboto, "DejaVu Sans", sans-serif;
  color: {palette.INK}; background: {palette.PAPER}; margin: 2rem auto; max-width: 60rem;
  padding: 0 1.2rem; line-height: 1.45; }}
h1 {{ font-size: 1.6rem; margin-bottom: .2rem; }}
h2 {{ font-size: 1.2rem; margin-top: 2rem; border-bottom: 2px solid {palette.PAPER_RULE};
  padding-bottom: .2rem; }}
.sub {{ color: {palette.INK_SOFT}; margin-top: 0; }}
table {{ border-collapse: collapse; margin: .6rem 0; font-variant-numeric: tabular-nums; }}
th, td {{ padding: .25rem .7rem; border-bottom: 1px solid {palette.PAPER_RULE}; text-align: left; }}
td.n, th.n {{ text-align: right; }}
tbody tr:nth-child(even) {{ background: {palette.PAPER_BAND}; }}
.swatch {{ display: inline-block; width: .8em; height: .8em; border: 1px solid {palette.INK_SOFT};
  margin-right: .4em; vertical-align: -.05em; }}
figure {{ margin: 1rem 0; }}
figure svg {{ max-width: 100%; height: auto; }}
figcaption {{ color: {palette.INK_SOFT}; font-size: .9rem; }}
.note {{ color: {palette.INK_SOFT}; font-style: italic; }}
@media print {{
  body {{ margin: 0; max-width: none; }}
  figure, tr {{ break-inside: avoid; page-break-inside: avoid; }}
  h2 {{ break-after: avoid; page-break-after: avoid; }}
}}
"""


def _num(x: Any) -> str:
    if x is None:
        return "–"
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, (int, np.integer)):
        return str(int(x))
    if isinstance(x, (float, np.floating)):
        return f"{float(x):.4g}"
    return escape(str(x))


def _table(columns: list[str], rows: list[list[Any]], numeric: set[str] = frozenset()) -> str:
    head = "".join(f'<th class="n">{escape(c)}</th>' if c in numeric else f"<th>{escape(c)}</th>"
                   for c in columns)
    body = []
    for row in rows:
        cells = []
        for c, v in zip(columns, row):
            text = v if isinstance(v, _Raw) else _num(v)
            cells.append(f'<td class="n">{text}</td>' if c in numeric else f"<td>{text}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


class _Raw(str):
    """Already-escaped HTML for a table cell."""


def _swatch(label: int) -> _Raw:
    colour = palette.community_colour(label) if label >= 0 else palette.FAINT
    if label >= len(palette.COMMUNITY):  # colours cycle after seven: striped like the hatched bars
        fill = f"repeating-linear-gradient(45deg,{colour} 0 3px,{palette.PAPER} 3px 5px)"
    else:
        fill = colour
    return _Raw(f'<span class="swatch" style="background:{fill}"></span>{int(label)}')


def _figure_html(name: str, fig, caption: str) -> str:
    return (f'<figure id="figure-{name}">{inline_svg(fig, f"fig-{name}")}'
            f"<figcaption>{escape(caption)}</figcaption></figure>")


def _page(title: str, subtitle: str, body: list[str]) -> str:
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
            f"<title>{escape(title)}</title>\n<style>{_CSS}</style>\n</head>\n<body>\n"
            f"<h1>{escape(title)}</h1>\n<p class=\"sub\">{escape(subtitle)}</p>\n"
            + "\n".join(body) + "\n</body>\n</html>\n")


# --- run ---------------------------------------------------------------------------------

def run_figures(data: dict[str, Any]) -> dict[str, tuple[str, Callable[[], Any]]]:
    """The figures a run report holds: name -> (caption, function drawing it).

    ``data`` keys: ``labels`` (ndarray of int, the stored membership),
    ``eigenvalues`` (list), ``gap_k`` (int or None: the run's eigengap
    suggestion), ``stability`` (ndarray or None), ``repeats`` (int),
    ``graph`` (None, or dict ``n``, ``edge_u``, ``edge_v``, ``weight``, drawn
    when ``n <= figures.DRAW_LIMIT``).
    """
    labels = np.asarray(data["labels"])
    out: dict[str, tuple[str, Callable[[], Any]]] = {}
    if data.get("eigenvalues") and data.get("gap_k") is not None:
        k = data["gap_k"]
        out["spectrum"] = (f"Smallest eigenvalues; the largest gap follows eigenvalue {k}.",
                           lambda: F.spectrum(data["eigenvalues"], k))
    sizes = np.bincount(labels[labels >= 0]) if (labels >= 0).any() else np.zeros(0, dtype=np.int64)
    out["sizes"] = ("Nodes per community.", lambda: F.community_sizes(sizes))
    if data.get("stability") is not None and (data.get("repeats") or 1) > 1:
        out["stability"] = (f"Node stability over {data['repeats']} repeats.",
                            lambda: F.stability_histogram(data["stability"], data["repeats"]))
    comp = data.get("composition")
    if comp is not None:
        out["composition"] = (f"Each community's make-up by {comp['attribute']}.",
                              lambda: F.composition_bars(comp["communities"], comp["categories"],
                                                         comp["attribute"]))
    g = data.get("graph")
    if g is not None and 0 < g["n"] <= F.DRAW_LIMIT:
        layout = g.get("layout") or {"kind": "spring", "seed": F.LAYOUT_SEED}

        def draw():
            if g.get("positions") is not None:
                pos = g["positions"]
            else:
                pos = F.spring_positions(g["n"], g["edge_u"], g["edge_v"], g["weight"],
                                         seed=layout.get("seed", F.LAYOUT_SEED))
            return F.network_drawing(pos, g["edge_u"], g["edge_v"], labels, node_labels=g.get("node_labels"))
        if g.get("positions") is not None:
            where = f"at the nodes' coordinates: x = {layout.get('x')}, y = {layout.get('y')}"
            if layout.get("projection") == "geographic":
                where += ", longitude scaled by the cosine of the mean latitude"
        else:
            where = f"force-directed layout, seed {layout.get('seed', F.LAYOUT_SEED)}"
        out["network"] = (f"The network, coloured by community ({where}).", draw)
    return out


def run_page(data: dict[str, Any]) -> str:
    """The HTML report of one run.

    ``data``: as :func:`run_figures`, plus ``run`` (the run's summary dict:
    ``run``, ``ref``, ``method``, ``kind``, ``label``, ``k``, ``seed``,
    ``repeats``, ``status``, ``membership_hash``, ``created``), ``quality``
    (dict of measures), ``communities`` (list of per-community dicts),
    ``notes`` (list of str).
    """
    r = data["run"]
    what = r["method"] if r.get("kind") == "computed" else f"attached '{r.get('label', '')}'"
    title = f"Run {r['run']}: {what} on {r['ref']}"
    body = []
    computed = r.get("kind") == "computed"
    facts = [["status", r.get("status")], ["communities (k)", r.get("k")]]
    if computed:
        facts += [["k asked", r.get("k_requested")], ["parameter set", r.get("param_set") or "– (values given)"]]
    facts += [["nodes", int(np.asarray(data["labels"]).size)], ["seed", r.get("seed")], ["repeats", r.get("repeats")],
              ["membership hash", (r.get("membership_hash") or "")[:16]], ["by", r.get("by")],
              ["created", r.get("created")]]
    if r.get("wall_time_s") is not None:
        facts.append(["wall time (s)", r.get("wall_time_s")])
    body.append("<h2>Run</h2>" + _table(["item", "value"], facts))
    # what another reader needs to repeat the run, after the results: every parameter value and how
    # the eigenproblem went
    provenance = []
    params = r.get("params") or {}
    if computed and params:
        provenance.append("<h2>Parameters</h2>" + _table(["parameter", "value"], [[k, params[k]] for k in sorted(params)]))
    d = r.get("diagnostics") or {}
    if computed and d.get("solver"):
        solver = d["solver"] + (f" ({d['blas_threads']} BLAS threads)" if d.get("blas_threads") else "")
        gap = d.get("eigengap_suggestion")
        rows = [["solver", solver], ["eigenproblems solved", d.get("eigensolves")],
                ["operator products", d.get("matvecs")], ["largest residual norm", d.get("residual_norm_max")],
                ["eigengap suggests k", gap if isinstance(gap, int) and not isinstance(gap, bool) else None]]
        provenance.append("<h2>Eigensolver</h2>" + _table(["item", "value"], rows))
    q = data.get("quality") or {}
    scalars = [[name.replace("_", " "), v] for name, v in q.items()
               if isinstance(v, (int, float)) and not isinstance(v, bool)]
    if scalars:
        body.append("<h2>Quality</h2>" + _table(["measure", "value"], scalars, {"value"}))
    comms = data.get("communities") or []
    if comms:
        cols = ["community", "size", "volume", "cut", "conductance", "stability"]
        rows = [[_swatch(c["community"])] + [c.get(k) for k in cols[1:]] for c in comms]
        body.append("<h2>Communities</h2>" + _table(cols, rows, set(cols[1:])))
    figs = run_figures(data)
    for name in RUN_FIGURES:
        if name in figs:
            caption, draw = figs[name]
            heading = {"spectrum": "Spectrum", "sizes": "Community sizes", "stability": "Stability",
                       "network": "Network", "composition": "Composition"}[name]
            if name == "composition":
                body.append(_composition_html(data["composition"], _figure_html(name, draw(), caption)))
                continue
            body.append(f"<h2>{heading}</h2>" + _figure_html(name, draw(), caption))
    g = data.get("graph")
    if g is not None and g["n"] > F.DRAW_LIMIT:
        body.append(f'<p class="note">The network has {g["n"]} nodes, more than {F.DRAW_LIMIT}: '
                    "it is not drawn.</p>")
    body += provenance
    for note in data.get("notes") or []:
        body.append(f'<p class="note">{escape(note)}</p>')
    return _page(title, "cutbook run report", body)


def _composition_html(comp: dict[str, Any], figure: str) -> str:
    attr = escape(str(comp["attribute"]))
    head = (f"<h2>Composition by {attr}</h2>"
            f"<p>Values of <b>{attr}</b> ({escape(comp['type'])}) from {escape(str(comp.get('nodes_file', '')))}: "
            f"{comp['nodes']} nodes with a community and a value"
            + (f", {comp['left_out']} left out" if comp.get("left_out") else "") + ".</p>")
    scores = _table(["agreement", "value"], [["adjusted Rand index", comp["ari"]],
                                             [f"NMI ({comp['nmi_normalization']})", comp["nmi"]],
                                             ["purity", comp["purity"]]], {"value"})
    rows = [[_swatch(c["community"]), c["size"], c["dominant"], c["dominant_share"]] for c in comp["communities"]]
    table = _table(["community", "size", "dominant value", "share"], rows, {"size", "share"})
    return head + scores + figure + table


# --- diff --------------------------------------------------------------------------------

def diff_figures(data: dict[str, Any]) -> dict[str, tuple[str, Callable[[], Any]]]:
    """The figures a diff report holds: name -> (caption, function drawing it).

    ``data``: the diff dict (``contingency`` with ``cells``, ``row_sizes``,
    ``col_sizes``).
    """
    c = data["contingency"]
    shown = min(15, len(c["row_sizes"])), min(15, len(c["col_sizes"]))
    which = ("all communities" if shown == (len(c["row_sizes"]), len(c["col_sizes"]))
             else f"the {shown[0]} and {shown[1]} largest communities of A and B")
    caption = f"Shared nodes between communities of run A (rows) and run B (columns); {which}."
    return {"contingency": (caption, lambda: F.contingency_heatmap(c["cells"], c["row_sizes"],
                                                                    c["col_sizes"], top=15))}


def diff_page(data: dict[str, Any], *, moved_shown: int = MOVED_SHOWN) -> str:
    """The HTML report of a diff of two runs.

    ``data``: the diff dict of the service (``a``, ``b`` run summaries, scores
    ``ari``, ``nmi``, ``ami``, ``vi_bits``, counts, ``matches``, ``events``,
    ``moved``, ``moved_nodes`` as ``[node, from, to, from_match]`` rows,
    ``contingency``).
    """
    a, b = data["a"], data["b"]

    def what(side: dict) -> str:     # an attached run by its label (its method is "attached")
        if side.get("kind") == "attached":
            return f"attached ‘{side.get('label') or 'no label'}’"
        return str(side.get("method") or side.get("label"))

    title = f"Run {a['run']} → run {b['run']}"
    body = [f"<p>A: run {a['run']} ({escape(what(a))} on {escape(a['ref'])}, k={a.get('k')}) — "
            f"B: run {b['run']} ({escape(what(b))} on {escape(b['ref'])}, k={b.get('k')})</p>"]
    scores = [["adjusted Rand index", data.get("ari")], [f"NMI ({data.get('nmi_normalization')})", data.get("nmi")],
              ["adjusted mutual information", data.get("ami")], ["variation of information (bits)", data.get("vi_bits")],
              ["nodes compared", data.get("n_scored")], ["only in A", data.get("only_in_a")],
              ["only in B", data.get("only_in_b")], ["moved nodes", data.get("moved")]]
    body.append("<h2>Agreement</h2>" + _table(["score", "value"], scores, {"value"}))
    caption, draw = diff_figures(data)["contingency"]
    body.append("<h2>Contingency</h2>" + _figure_html("contingency", draw(), caption))
    matches = data.get("matches") or []
    if matches:
        cols = ["A", "B", "overlap", "jaccard", "size A", "size B"]
        rows = [[_swatch(m["a"]), _swatch(m["b"]), m["overlap"], m["jaccard"], m["size_a"], m["size_b"]]
                for m in matches]
        body.append("<h2>Matched communities</h2>" + _table(cols, rows, {"overlap", "jaccard", "size A", "size B"}))
    events = data.get("events") or []
    if events:
        rows = [[e["kind"], ", ".join(map(str, e.get("a") or [])) or "–",
                 ", ".join(map(str, e.get("b") or [])) or "–", e.get("size_a"), e.get("size_b"),
                 e.get("jaccard")] for e in events]
        body.append("<h2>Events</h2>" + _table(["event", "A", "B", "size A", "size B", "jaccard"], rows,
                                               {"size A", "size B", "jaccard"}))
    moved = data.get("moved_nodes") or []
    total = int(data.get("moved") or 0)
    if total:
        rows = [[m[0], _swatch(m[1]) if m[1] is not None else "–", _swatch(m[2]) if m[2] is not None else "–"]
                for m in moved[:moved_shown]]
        cols = ["node", "community in A", "community in B"]
        if data.get("moved_labels") is not None:  # --label-by: each node's name beside its id
            cols.insert(1, str(data["label_by"]))
            rows = [[r[0], label] + r[1:] for r, label in zip(rows, data["moved_labels"])]
        more = total - len(rows)
        body.append("<h2>Moved nodes</h2>" + _table(cols, rows)
                    + (f'<p class="note">and {more} more</p>' if more > 0 else ""))
    for note in data.get("notes") or []:
        body.append(f'<p class="note">{escape(note)}</p>')
    return _page(title, "cutbook diff report", body)


# --- sweep -------------------------------------------------------------------------------

def sweep_figures(data: dict[str, Any]) -> dict[str, tuple[str, Callable[[], Any]]]:
    """The figures a sweep report holds: quality against k, and stability against k (with repeats).

    ``data``: the sweep as ``services.sweeps.show_sweep`` gives it (``points``, ``recommended_k``,
    ``stable_ari``).
    """
    points = [p for p in data.get("points") or [] if p.get("k") is not None]
    rec = data.get("recommended_k")
    out: dict[str, tuple[str, Callable[[], Any]]] = {}
    if points:
        mark = f"; the dashed line marks the recommended k = {rec}" if rec is not None else ""
        out["quality"] = (f"Quality of each k's first run{mark}.", lambda: F.sweep_quality(points, rec))
    if any(p.get("ari_mean") is not None for p in points):
        out["stability"] = (f"Agreement between the {data.get('seeds')} repeats at each k (mean ± sd of "
                            f"pairwise ARI; dotted: the stability threshold {data.get('stable_ari')}).",
                            lambda: F.sweep_stability(points, rec, data.get("stable_ari")))
    return out


def sweep_page(data: dict[str, Any]) -> str:
    """The HTML report of a sweep: its request, the recommendation, the measures per k and the figures."""
    title = f"Sweep {data['sweep']}: {data['method']} on {data['ref']}"
    vary = data.get("vary")
    facts = [["status", data.get("status")], ["k asked", ", ".join(map(str, data.get("ks") or []))],
             ["varied", f"{vary['name']} = {', '.join(map(str, vary['values']))}" if vary else "–"],
             ["seeds", f"{data.get('seeds')} from {data.get('seed')} (perturb {data.get('perturb')})"],
             ["recommended k", data.get("recommended_k")], ["created", data.get("created")],
             ["finished", data.get("finished")]]
    body = ["<h2>Sweep</h2>" + _table(["item", "value"], facts)]
    for rec in data.get("recommendations") or []:
        head = "Recommendation" + (f" (value {escape(str(rec['value']))})" if rec.get("value") is not None else "")
        rows = [[c["k"], c.get("rank"), "; ".join(map(str, c.get("reasons") or []))] for c in rec.get("candidates") or []]
        part = f"<h2>{head}</h2><p>Recommended k: <b>{_num(rec.get('recommended'))}</b></p>"
        if rows:
            part += _table(["k", "rank", "reasons"], rows, {"k", "rank"})
        for note in rec.get("notes") or []:
            part += f'<p class="note">{escape(str(note))}</p>'
        body.append(part)
    cols = ["k", "value", "run", "k found", "modularity", "conductance", "normalized cut", "eigengap",
            "ARI mean", "ARI sd", "stable"]
    keys = ["k", "value", "run", "k_found", "modularity", "conductance", "normalized_cut", "eigengap",
            "ari_mean", "ari_sd", "stable"]
    rows = [[p.get(k) for k in keys] for p in data.get("points") or []]
    if not (vary):
        cols, rows = cols[:1] + cols[2:], [r[:1] + r[2:] for r in rows]
    body.append("<h2>Measures per k</h2>" + _table(cols, rows, set(cols) - {"value", "stable"}))
    figs = sweep_figures(data)
    headings = {"quality": "Quality against k", "stability": "Stability against k"}
    for name in SWEEP_FIGURES:
        if name in figs:
            caption, draw = figs[name]
            body.append(f"<h2>{headings[name]}</h2>" + _figure_html(name, draw(), caption))
    return _page(title, "cutbook sweep report", body)


# --- chain across versions -----------------------------------------------------------------

def chain_figures(data: dict[str, Any]) -> dict[str, tuple[str, Callable[[], Any]]]:
    """The figure of a chain report: the flow of communities across the chain's runs.

    ``data``: ``columns`` (per run, ``[community, size]`` in drawing order), ``steps`` (per
    consecutive pair, the diff's contingency ``cells``), ``colour_of`` (per run, community ->
    thread), ``titles``.
    """
    caption = ("Communities of each run (boxes, with sizes) and the nodes they share with the next run's "
               "(bands, widths by shared nodes); a community matched step after step keeps its colour.")
    return {"flow": (caption, lambda: F.community_flow(data["columns"], data["steps"], data["colour_of"],
                                                       data["titles"]))}


def chain_page(data: dict[str, Any]) -> str:
    """The HTML report of a chain of runs across versions: per-step agreement, the flow chart, threads."""
    details = data["run_details"]
    first, last = details[0], details[-1]
    title = (f"Chain of {len(details)} runs: {escape(str(data.get('what') or first.get('method')))}"
             f" from {first['ref']} to {last['ref']}")
    body = []
    rows = [[d["run"], d["ref"], d.get("method") or d.get("label"), d.get("k")] for d in details]
    body.append("<h2>Runs</h2>" + _table(["run", "version", "method", "k"], rows, {"run", "k"}))
    steps = data.get("track_steps") or []
    rows = [[f"{st['from_run']} → {st['to_run']}", st.get("ari"), st.get("nmi"), st.get("moved"),
             _count(st.get("only_in_a")), _count(st.get("only_in_b")),
             ", ".join(sorted({e["kind"] for e in st.get("events") or []} - {"kept"})) or "–"] for st in steps]
    body.append("<h2>Steps</h2>" + _table(["step", "ARI", "NMI", "moved", "nodes gone", "nodes new", "events"],
                                          rows, {"ARI", "NMI", "moved", "nodes gone", "nodes new"}))
    caption, draw = chain_figures(data)["flow"]
    body.append("<h2>Flow of communities</h2>" + _figure_html("flow", draw(), caption))
    threads = data.get("lineage") or []
    if threads:
        rows = [[_swatch(t["thread"]), " → ".join(f"{p['community']} ({p['size']})" for p in t["path"]),
                 ", ".join(t.get("origin") or []), ", ".join(t.get("fate") or [])] for t in threads[:60]]
        body.append("<h2>Threads</h2><p>Each thread follows one community through the chain by the "
                    "diff's matching (Hungarian assignment on shared nodes).</p>"
                    + _table(["thread", "community (size) per run", "origin", "fate"], rows))
    return _page(title, "cutbook chain report", body)


def _count(x: Any) -> int:
    return len(x) if isinstance(x, (list, tuple)) else int(x or 0)
