"""The demo holds a sweep whose recommendation tells the bridge story (invented scenario, deterministic)."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest

from workspace.demo.build import CITY, build_demo
from workspace.services import runs, sweeps


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    from workspace.services.store import open_workspace

    store = open_workspace(tmp_path_factory.mktemp("demo") / "demo.sqlite")
    summary = build_demo(store)
    yield store, summary
    store.dispose()


@pytest.mark.slow
def test_demo_sweep_recommends_eight_riding_areas(demo):
    store, summary = demo
    sw = sweeps.show_sweep(store, summary["sweeps"]["riding-areas@4"])
    assert sw["ref"] == f"{CITY}/stations@4" and sw["status"] == "done" and sw["tasks"]["done"] == 45
    # June: the seven districts plus the riding area that falls apart when Cinder Bridge closes
    assert sw["recommended_k"] == 8
    best = next(p for p in sw["points"] if p["k"] == 8)
    assert best["ari_mean"] == 1.0 and best["stable"] is True
    # the stored modularity equals networkx.community.modularity (Newman & Girvan 2004)
    ids, labels, _ = runs.load_membership(store, best["run"])
    g = runs._load_version_graph(store, _version_id(store, best["run"]))
    G = nx.Graph()
    G.add_nodes_from(range(len(ids)))
    G.add_weighted_edges_from(zip(g.edge_u.tolist(), g.edge_v.tolist(), g.weight.tolist()))
    comms = [set(np.flatnonzero(labels == c).tolist()) for c in range(labels.max() + 1)]
    assert best["modularity"] == pytest.approx(nx.community.modularity(G, comms, weight="weight"), abs=1e-12)


def _version_id(store, run_id):
    from workspace.store.schema import Run

    with store.read() as s:
        return s.get(Run, run_id).version_id
