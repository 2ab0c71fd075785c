"""The UI's run and version details show the node table and the run's composition by its categorical attributes."""

from __future__ import annotations

import networkx as nx
import numpy as np
from sklearn.metrics import adjusted_rand_score

from graphs import adjacency_to_csv


def test_run_detail_shows_compositions_and_version_detail_the_table(store, tmp_path):
    from workspace.services import networks, reports, runs
    from workspace.tui.widgets.detail import run_text, version_text

    G = nx.karate_club_graph()  # Zachary's karate club with its recorded "club" split (networkx)
    A = nx.to_scipy_sparse_array(G, nodelist=range(34))
    edges = adjacency_to_csv(A, tmp_path / "k.csv", [f"m{i:02d}" for i in range(34)])
    table = tmp_path / "t.csv"
    table.write_text("node,club,name,size\n" + "".join(f"m{i:02d},{G.nodes[i]['club']},p{i},{i}\n" for i in range(34)),
                     encoding="utf-8")
    networks.import_network(store, edges, project="p", network="k",
                            prepared=networks.prepare_import(edges, nodes=table))
    run = runs.launch(store, runs.prepare_run(store, "p/k", method="njw", k="2"))["run"]
    comps = reports.run_compositions(store, run)
    # categorical attributes only: "name" has 34 distinct values, "size" is a number
    assert [c["attribute"] for c in comps] == ["club"]
    ids, labels, _ = runs.load_membership(store, run)
    truth = [G.nodes[int(n[1:])]["club"] for n in ids.tolist()]
    assert comps[0]["ari"] == adjusted_rand_score(labels, truth)  # scikit-learn as the reference
    shown = runs.show_run(store, run)
    shown["compositions"] = comps
    text = run_text(shown).plain
    assert "Composition by club" in text and "purity" in text
    for c in comps[0]["communities"]:
        assert f"c{c['community']:<4}{c['dominant']}" in text
    v = version_text(networks.show_version(store, "p/k")).plain
    assert "Node attributes" in v and "club" in v and "text" in v and "t.csv" in v
    assert np.asarray(labels).size == 34
