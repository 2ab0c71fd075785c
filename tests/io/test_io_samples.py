"""Sample files: the generators are deterministic, and the bundled invented network has
the three communities it was built with (networkx Louvain + scikit-learn ARI as referees).
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import networkx as nx
from sklearn.metrics import adjusted_rand_score

from workspace.domain import ImportPolicy
from workspace.io import SAMPLES_DIR, read_network

ROOT = Path(__file__).resolve().parents[2]
DATA = ROOT / "tests" / "data"


def _load(path: Path):
    spec = importlib.util.spec_from_file_location(path.stem, path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_test_data_regenerates_identically(tmp_path):
    _load(DATA / "make_samples.py").write_all(tmp_path)
    for name in ("karate.csv", "karate.tsv", "karate.txt", "karate.json", "directed.graphml"):
        assert (tmp_path / name).read_bytes() == (DATA / name).read_bytes(), name
    for name in sorted(_load(DATA / "make_samples.py").BAD_FILES):
        assert (tmp_path / "bad" / name).read_bytes() == (DATA / "bad" / name).read_bytes(), name
    # writer formatting of GraphML / Matrix Market may vary across library versions:
    # compare the graphs
    for name, weight in (("karate.graphml", "weight"), ("karate.mtx", "value")):
        ours = read_network(tmp_path / name, policy=ImportPolicy(weight=weight))[0]
        committed = read_network(DATA / name, policy=ImportPolicy(weight=weight))[0]
        assert ours.content_hash() == committed.content_hash(), name


def test_river_towns_sample(tmp_path):
    generator = _load(SAMPLES_DIR / "make_river_towns.py")
    generator.write(tmp_path / "river_towns.csv")
    bundled = SAMPLES_DIR / "river_towns.csv"
    assert (tmp_path / "river_towns.csv").read_bytes() == bundled.read_bytes()
    graph, report = read_network(bundled, policy=ImportPolicy(weight="weight"))
    assert report.nodes == 40 and report.components == 1 and report.weighted
    edges, valley = generator.river_towns()
    G = nx.Graph()
    G.add_weighted_edges_from(edges)
    assert report.edges == G.number_of_edges()
    # reference partitioner: networkx.community.louvain_communities (Blondel et al. 2008)
    found = nx.community.louvain_communities(G, weight="weight", seed=1)
    label = {node: k for k, members in enumerate(found) for node in members}
    nodes = sorted(G)
    assert len(found) == 3
    assert adjusted_rand_score([valley[x] for x in nodes], [label[x] for x in nodes]) == 1.0
