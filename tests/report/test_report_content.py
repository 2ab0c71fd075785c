"""Run and diff reports: well-formed SVG, nothing fetched from outside, values from the stored runs."""

from __future__ import annotations

import re
from html.parser import HTMLParser

import defusedxml.ElementTree as safe_etree
import networkx as nx
import numpy as np
import pytest

from graphs import adjacency_to_csv

IDS = [f"m{i:02d}" for i in range(34)]
SVG = re.compile(r"<svg\b.*?</svg>", re.S)
URL_IN_CSS = re.compile(r"url\(\s*['\"]?([^)'\"]*)", re.I)


@pytest.fixture
def club(cli, tmp_path):
    """Zachary's karate club (networkx.karate_club_graph, weighted) with three runs."""
    A = nx.to_scipy_sparse_array(nx.karate_club_graph(), nodelist=range(34), weight="weight")
    path = adjacency_to_csv(A, tmp_path / "karate.csv", IDS)
    assert cli("import", path, "--project", "club", "--network", "karate", "--weight", "weight").code == 0
    runs = {}
    for name, argv in {"auto": ["--method", "njw", "--k", "auto"],
                       "two": ["--method", "njw", "--k", "2"],
                       "rep": ["--method", "njw", "--k", "3", "--repeats", "5", "--perturb", "0.3"]}.items():
        r = cli("run", "club/karate", *argv, "--json")
        assert r.code == 0, r.err
        runs[name] = r.json["run"]
    return runs


def _stored(store_path, run_id):
    """The stored membership and stability, read through the store, not through the report."""
    from workspace.services import runs
    from workspace.services.store import open_workspace

    st = open_workspace(store_path)
    try:
        ids, labels, _ = runs.load_membership(st, run_id)
        shown = runs.show_run(st, run_id, include_labels=True)
    finally:
        st.dispose()
    stability = [row.get("stability") for row in shown["membership"]]
    return ids, labels, shown, stability


class _Refs(HTMLParser):
    """Every src/href/action attribute, every tag, and the CSS text of a page (Python's html.parser)."""

    def __init__(self):
        super().__init__()
        self.refs, self.tags, self.css = [], [], []
        self._in_style = False

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        for name, value in attrs:
            if name in ("src", "href", "xlink:href", "action", "srcset", "poster", "data") and value:
                self.refs.append(value)
            if name == "style" and value:
                self.css.append(value)
        self._in_style = tag == "style"

    def handle_endtag(self, tag):
        self._in_style = False

    def handle_data(self, data):
        if self._in_style:
            self.css.append(data)


def _check_self_contained(page: str) -> int:
    """Asserts the page is self-contained; returns the number of inline SVG figures."""
    refs = _Refs()
    refs.feed(page)
    external = [r for r in refs.refs if not r.startswith("#")]
    assert external == [], external
    css_urls = [u for text in refs.css for u in URL_IN_CSS.findall(text) if not u.startswith("#")]
    assert css_urls == [], css_urls
    # common practice: a self-contained page has no scripts, stylesheets or fonts to fetch
    assert "script" not in refs.tags and "link" not in refs.tags and "iframe" not in refs.tags
    assert "@import" not in page and "@font-face" not in page
    # the only http(s) strings left are XML namespace declarations (xmlns="http://www.w3.org/2000/svg")
    for m in re.finditer(r"https?://", page):
        before = page[max(0, m.start() - 40):m.start()]
        assert re.search(r'xmlns(:\w+)?="$', before), page[m.start() - 40:m.start() + 40]
    svgs = SVG.findall(page)
    for svg in svgs:
        root = safe_etree.fromstring(svg)  # defusedxml (expat) as the XML well-formedness check
        assert root.tag == "{http://www.w3.org/2000/svg}svg"
    ids = re.findall(r'\bid="([^"]+)"', page)
    assert len(ids) == len(set(ids)), "element ids repeat across figures"
    return len(svgs)


def test_run_report_is_self_contained_and_holds_every_figure(cli, club, tmp_path):
    out = tmp_path / "auto.html"
    res = cli("report", club["auto"], "-o", out, "--json")
    assert res.code == 0, res.err
    assert res.json["figures"] == ["spectrum", "sizes", "network"]
    page = out.read_text(encoding="utf-8")
    assert _check_self_contained(page) == 3
    assert page.startswith("<!DOCTYPE html>") and "@media print" in page
    rep = cli("report", club["rep"], "-o", tmp_path / "rep.html", "--json")
    assert "stability" in rep.json["figures"]
    assert _check_self_contained((tmp_path / "rep.html").read_text(encoding="utf-8")) == len(rep.json["figures"])


def test_run_report_states_the_parameters_and_the_eigensolve_after_the_results(cli, club, tmp_path):
    """A report read by someone else carries what repeating the run needs: the parameter set (or
    that values were given), every stored parameter value and the eigensolver's figures, as the
    store holds them (`show --json`), after the results."""
    import html as std_html

    out = tmp_path / "two.html"
    assert cli("report", club["two"], "-o", out).code == 0
    page = std_html.unescape(out.read_text(encoding="utf-8"))
    shown = cli("show", club["two"], "--json").json
    cells = dict(re.findall(r"<tr><td>([^<]+)</td><td(?: class=\"n\")?>([^<]*)</td></tr>", page))
    assert cells["parameter set"] == "– (values given)" and cells["k asked"] == "2"
    for name, value in shown["params"].items():
        expected = f"{value:.4g}" if isinstance(value, float) else str(value)
        assert cells[name] == expected, name
    d = shown["diagnostics"]
    assert cells["solver"].split()[0] == d["solver"]
    assert cells["operator products"] == str(d["matvecs"])
    assert cells["eigenproblems solved"] == str(d["eigensolves"])
    assert page.index("<h2>Quality</h2>") < page.index("<h2>Parameters</h2>") < page.index("<h2>Eigensolver</h2>")


def test_report_is_reproducible(cli, club, tmp_path):
    # seeded layout, fixed SVG id salt, no dates: the same run gives the same bytes
    for name in ("a.html", "b.html"):
        assert cli("report", club["auto"], "-o", tmp_path / name).code == 0
    assert (tmp_path / "a.html").read_bytes() == (tmp_path / "b.html").read_bytes()


def test_size_bars_equal_the_stored_membership(store, club, store_path):
    from workspace.report.html import run_figures
    from workspace.services.reports import run_report_data

    data = run_report_data(store, club["auto"])
    fig = run_figures(data)["sizes"][1]()
    heights = [int(p.get_height()) for p in fig.axes[0].patches]
    _, labels, shown, _ = _stored(store_path, club["auto"])
    # numpy.bincount of the stored membership as the recount
    assert heights == np.bincount(labels).tolist()
    assert heights == [c["size"] for c in shown["communities"]]
    assert sum(heights) == 34


def test_spectrum_bars_are_the_normalised_laplacian_eigenvalues(store, club):
    from workspace.report.html import run_figures
    from workspace.services.reports import run_report_data

    data = run_report_data(store, club["auto"])
    assert data["gap_k"] is not None
    fig = run_figures(data)["spectrum"][1]()
    bars = np.array([p.get_height() for p in fig.axes[0].patches])
    # reference: numpy.linalg.eigvalsh of networkx.normalized_laplacian_matrix (weighted karate club)
    L = nx.normalized_laplacian_matrix(nx.karate_club_graph(), nodelist=range(34), weight="weight")
    ref = np.linalg.eigvalsh(L.toarray())[:bars.size]
    np.testing.assert_allclose(bars, ref, atol=1e-6)
    # the marker stands between eigenvalue k and k+1 (the chosen gap)
    k = data["gap_k"]
    assert [ln.get_xdata()[0] for ln in fig.axes[0].lines] == [k + 0.5]


def test_stability_histogram_counts_the_stored_stability(store, club, store_path):
    from workspace.report.html import run_figures
    from workspace.services.reports import run_report_data

    data = run_report_data(store, club["rep"])
    fig = run_figures(data)["stability"][1]()
    counts = [int(p.get_height()) for p in fig.axes[0].patches]
    _, _, _, stability = _stored(store_path, club["rep"])
    # numpy.histogram over ten equal bins on [0, 1] as the recount
    assert counts == np.histogram(np.array(stability, dtype=float), bins=10, range=(0, 1))[0].tolist()


def test_network_drawing_places_every_node_in_its_community_colour(store, club, store_path):
    from matplotlib.colors import to_hex

    from workspace.palette import community_colour
    from workspace.report.html import run_figures
    from workspace.services.reports import run_report_data

    data = run_report_data(store, club["auto"])
    fig = run_figures(data)["network"][1]()
    ax = fig.axes[0]
    edges, *scatters = ax.collections
    assert len(edges.get_segments()) == nx.karate_club_graph().number_of_edges() == 78
    points = np.concatenate([sc.get_offsets() for sc in scatters])
    colours = [to_hex(c) for sc in scatters for c in sc.get_facecolors()]
    assert points.shape == (34, 2)
    # each node i sits at the seeded layout position and wears its stored community's colour
    from workspace.report.figures import spring_positions

    g = data["graph"]
    pos = spring_positions(g["n"], g["edge_u"], g["edge_v"], g["weight"])
    _, labels, _, _ = _stored(store_path, club["auto"])
    for i, c in enumerate(labels.tolist()):
        j = int(np.argmin(np.abs(points - pos[i]).sum(axis=1)))
        assert np.allclose(points[j], pos[i]) and colours[j] == community_colour(c)


def test_diff_report_contingency_matches_scikit_learn(store, club, store_path, cli, tmp_path):
    from sklearn.metrics.cluster import contingency_matrix

    from workspace.report.figures import contingency_block
    from workspace.services.reports import diff_report_data

    data = diff_report_data(store, club["two"], club["auto"])
    c = data["contingency"]
    rows, cols, table = contingency_block(c["cells"], c["row_sizes"], c["col_sizes"], top=15)
    _, la, _, _ = _stored(store_path, club["two"])
    _, lb, _, _ = _stored(store_path, club["auto"])
    # scikit-learn's contingency_matrix of the two stored memberships as the reference
    ref = contingency_matrix(la, lb)
    np.testing.assert_array_equal(table, ref[np.ix_(rows, cols)])

    out = tmp_path / "diff.html"
    res = cli("report", club["two"], club["auto"], "-o", out, "--moved", "3", "--json")
    assert res.code == 0, res.err
    assert res.json["kind"] == "diff" and res.json["figures"] == ["contingency"]
    page = out.read_text(encoding="utf-8")
    assert _check_self_contained(page) == 1
    moved = data["moved"]
    assert moved > 3
    assert f"and {moved - 3} more" in page
    # the first three moved nodes, in the diff's order, are listed
    for node, *_ in data["moved_nodes"][:3]:
        assert f"<td>{node}</td>" in page
    assert f"<td>{data['moved_nodes'][3][0]}</td>" not in page


def test_communities_past_seven_get_their_own_marker_and_hatching():
    from workspace.report import figures as F

    # colours cycle after seven (the terminal UI's palette); shape and hatching tell 0 from 7
    labels = np.arange(16)
    pos = np.c_[np.arange(16.0), np.zeros(16)]
    fig = F.network_drawing(pos, np.array([0]), np.array([1]), labels)
    markers = [sc.get_paths()[0].vertices.shape[0] for sc in fig.axes[0].collections[1:]]
    assert len(markers) == 3 and len(set(markers)) == 3
    bars = F.community_sizes(np.ones(16, dtype=int)).axes[0].patches
    assert [b.get_hatch() or "" for b in bars] == [F.hatch_of(c) for c in range(16)]
    assert F.hatch_of(0) == "" and F.hatch_of(7) != "" and F.hatch_of(14) not in ("", F.hatch_of(7))


def test_heatmap_keeps_the_largest_communities():
    from workspace.report.figures import contingency_block

    # hand-made sparse table: sizes A (5, 1, 9), B (2, 8, 5); top two of each
    cells = [[0, 0, 2], [0, 1, 3], [1, 2, 1], [2, 1, 5], [2, 2, 4]]
    rows, cols, table = contingency_block(cells, [5, 1, 9], [2, 8, 5], top=2)
    assert rows.tolist() == [0, 2] and cols.tolist() == [1, 2]
    assert table.tolist() == [[3, 0], [5, 4]]
