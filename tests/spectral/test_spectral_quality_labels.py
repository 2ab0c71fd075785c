"""The quality measures' label handling against numpy and networkx.

``quality._dense_labels`` must give exactly ``numpy.unique(labels, return_inverse=True)`` (the
reference), and the measures must not depend on which labels name the communities:
modularity against ``networkx.community.modularity`` (Newman & Girvan 2004) on the karate club
graph that ships with networkx, whatever the label values.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest

from workspace.spectral import quality_measures
from workspace.spectral.quality import _dense_labels


@pytest.mark.parametrize("labels", [
    np.array([3, 0, 3, 1, 1, 0, 7]),                       # a gap (no 2..6)
    np.array([0, 0, 0]),
    np.array([5]),
    np.arange(10)[::-1].copy(),
    np.array([2, 9, 2], dtype=np.uint16),
    np.array([4, 1, 4], dtype=np.uint64),                   # no safe cast to intp: numpy's sort
    np.array([1, 10 ** 12, 1, 7]),                          # too large to count: numpy's sort
    np.random.default_rng(3).integers(0, 300, 5000),
])
def test_dense_labels_are_numpys_unique(labels):
    values, inverse = _dense_labels(labels)
    want_values, want_inverse = np.unique(labels, return_inverse=True)
    assert values.dtype == want_values.dtype and inverse.dtype == np.int64
    np.testing.assert_array_equal(values, want_values)
    np.testing.assert_array_equal(inverse, want_inverse.ravel())


@pytest.mark.parametrize("relabel", [lambda c: c, lambda c: 40 * c + 3, lambda c: 10 ** 12 * (c + 1)])
def test_modularity_does_not_depend_on_label_values(relabel):
    G = nx.karate_club_graph()
    nodes = sorted(G)
    A = nx.to_scipy_sparse_array(G, nodelist=nodes, weight="weight", format="csr")
    club = np.array([0 if G.nodes[v]["club"] == "Mr. Hi" else 1 for v in nodes])
    q = quality_measures(A, relabel(club))
    groups = [{v for v in nodes if club[v] == c} for c in (0, 1)]
    assert q["modularity"] == pytest.approx(nx.community.modularity(G, groups, weight="weight"), abs=1e-12)
    assert q["sizes"] == [int((club == 0).sum()), int((club == 1).sum())]
