"""A directed network as a user meets it: import with --directed keep, run the directed method
and an undirected one, repeat with perturbation, rerun, attach.

Outside references: networkx.stochastic_block_model (directed planted blocks),
networkx.community.modularity on a DiGraph (Leicht & Newman 2008), scikit-learn ARI.
"""

from __future__ import annotations

import networkx as nx
from sklearn.metrics import adjusted_rand_score


def _sbm_csv(tmp_path):
    sizes = [30, 40, 50]
    p = [[0.3, 0.02, 0.02], [0.02, 0.3, 0.02], [0.02, 0.02, 0.3]]
    G = nx.stochastic_block_model(sizes, p, directed=True, seed=3)
    G = nx.relabel_nodes(G, {v: f"d{v:03d}" for v in G})
    path = tmp_path / "flows.csv"
    with open(path, "w") as out:
        out.write("origin,destination\n")
        for u, v in G.edges():
            out.write(f"{u},{v}\n")
    truth = {f"d{v:03d}": b for b, size in enumerate(sizes) for v in range(sum(sizes[:b]), sum(sizes[:b + 1]))}
    return G, path, truth


def test_directed_network_end_to_end(cli, tmp_path):
    G, path, truth = _sbm_csv(tmp_path)
    imported = cli("import", path, "--project", "t", "--network", "flows", "--directed", "keep",
                   "--header", "yes", "--json")
    assert imported.code == 0, imported.err
    doc = imported.json
    assert doc["policy"]["directed"] == "keep" and doc["edges"] == G.number_of_edges()
    run = cli("run", "t/flows", "--method", "directed-walk", "--k", "auto", "--json")
    assert run.code == 0, run.err
    r = run.json
    assert r["k"] == 3 and r["diagnostics"]["directed"] is True and r["diagnostics"]["eigengap_suggestion"] == 3
    out = cli("export", r["run"], "--format", "csv", "-o", tmp_path / "m.csv")
    assert out.code == 0, out.err
    import csv

    with open(tmp_path / "m.csv", newline="") as fh:              # python csv: node,community
        labels = {row["node"]: int(row["community"]) for row in csv.DictReader(fh)}
    nodes = sorted(labels)
    assert adjusted_rand_score([truth[v] for v in nodes], [labels[v] for v in nodes]) > 0.95
    comms = [{v for v in nodes if labels[v] == c} for c in set(labels.values())]
    assert abs(r["quality"]["modularity"] - nx.community.modularity(G, comms)) < 1e-9
    # an undirected method on the directed version: runs on A + A^T and says so
    und = cli("run", "t/flows", "--method", "njw", "--k", "3", "--json").json
    assert any("symmetrised" in w for w in und["warnings"])
    # perturbed repeats and a bit-identical rerun
    rep = cli("run", "t/flows", "--method", "directed-walk", "--k", "3", "--repeats", "3", "--json")
    assert rep.code == 0, rep.err
    again = cli("rerun", r["run"], "--json")
    assert again.code == 0 and again.json["identical"] is True
    text = cli("show", "t/flows")
    assert text.code == 0 and "keep" in (text.out + text.err)
