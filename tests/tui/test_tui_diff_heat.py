"""The diff screen's heat table reads the sparse contingency: the largest A groups, each one's
largest B group first, counts equal to scikit-learn's dense contingency matrix on those rows and
columns (sklearn.metrics.cluster.contingency_matrix), and a title counting what is left out."""

from __future__ import annotations

import numpy as np
from sklearn.metrics.cluster import contingency_matrix

from workspace.compare import compare_memberships
from workspace.tui.screens.diff import _heat_view


def test_heat_view_of_a_fine_sparse_table():
    rng = np.random.default_rng(3)
    n, k = 20000, 300
    a = rng.integers(0, k, n)
    b = np.where(rng.random(n) < 0.1, rng.integers(0, k, n), (a + 7) % k)
    ids = np.char.add("v", np.char.zfill(np.arange(n).astype(str), 5))
    c = compare_memberships(ids, a, ids, b).to_dict()["contingency"]
    view, title = _heat_view(c, max_rows=18, max_cols=12)
    assert len(view["rows"]) == 18 and len(view["cols"]) == 12
    # the 18 largest A groups
    sizes = np.bincount(a, minlength=k)
    assert sorted(sizes[view["rows"]].tolist()) == sorted(np.sort(sizes)[-18:].tolist())
    dense = contingency_matrix(a, b)  # rows/cols = sorted labels 0..k-1 here
    assert view["counts"] == dense[np.ix_(view["rows"], view["cols"])].tolist()
    # each of the first rows' largest column sits on the diagonal
    assert view["cols"][0] == int(np.argmax(dense[view["rows"][0]]))
    shown = sum(1 for r in view["counts"] for v in r if v)
    assert f"{c['nnz'] - shown:,} more cells" in title and "of 300×300" in title


def test_heat_view_of_a_small_table_shows_everything():
    a = np.array([0, 0, 1, 1, 2, 2])
    b = np.array([1, 1, 0, 0, 0, 2])
    ids = np.array([f"v{i}" for i in range(6)])
    c = compare_memberships(ids, a, ids, b).to_dict()["contingency"]
    view, title = _heat_view(c)
    assert sorted(view["rows"]) == [0, 1, 2] and sorted(view["cols"]) == [0, 1, 2]
    assert "more" not in title
    dense = contingency_matrix(a, b)  # sklearn
    assert view["counts"] == dense[np.ix_(view["rows"], view["cols"])].tolist()
