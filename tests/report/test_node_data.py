"""Node attribute tables (CSV / GraphML / node-link JSON) and the composition of communities by one."""

from __future__ import annotations

import json

import networkx as nx
import numpy as np
import pytest
from sklearn.metrics import adjusted_rand_score, normalized_mutual_info_score

from graphs import adjacency_to_csv
from workspace.compare.composition import composition
from workspace.errors import InputError
from workspace.io.node_data import align_column, infer_type, read_node_table


def _karate_with_attributes():
    # Zachary's karate club as shipped by networkx, with its "club" node attribute and a few of ours
    G = nx.karate_club_graph()
    G = nx.relabel_nodes(G, {i: f"m{i:02d}" for i in range(34)})
    for i, node in enumerate(sorted(G.nodes)):
        G.nodes[node]["degree"] = G.degree(node)
        G.nodes[node]["leader"] = node in ("m00", "m33")
        G.nodes[node]["score"] = i / 7
    return G


def test_graphml_attributes_equal_networkx_reading(tmp_path):
    G = _karate_with_attributes()
    path = tmp_path / "club.graphml"
    nx.write_graphml(G, path)
    ref = nx.read_graphml(path)  # networkx.read_graphml as the reference reading of the same file
    table = read_node_table(path)
    assert table.ids == list(ref.nodes)
    assert set(table.columns) == {"club", "degree", "leader", "score"}
    assert {n: t["type"] for n, t in table.columns.items()} == \
        {"club": "text", "degree": "number", "leader": "boolean", "score": "number"}
    for name, col in table.columns.items():
        assert col["values"] == [ref.nodes[n][name] for n in ref.nodes], name


def test_graphml_key_default_is_used_like_networkx(tmp_path):
    path = tmp_path / "d.graphml"
    path.write_text('<?xml version="1.0" encoding="UTF-8"?>\n'
                    '<graphml xmlns="http://graphml.graphdrawing.org/xmlns">\n'
                    '<key id="k0" for="node" attr.name="zone" attr.type="string"><default>east</default></key>\n'
                    '<graph edgedefault="undirected">\n'
                    '<node id="a"><data key="k0">west</data></node>\n<node id="b"/>\n'
                    '<edge source="a" target="b"/>\n</graph>\n</graphml>\n', encoding="utf-8")
    # GraphML (Brandes et al. 2002): a node without <data> takes the key's <default>; networkx.read_graphml
    # keeps that default in G.graph["node_default"] rather than on the node
    ref = nx.read_graphml(path)
    expected = [ref.nodes[n].get("zone", ref.graph["node_default"]["zone"]) for n in ref.nodes]
    assert read_node_table(path).columns["zone"]["values"] == expected == ["west", "east"]


def test_node_link_json_fields_equal_networkx_reading(tmp_path):
    G = _karate_with_attributes()
    path = tmp_path / "club.json"
    path.write_text(json.dumps(nx.node_link_data(G, edges="links")), encoding="utf-8")
    ref = nx.node_link_graph(json.loads(path.read_text(encoding="utf-8")), edges="links")  # networkx
    table = read_node_table(path)
    assert table.ids == list(ref.nodes)
    assert {n: t["type"] for n, t in table.columns.items()} == \
        {"club": "text", "degree": "number", "leader": "boolean", "score": "number"}
    for name, col in table.columns.items():
        assert col["values"] == [ref.nodes[n][name] for n in ref.nodes], name


def test_csv_types_are_inferred(tmp_path):
    path = tmp_path / "nodes.csv"
    path.write_text("id,kind,size,open,mixed\nx,depot,3,TRUE,1\ny,stop,,false,a\nz,stop,2.5,,2\n",
                    encoding="utf-8")
    table = read_node_table(path)
    assert table.ids == ["x", "y", "z"]
    assert table.columns["kind"] == {"type": "text", "values": ["depot", "stop", "stop"]}
    assert table.columns["size"] == {"type": "number", "values": [3.0, None, 2.5]}
    assert table.columns["open"] == {"type": "boolean", "values": [True, False, None]}
    assert table.columns["mixed"] == {"type": "text", "values": ["1", "a", "2"]}
    # common practice: NaN / infinity are not numbers a table should carry silently
    assert infer_type(["1", "nan"])[0] == "text"
    assert align_column(table, "size", ["z", "w", "x", "y"]) == ("number", [2.5, None, 3.0, None])


@pytest.mark.parametrize("text, line, words", [
    ("node,a\nx,1\nx,2\n", 3, "listed twice (first at line 2)"),
    ("name,a\nx,1\n", 1, "'node' (or 'id') column"),
    ("node,a\nx,1,2\n", 2, "expected 2 fields"),
])
def test_bad_csv_names_file_and_line(tmp_path, text, line, words):
    path = tmp_path / "bad.csv"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(InputError) as err:
        read_node_table(path)
    assert err.value.line == line and words in str(err.value) and "bad.csv" in str(err.value)


def test_bad_graphml_value_names_the_line(tmp_path):
    path = tmp_path / "bad.graphml"
    path.write_text('<graphml xmlns="http://graphml.graphdrawing.org/xmlns">\n'
                    '<key id="k" for="node" attr.name="n" attr.type="int"/>\n<graph>\n'
                    '<node id="a"><data key="k">7</data></node>\n'
                    '<node id="b"><data key="k">seven</data></node>\n</graph></graphml>\n', encoding="utf-8")
    with pytest.raises(InputError) as err:
        read_node_table(path)
    assert err.value.line == 5 and "not an integer" in str(err.value)


def test_composition_counts_and_agreement_match_references():
    rng = np.random.default_rng(3)
    labels = rng.integers(0, 5, size=300)
    labels[:7] = -1
    cats = np.array(["north", "south", "east", "west"])
    values = [None if i % 23 == 0 else str(cats[(lab + rng.integers(0, 2)) % 4]) for i, lab in enumerate(labels)]
    res = composition(labels, values, nmi_normalization="geometric")
    keep = np.array([lab >= 0 and v is not None for lab, v in zip(labels, values)])
    lab_k = labels[keep]
    val_k = np.array(values, dtype=object)[keep].astype(str)
    assert res["categories"] == sorted(set(val_k)) and res["nodes"] == keep.sum()
    codes = np.searchsorted(np.array(res["categories"]), val_k)
    for row in res["communities"]:
        # recount with numpy.bincount, community by community
        recount = np.bincount(codes[lab_k == row["community"]], minlength=len(res["categories"]))
        assert row["counts"] == recount.tolist() and row["size"] == recount.sum()
        assert row["dominant"] == res["categories"][int(np.argmax(recount))]
    # scikit-learn's adjusted_rand_score / normalized_mutual_info_score as the references
    assert res["ari"] == pytest.approx(adjusted_rand_score(lab_k, val_k), abs=1e-12)
    assert res["nmi"] == pytest.approx(normalized_mutual_info_score(lab_k, val_k, average_method="geometric"),
                                       abs=1e-12)


def test_composition_cli_on_the_karate_club(cli, tmp_path):
    G = _karate_with_attributes()
    A = nx.to_scipy_sparse_array(nx.karate_club_graph(), nodelist=range(34), weight="weight")
    csv = adjacency_to_csv(A, tmp_path / "karate.csv", [f"m{i:02d}" for i in range(34)])
    assert cli("import", csv, "--project", "club", "--network", "karate", "--weight", "weight").code == 0
    run = cli("run", "club/karate", "--method", "njw", "--k", "2", "--json").json["run"]
    nodes = tmp_path / "club.graphml"
    nx.write_graphml(G, nodes)
    res = cli("composition", run, "--nodes", nodes, "--by", "club", "--json")
    assert res.code == 0, res.err
    doc = res.json
    for key in ("run", "attribute", "type", "categories", "nodes", "left_out", "communities", "purity", "ari", "nmi"):
        assert key in doc
    assert doc["categories"] == ["Mr. Hi", "Officer"] and doc["nodes"] == 34
    shown = cli("show", run, "--json").json
    assert [c["size"] for c in doc["communities"]] == [c["size"] for c in shown["communities"]]
    from workspace.services import runs
    from workspace.services.store import open_workspace

    st = open_workspace(tmp_path / "store.sqlite")
    try:
        ids, labels, _ = runs.load_membership(st, run)
    finally:
        st.dispose()
    truth = [G.nodes[i]["club"] for i in ids.tolist()]
    # scikit-learn as the reference for the agreement with the recorded split of the club
    assert doc["ari"] == pytest.approx(adjusted_rand_score(labels, truth), abs=1e-12)
    assert doc["nmi"] == pytest.approx(normalized_mutual_info_score(labels, truth), abs=1e-12)
    text = cli("composition", run, "--nodes", nodes, "--by", "club")
    assert text.code == 0 and "ARI" in text.out and "Officer" in text.out
    missing = cli("composition", run, "--nodes", nodes, "--by", "district")
    assert missing.code == 1 and "club.graphml" in missing.err and "no node attribute 'district'" in missing.err and "club" in missing.err


def test_run_report_with_a_composition(cli, tmp_path):
    import re

    import defusedxml.ElementTree as safe_etree

    G = _karate_with_attributes()
    A = nx.to_scipy_sparse_array(nx.karate_club_graph(), nodelist=range(34), weight="weight")
    csv = adjacency_to_csv(A, tmp_path / "karate.csv", [f"m{i:02d}" for i in range(34)])
    assert cli("import", csv, "--project", "club", "--network", "karate", "--weight", "weight").code == 0
    run = cli("run", "club/karate", "--method", "njw", "--k", "3", "--json").json["run"]
    other = cli("run", "club/karate", "--method", "njw", "--k", "2", "--json").json["run"]
    nodes = tmp_path / "club.json"
    nodes.write_text(json.dumps(nx.node_link_data(G, edges="links")), encoding="utf-8")
    page = tmp_path / "r.html"
    res = cli("report", run, "--nodes", nodes, "--by", "club", "-o", page, "--json")
    assert res.code == 0, res.err
    assert "composition" in res.json["figures"]
    text = page.read_text(encoding="utf-8")
    assert "Composition by club" in text
    svgs = re.findall(r"<svg\b.*?</svg>", text, re.S)
    assert len(svgs) == len(res.json["figures"])
    for svg in svgs:
        safe_etree.fromstring(svg)  # well-formed XML (defusedxml)

    # the stacked bars are the shares of each value per community, recounted with numpy.bincount
    from workspace.report.figures import composition_bars
    from workspace.services import reports, runs
    from workspace.services.store import open_workspace

    st = open_workspace(tmp_path / "store.sqlite")
    try:
        comp = reports.composition(st, run, nodes, "club")
        ids, labels, _ = runs.load_membership(st, run)
    finally:
        st.dispose()
    club = np.array([G.nodes[i]["club"] for i in ids.tolist()])
    fig = composition_bars(comp["communities"], comp["categories"], "club")
    widths = np.array([p.get_width() for p in fig.axes[0].patches]).reshape(len(comp["categories"]), -1)
    for j, value in enumerate(comp["categories"]):
        recount = np.bincount(labels[club == value], minlength=labels.max() + 1) / np.bincount(labels)
        np.testing.assert_allclose(widths[j], recount, atol=1e-12)

    assert cli("report", run, "--nodes", nodes, "-o", tmp_path / "x.html").code == 2
    assert cli("report", run, other, "--nodes", nodes, "--by", "club", "-o", tmp_path / "x.html").code == 2
    assert not (tmp_path / "x.html").exists()
