"""Sweep and chain reports, and the network drawing at stored coordinates."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from scipy.optimize import linear_sum_assignment
from sklearn.metrics.cluster import contingency_matrix

from graphs import adjacency_to_csv


def _load_checks():
    # the self-containment check of the run/diff report tests, shared rather than copied
    import importlib.util
    from pathlib import Path

    spec = importlib.util.spec_from_file_location("report_content_checks",
                                                  Path(__file__).with_name("test_report_content.py"))
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module._check_self_contained


_check_self_contained = _load_checks()

IDS = [f"m{i:02d}" for i in range(34)]


def _edges_csv(path, G, skip_every: int | None = None):
    rows = [f"m{u:02d},m{v:02d}" for i, (u, v) in enumerate(G.edges) if not (skip_every and i % skip_every == 0)]
    path.write_text("source,target\n" + "\n".join(rows) + "\n", encoding="utf-8")
    return path


@pytest.fixture
def chain(cli, tmp_path):
    """Zachary's karate club (networkx) in three versions (some edges dropped), one parameter set run on each."""
    G = nx.karate_club_graph()
    for i, skip in enumerate((None, 6, 5)):
        res = cli("import", _edges_csv(tmp_path / f"v{i}.csv", G, skip), "--project", "club", "--network", "k")
        assert res.code == 0, res.err
    assert cli("params", "save", "club/three", "--method", "njw", "--k", "3").code == 0
    runs = [cli("run", f"club/k@{v}", "--params", "club/three", "--json").json["run"] for v in (1, 2, 3)]
    return runs


def _memberships(store_path, run_ids):
    from workspace.services import runs
    from workspace.services.store import open_workspace

    st = open_workspace(store_path)
    try:
        return [runs.load_membership(st, r)[:2] for r in run_ids]
    finally:
        st.dispose()


def test_chain_report_bands_are_shared_nodes_and_colours_follow_the_matching(cli, chain, tmp_path, store_path):
    out = tmp_path / "chain.html"
    res = cli("report", "--params", "club/three", "-o", out, "--json")
    assert res.code == 0, res.err
    assert res.json["runs"] == chain and res.json["figures"] == ["flow"]
    assert _check_self_contained(out.read_text(encoding="utf-8")) == 1
    assert cli("report", "--chain", *chain, "-o", tmp_path / "same.html").code == 0
    import re

    svg = re.compile(r"<svg\b.*?</svg>", re.S)
    # the runs named one by one give the same flow chart as the parameter set's chain
    assert svg.findall((tmp_path / "same.html").read_text(encoding="utf-8")) == \
        svg.findall(out.read_text(encoding="utf-8"))
    from workspace.services import reports
    from workspace.services.store import open_workspace

    st = open_workspace(store_path)
    try:
        data = reports.chain_report_data(st, chain)
    finally:
        st.dispose()
    from workspace.report.figures import flow_layout

    boxes, bands = flow_layout(data["columns"], data["steps"])
    mem = _memberships(store_path, chain)
    for step, ((ids_a, lab_a), (ids_b, lab_b)) in enumerate(zip(mem, mem[1:])):
        common = np.intersect1d(ids_a, ids_b)
        a = lab_a[np.searchsorted(ids_a, common)]
        b = lab_b[np.searchsorted(ids_b, common)]
        table = contingency_matrix(a, b)  # scikit-learn as the reference contingency over shared nodes
        got = {(bd["a"], bd["b"]): bd["count"] for bd in bands if bd["step"] == step}
        want = {(int(i), int(j)): int(table[i, j]) for i, j in zip(*np.nonzero(table))}
        assert got == want
        # band widths are proportional to shared nodes, on both ends
        for bd in (bd for bd in bands if bd["step"] == step):
            assert bd["a1"] - bd["a0"] == pytest.approx(bd["b1"] - bd["b0"])
        widths = {(bd["a"], bd["b"]): bd["a1"] - bd["a0"] for bd in bands if bd["step"] == step}
        unit = next(iter(widths.values())) / got[next(iter(widths))]
        for key, width in widths.items():
            assert width == pytest.approx(unit * got[key])
        # Hungarian matching (scipy.optimize.linear_sum_assignment, maximal overlap): a matched pair
        # that the diff keeps on one thread shares its colour across the step
        rows, cols = linear_sum_assignment(-table)
        colours = data["colour_of"]
        for i, j in zip(rows.tolist(), cols.tolist()):
            if table[i, j] > 0 and i in colours[step] and j in colours[step + 1]:
                assert colours[step][i] == colours[step + 1][j]
    # every community of every run has a box of its full size (numpy bincount of the stored membership)
    for col, (_, lab) in zip(data["columns"], mem):
        assert sorted(col) == [(c, int(n)) for c, n in enumerate(np.bincount(lab[lab >= 0])) if n]


def test_sweep_report_draws_the_stored_measures(cli, tmp_path, store_path):
    G = nx.karate_club_graph()
    assert cli("import", _edges_csv(tmp_path / "k.csv", G), "--project", "club", "--network", "k").code == 0
    sw = cli("sweep", "club/k", "--method", "njw", "--k", "2..5", "--seeds", "3", "--json")
    assert sw.code == 0, sw.err
    sweep_id = sw.json["sweep"]
    out = tmp_path / "sweep.html"
    res = cli("report", "--sweep", sweep_id, "-o", out, "--json")
    assert res.code == 0, res.err
    assert res.json["figures"] == ["quality", "stability"]
    assert _check_self_contained(out.read_text(encoding="utf-8")) == 2
    svg = tmp_path / "q.svg"
    assert cli("report", "--sweep", sweep_id, "--figure", "quality", "-o", svg).code == 0
    assert svg.read_bytes().startswith(b"<?xml")
    from workspace.report.figures import sweep_quality
    from workspace.services import reports
    from workspace.services.store import open_workspace

    st = open_workspace(store_path)
    try:
        data = reports.sweep_report_data(st, sweep_id)
    finally:
        st.dispose()
    points = [p for p in data["points"] if p["k"] is not None]
    fig = sweep_quality(points, data["recommended_k"])
    xs, ys = fig.axes[0].lines[0].get_data()
    assert list(xs) == [2, 3, 4, 5]
    # each plotted modularity equals networkx's modularity of that k's first run (networkx.community.modularity)
    mem = _memberships(store_path, [p["run"] for p in sorted(points, key=lambda p: p["k"])])
    for y, (ids, lab) in zip(ys, mem):
        parts = [{int(ids[i][1:]) for i in np.flatnonzero(lab == c)} for c in range(lab.max() + 1)]
        assert y == pytest.approx(nx.community.modularity(G, parts, weight=None), abs=1e-9)  # imported unweighted
    assert cli("report", "--sweep", sweep_id, 1, "-o", tmp_path / "x.html").code == 2
    assert cli("report", "--sweep", sweep_id, "--figure", "flow", "-o", tmp_path / "x.svg").code == 2


def test_network_drawing_sits_at_the_stored_coordinates(cli, tmp_path, store_path):
    import csv

    G = nx.karate_club_graph()
    A = nx.to_scipy_sparse_array(G, nodelist=range(34))
    edges = adjacency_to_csv(A, tmp_path / "k.csv", IDS)
    table = tmp_path / "places.csv"
    table.write_text("node,east,north,name\n" + "".join(f"m{i:02d},{(i * 37) % 11},{i / 3:.3f},n{i}\n"
                                                         for i in range(34)), encoding="utf-8")
    assert cli("import", edges, "--project", "club", "--network", "k", "--nodes", table,
               "--coords", "east,north").code == 0
    run = cli("run", "club/k", "--method", "njw", "--k", "2", "--json").json["run"]
    from workspace.report import html as pages
    from workspace.services import reports
    from workspace.services.store import open_workspace

    st = open_workspace(store_path)
    try:
        data = reports.run_report_data(st, run, label_by="name")
        ids, labels = _memberships(store_path, [run])[0]
    finally:
        st.dispose()
    with open(table, newline="", encoding="utf-8") as f:  # python csv as the reference reading
        rows = {r["node"]: (float(r["east"]), float(r["north"])) for r in csv.DictReader(f)}
    expected = np.array([rows[n] for n in ids.tolist()])
    assert data["graph"]["layout"] == {"kind": "coordinates", "x": "east", "y": "north", "projection": "plane"}
    caption, draw = pages.run_figures(data)["network"]
    assert "east" in caption and "north" in caption
    fig = draw()
    offsets = np.concatenate([c.get_offsets() for c in fig.axes[0].collections[1:]])
    order = np.concatenate([np.flatnonzero(np.where(labels >= 0, labels // 7, 0) == r)
                            for r in np.unique(np.where(labels >= 0, labels // 7, 0))])
    np.testing.assert_allclose(offsets, expected[order])
    names = [t.get_text() for t in fig.axes[0].texts]
    assert names == [f"n{int(n[1:])}" for n in ids.tolist()]
    # without coordinates: the seeded layout, recorded, the same in two reports
    plain = tmp_path / "plain.csv"
    plain.write_text("node,name\n" + "".join(f"m{i:02d},n{i}\n" for i in range(34)), encoding="utf-8")
    assert cli("nodes", "add", "club/k", plain).code == 0
    run2 = cli("run", "club/k", "--method", "njw", "--k", "2", "--json").json["run"]
    one, two = tmp_path / "a.svg", tmp_path / "b.svg"
    for path in (one, two):
        assert cli("report", run2, "--figure", "network", "-o", path).code == 0
    assert one.read_bytes() == two.read_bytes()
    st = open_workspace(store_path)
    try:
        assert reports.run_report_data(st, run2)["graph"]["layout"]["kind"] == "spring"
    finally:
        st.dispose()
